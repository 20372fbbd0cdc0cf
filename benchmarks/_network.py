"""Invented road networks for the batch benchmark and tests (no real place or road).

Each road is a winding line of the benchmark's kind (:func:`benchmarks.run.winding_curvature`:
curves of radius 40-600 m blended over 40 m, from a seeded generator) with a point every 5 m,
placed on a grid around an invented origin and given in WGS84 longitude/latitude, with a posted
speed and a friction coefficient drawn from the same generator.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np

#: The invented origin of the grid of roads, degrees (open sea: no real road is meant).
ORIGIN_LAT_DEG, ORIGIN_LON_DEG = -30.0, -20.0
#: Grid pitch between road starts, metres.
PITCH_M = 8000.0


def invented_roads(count: int, min_km: float = 1.0, max_km: float = 5.0, seed: int = 7,
                   point_step_m: float = 5.0) -> list[dict]:
    """``count`` roads: dicts with ``road_id``, ``lonlat`` (n, 2), ``speed_kmh``, ``friction``."""
    from benchmarks.run import winding_curvature
    from curvespeed.geodesy import LocalProjection
    from curvespeed.geometry import geometry_from_curvature

    rng = np.random.default_rng(seed)
    projection = LocalProjection(ORIGIN_LAT_DEG, ORIGIN_LON_DEG)
    roads = []
    for i in range(count):
        length = float(rng.uniform(min_km, max_km)) * 1000.0
        kappa = winding_curvature(length, point_step_m, seed=seed * 100003 + i)
        geo = geometry_from_curvature(kappa, ds=point_step_m, name=f"road {i}")
        x = geo.x_m + (i % 25) * PITCH_M
        y = geo.y_m + (i // 25) * PITCH_M
        lat, lon = projection.to_latlon(x, y)
        roads.append({"road_id": f"R{i:04d}", "lonlat": np.column_stack([lon, lat]),
                      "speed_kmh": float(rng.choice([50.0, 60.0, 70.0, 80.0, 90.0])),
                      "friction": round(float(rng.uniform(0.5, 0.9)), 2)})
    return roads


def feature(road: dict, **extra) -> dict:
    props = {"road_id": road["road_id"], "speed_kmh": road["speed_kmh"],
             "friction": road["friction"], **extra}
    return {"type": "Feature", "properties": props,
            "geometry": {"type": "LineString",
                         "coordinates": [[float(lon), float(lat)] for lon, lat in road["lonlat"]]}}


def write_geojson(path: str | Path, features: list[dict]) -> Path:
    """A FeatureCollection of ``features`` (coordinates written exactly: Python's shortest
    round-trip repr)."""
    path = Path(path)
    path.write_text(json.dumps({"type": "FeatureCollection", "features": features}))
    return path
