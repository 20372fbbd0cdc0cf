"""The JSON sidecar written next to a profile: what produced it and how it came out.

Keys (SI units, unit suffix in every key): ``tool``, ``version``, ``route`` (file, sha256,
name, closed, length_m, stations, spacing_m, projection), ``limits``, ``constraints``,
``solver`` (name, status, iterations, inner_iterations, solve_time_s, notes), ``total_time_s``,
``solve_time_s``, ``envelope_time_s`` and ``time_gap_to_envelope`` (the jerk-free lower bound on
the time and the fraction the profile takes longer), ``peak_use`` (peak use of every limit,
1.0 = at the limit), ``peaks`` (peak acceleration, deceleration, lateral acceleration, jerk and
lateral jerk in SI units), ``binding_stretches``.
No time stamps, so the same inputs give the same bytes.
"""

from __future__ import annotations

import hashlib
import json
import math
import os
from pathlib import Path

from .. import __version__
from ..limits import Limits, RouteConstraints
from ..profile import Profile
from .atomic import atomic_open, check_writable


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


def write_meta_json(meta: dict, path: str | os.PathLike, force: bool = False) -> Path:
    with atomic_open(path, force) as fh:
        json.dump(meta, fh, indent=2, sort_keys=False)
        fh.write("\n")
    return Path(path)


__all__ = ["check_writable", "default_meta_path", "file_sha256", "json_safe", "profile_meta",
           "write_meta_json"]
