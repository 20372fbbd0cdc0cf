"""The JSON sidecar written next to a profile: what produced it and how it came out.

Keys (SI units, unit suffix in every key): ``tool``, ``version``, ``route`` (file, sha256,
name, closed, length_m, stations, spacing_m, projection, local_origin: the WGS84 ``lat_deg``,
``lon_deg`` of the metric frame's origin ``x_m = y_m = 0``, or ``"none"`` for a route given in
x/y only), ``limits``, ``constraints``,
``solver`` (name, status, iterations, inner_iterations, solve_time_s, notes), ``total_time_s``,
``solve_time_s``, ``envelope_time_s`` and ``time_gap_to_envelope`` (the jerk-free lower bound on
the time and the fraction the profile takes longer), ``peak_use`` (peak use of every limit,
1.0 = at the limit), ``peaks`` (peak acceleration, deceleration, lateral acceleration, jerk and
lateral jerk in SI units), ``binding_stretches``.
No time stamps, so the same inputs give the same bytes.

:func:`read_profile_meta` reads the sidecar back (for ``curvespeed export`` and ``plot``): the
route's name, whether it is a loop, the planned time, and the limits and route constraints the
profile was planned with (:class:`ProfileSidecar`).
"""

from __future__ import annotations

import dataclasses
import hashlib
import json
import math
import os
from dataclasses import dataclass
from pathlib import Path

from .. import __version__
from ..errors import SpeedFileError
from ..friction import FrictionSection
from ..limits import Limits, RouteConstraints, SpeedZone, Stop, Superelevation
from ..profile import Profile
from ._common import finite_value, load_json, read_text, shown_number
from .atomic import check_writable, write_text_atomic


def file_sha256(path: str | os.PathLike) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for chunk in iter(lambda: fh.read(1 << 20), b""):
            h.update(chunk)
    return h.hexdigest()


def default_meta_path(profile_path: str | os.PathLike) -> Path:
    """``PROFILE.csv`` -> ``PROFILE.meta.json`` in the same folder."""
    p = Path(profile_path)
    return p.with_name(p.stem + ".meta.json")


def json_safe(value):
    """JSON-safe copy: non-finite floats become None, tuples lists, numpy scalars floats."""
    if isinstance(value, dict):
        return {k: json_safe(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [json_safe(v) for v in value]
    if hasattr(value, "item") and not isinstance(value, (str, bytes)):
        value = value.item()
    if isinstance(value, float) and not math.isfinite(value):
        return None
    return value


def profile_meta(profile: Profile, limits: Limits, constraints: RouteConstraints,
                 route_file: str | os.PathLike | None) -> dict:
    """The sidecar content as a dictionary."""
    geo = profile.geometry
    solve = profile.solve
    route = {
        "file": None if route_file is None else str(route_file),
        "sha256": None if route_file is None else file_sha256(route_file),
        "name": geo.name,
        "closed": geo.closed,
        "length_m": geo.length_m,
        "stations": geo.n_nodes,
        "spacing_m": geo.spacing_m,
        "projection": None if geo.projection is None else geo.projection.to_dict(),
        "local_origin": local_origin(geo.projection),
        "fit": geo.provenance,
    }
    meta = {
        "tool": "curvespeed",
        "version": __version__,
        "route": route,
        "limits": limits.to_dict(),
        "constraints": constraints.to_dict(),
        "solver": {"name": solve.solver, "status": solve.status.value,
                   "iterations": solve.iterations, "inner_iterations": solve.inner_iterations,
                   "solve_time_s": solve.solve_time_s, "notes": list(solve.notes)},
        "total_time_s": profile.total_time_s,
        "solve_time_s": solve.solve_time_s,
        "envelope_time_s": profile.envelope_time_s,
        "time_gap_to_envelope": profile.time_gap_to_envelope,
        "peak_use": profile.usage,
        "peaks": profile.extremes,
        "binding_stretches": profile.binding_stretches(),
    }
    return json_safe(meta)


def local_origin(projection) -> dict | str:
    """``{"lat_deg": ..., "lon_deg": ...}``: where the metric frame's origin (``x_m = y_m =
    0``) lies on WGS84, by the route's own projection; ``"none"`` for a route without one (given
    in x/y metres only)."""
    if projection is None:
        return "none"
    lat, lon = projection.to_latlon([0.0], [0.0])
    return {"lat_deg": float(lat[0]), "lon_deg": float(lon[0])}


def meta_json_text(meta: dict) -> str:
    """The sidecar file's text: ``meta`` as indented JSON, with a final newline."""
    return json.dumps(meta, indent=2, sort_keys=False) + "\n"


def write_meta_json(meta: dict, path: str | os.PathLike, force: bool = False) -> Path:
    """Write the sidecar ``meta`` to ``path`` (one output, all or nothing)."""
    return write_text_atomic(meta_json_text(meta), path, force)


# -- reading -----------------------------------------------------------------------------------

@dataclass(frozen=True)
class ProfileSidecar:
    """What a profile's JSON sidecar says about how the profile was made.

    Attributes
    ----------
    limits : Limits
        The vehicle limits used.
    constraints : RouteConstraints
        Zones, stops, superelevation and end speeds used.
    route_name : str or None
        The route's name.
    closed : bool or None
        Whether the route is a loop.
    total_time_s : float or None
        Planned time, s.
    source : str
        The sidecar's file name.
    route_file, route_sha256 : str or None
        The route file the profile was planned from and its SHA-256, as recorded.
    solver : str or None
        The solver, its status and iterations, in words (for reports).
    local_origin : tuple of float, str or None
        WGS84 ``(lat_deg, lon_deg)`` of the metric frame's origin, ``"none"`` for a route in
        x/y only, None when the sidecar does not say (written before it was recorded).
    """

    limits: Limits
    constraints: RouteConstraints
    route_name: str | None
    closed: bool | None
    total_time_s: float | None
    source: str
    route_file: str | None = None
    route_sha256: str | None = None
    solver: str | None = None
    local_origin: tuple | str | None = None


def read_profile_meta(path: str | os.PathLike) -> ProfileSidecar:
    """Read a profile's JSON sidecar (``PROFILE.meta.json``).

    Raises
    ------
    SpeedFileError
        Missing or unreadable file, invalid JSON, or a ``limits``/``constraints`` entry that is
        not what ``curvespeed plan`` writes; the message names the file and the key.
    """
    source = str(path)
    text = read_text(path, SpeedFileError)
    doc = load_json(text, source, SpeedFileError,
                    advice="write the sidecar again with curvespeed plan")
    if not isinstance(doc, dict) or not isinstance(doc.get("limits"), dict):
        raise SpeedFileError(f"{source}: no \"limits\" object; this is not a curvespeed profile "
                             "sidecar (PROFILE.meta.json written by curvespeed plan)")

    def number(value, key: str, optional: bool = False):
        if value is None and optional:
            return None
        number = finite_value(value)
        if number is None:
            raise SpeedFileError(f"{source}: {key} must be a finite number, got "
                                 f"{shown_number(value)}; write the sidecar again with "
                                 "curvespeed plan")
        return number

    fields = {f.name: f for f in dataclasses.fields(Limits)}
    optional_limits = {"max_jerk_mps3", "max_lateral_jerk_mps3", "lateral_friction_coefficient",
                       "max_power_w", "mass_kg"}
    values = {key: number(value, f"limits.{key}", key in optional_limits)
              for key, value in doc["limits"].items() if key in fields}
    limits = Limits(**values)

    raw = doc.get("constraints") or {}
    if not isinstance(raw, dict):
        raise SpeedFileError(f"{source}: \"constraints\" must be an object")

    def entries(key: str, cls, names: tuple[str, ...]):
        items = raw.get(key) or []
        if not isinstance(items, list):
            raise SpeedFileError(f"{source}: constraints.{key} must be a list")
        out = []
        for i, item in enumerate(items):
            label = f"constraints.{key}[{i}]"
            if not isinstance(item, dict) or any(n not in item for n in names):
                raise SpeedFileError(f"{source}: {label} needs {', '.join(names)}")
            nums = [number(item[n], f"{label}.{n}") for n in names]
            out.append(cls(*nums, origin=str(item.get("origin") or "")))
        return tuple(out)

    constraints = RouteConstraints(
        zones=entries("zones", SpeedZone, ("start_m", "end_m", "max_speed_mps")),
        stops=tuple(_stop_extras(stop, item, number)
                    for stop, item in zip(entries("stops", Stop, ("station_m",)),
                                          raw.get("stops") or [])),
        superelevation=entries("superelevation", Superelevation, ("start_m", "end_m", "rate")),
        friction=tuple(dataclasses.replace(sec, lateral_friction_coefficient=number(
            item.get("lateral_friction_coefficient"),
            "constraints.friction.lateral_friction_coefficient", True))
            for sec, item in zip(entries("friction", FrictionSection,
                                         ("start_m", "end_m", "friction_coefficient")),
                                 raw.get("friction") or [])),
        start_speed_mps=number(raw.get("start_speed_mps"), "constraints.start_speed_mps", True),
        end_speed_mps=number(raw.get("end_speed_mps"), "constraints.end_speed_mps", True))
    route = doc.get("route") if isinstance(doc.get("route"), dict) else {}
    name = route.get("name") if isinstance(route.get("name"), str) else None
    closed = route.get("closed") if isinstance(route.get("closed"), bool) else None
    total = finite_value(doc.get("total_time_s"))

    def text(value):
        return value if isinstance(value, str) else None

    return ProfileSidecar(limits=limits, constraints=constraints, route_name=name, closed=closed,
                          total_time_s=total, source=source, route_file=text(route.get("file")),
                          route_sha256=text(route.get("sha256")),
                          solver=solver_text(doc.get("solver")),
                          local_origin=_local_origin(route.get("local_origin")))


def _local_origin(value) -> tuple | str | None:
    """A sidecar's ``route.local_origin`` as ``(lat, lon)``, ``"none"``, or None (absent or not
    understood)."""
    if value == "none":
        return "none"
    if isinstance(value, dict):
        lat, lon = finite_value(value.get("lat_deg")), finite_value(value.get("lon_deg"))
        if lat is not None and lon is not None:
            return lat, lon
    return None


def _stop_extras(stop: Stop, item: dict, number) -> Stop:
    """A sidecar's stop with its optional dwell, name and snapping distance."""
    name = item.get("name")
    return dataclasses.replace(
        stop, dwell_s=number(item.get("dwell_s"), "constraints.stops.dwell_s", True),
        name=name if isinstance(name, str) else "",
        snap_distance_m=number(item.get("snap_distance_m"), "constraints.stops.snap_distance_m",
                               True))


def solver_text(solver) -> str | None:
    """``convex: optimal, 12 iteration(s), 0.41 s`` from a sidecar's ``solver`` entry."""
    if not isinstance(solver, dict) or not isinstance(solver.get("name"), str):
        return None
    out = f"{solver['name']}: {solver.get('status', 'status not recorded')}"
    if isinstance(solver.get("iterations"), int):
        out += f", {solver['iterations']} iteration(s)"
    notes = [n for n in solver.get("notes") or [] if isinstance(n, str)]
    return out + "".join(f"; {n}" for n in notes)


__all__ = ["ProfileSidecar", "check_writable", "default_meta_path", "file_sha256", "json_safe",
           "local_origin", "meta_json_text", "profile_meta", "read_profile_meta", "write_meta_json"]
