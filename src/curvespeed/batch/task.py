"""One road of a batch: the task every worker runs, and what it hands back.

:func:`run_route` is a pure function of its arguments, called in a plain loop when the batch runs
in this process and submitted to Dask otherwise, so the two give the same bytes. It never raises
for a road: a road that cannot be planned or checked comes back as a failure record with the
error's type and message. It calls the same library functions as ``curvespeed plan`` and
``curvespeed check`` (fit, plan, check, the profile and report writers' text), so a road's
profile is byte-identical to the single-route command's on the same points and settings.
"""

from __future__ import annotations

import hashlib
import json
import time
import warnings
from dataclasses import dataclass, field

from .. import __version__
from ..limits import Limits, RouteConstraints


@dataclass(frozen=True)
class BatchSettings:
    """What every road of a batch is planned or checked with.

    Attributes
    ----------
    command : str
        ``plan`` or ``check``.
    limits, constraints : Limits, RouteConstraints
        As for one route (a road's ``speed_mps`` and ``friction`` attributes replace the top
        speed and the friction coefficient for that road when planning; when checking, the speed
        is the one checked).
    origin : str
        Where the limits came from, for reports.
    geometry : dict
        Keyword arguments of :func:`curvespeed.geometry.build_geometry` (spacing, noise,
        elevation, closed).
    solver : str or None
        :class:`~curvespeed.solvers.SolverKind` value; None for the default.
    comfort_weight : float
        The convex solver's weight on changes of acceleration.
    qp_backend : str or None
        :class:`~curvespeed.solvers.QPBackend` value; None for the default.
    design_speed_kmh, e_max, curve_radius_m : float or None
        ``check``'s design criteria and curve threshold (None: its defaults).
    """

    command: str
    limits: Limits
    constraints: RouteConstraints = RouteConstraints()
    origin: str = "built-in defaults"
    geometry: dict = field(default_factory=dict)
    solver: str | None = None
    comfort_weight: float = 0.0
    qp_backend: str | None = None
    design_speed_kmh: float | None = None
    e_max: float = 0.08
    curve_radius_m: float | None = None

    def to_dict(self) -> dict:
        return {"command": self.command, "limits": self.limits.to_dict(),
                "constraints": self.constraints.to_dict(), "geometry": self.geometry,
                "solver": self.solver, "comfort_weight": self.comfort_weight,
                "qp_backend": self.qp_backend, "design_speed_kmh": self.design_speed_kmh,
                "e_max": self.e_max, "curve_radius_m": self.curve_radius_m}


@dataclass(frozen=True)
class RouteRecord:
    """What one road's task hands back (picklable).

    Attributes
    ----------
    route_id, source : str
        The road's id and where it came from.
    input_sha256 : str
        :func:`input_digest` of the road and the settings.
    ok : bool
        True when the road was planned (or checked) and its files are in ``files``.
    error_type, message : str
        For a failure: the error's class name and its message.
    files : dict
        Output file name (within the batch's route folder) -> its bytes (UTF-8 text).
    summary : dict
        The road's row of ``summary.csv`` (SI units in the keys).
    manifest : bytes
        The road's manifest, written after its files (:mod:`~curvespeed.batch.pack`); empty for
        a failure and for a road taken from an earlier run.
    layer : bytes
        The road's curves as the layers are written from them (:func:`~curvespeed.batch.pack.
        layer_piece`); :attr:`curves` reads them.
    warnings : tuple of str
        Warnings raised while the road was read, fitted, planned or checked.
    passed : bool or None
        Every curve and station within the limits (None for a failure).
    compute_s : float
        Wall time of the task, seconds.
    """

    route_id: str
    source: str
    input_sha256: str
    ok: bool
    error_type: str = ""
    message: str = ""
    files: dict = field(default_factory=dict)
    summary: dict = field(default_factory=dict)
    manifest: bytes = b""
    layer: bytes = b""
    warnings: tuple = ()
    passed: bool | None = None
    compute_s: float = 0.0

    @property
    def curves(self) -> list[dict]:
        """One entry per curve for the curves layer, with its ``lonlat`` positions (None for a
        road in a local metric frame)."""
        from .pack import piece_curves

        return piece_curves(self.layer)


def input_digest(spec, settings: BatchSettings) -> str:
    """SHA-256 over what a road's outputs depend on: the tool's version, the settings, the road's
    positions (or file bytes) and attributes. A rerun skips a road whose stored digest matches."""
    h = hashlib.sha256()
    head = {"tool": "curvespeed", "version": __version__, "settings": settings.to_dict(),
            "route_id": spec.route_id, "speed_mps": spec.speed_mps, "friction": spec.friction,
            "name": spec.name, "source": spec.source}
    h.update(json.dumps(head, sort_keys=True, default=str).encode())
    h.update(spec.content())
    return h.hexdigest()


def failure(spec, digest: str, error_type: str, message: str, compute_s: float = 0.0,
            caught=()) -> RouteRecord:
    return RouteRecord(spec.route_id, spec.source, digest, False, error_type, message,
                       warnings=tuple(caught), compute_s=compute_s)


def run_route(spec, settings: BatchSettings, digest: str) -> RouteRecord:
    """Plan (or check) one road; every error comes back as a failure record, never raised."""
    start = time.perf_counter()
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            if spec.problem:
                raise _RoadProblem(spec.problem)
            from .pack import file_bytes, layer_piece, manifest_bytes
            from .work import check_road, plan_road

            work = plan_road if settings.command == "plan" else check_road
            files, summary, curves, passed = work(spec, settings, digest)
            notes = tuple(dict.fromkeys(str(w.message) for w in caught))
            summary = {**summary, "warnings": len(notes)}
            # made here, beside the road's computation: the store only writes these bytes
            data = file_bytes(files)
            manifest = manifest_bytes(digest, data, spec.source, summary, curves, notes, passed)
            layer = layer_piece(curves)
        except Exception as exc:       # a road's failure is its record; the batch goes on
            message = str(exc) or repr(exc)
            kind = "InputError" if isinstance(exc, _RoadProblem) else type(exc).__name__
            return failure(spec, digest, kind, message, time.perf_counter() - start,
                           [str(w.message) for w in caught])
    return RouteRecord(spec.route_id, spec.source, digest, True, files=data, summary=summary,
                       manifest=manifest, layer=layer, warnings=notes, passed=passed,
                       compute_s=time.perf_counter() - start)


class _RoadProblem(Exception):
    """A road the reader found unusable (its spec's ``problem``)."""
