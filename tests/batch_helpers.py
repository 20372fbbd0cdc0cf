"""Shared steps of the batch tests: a real local Dask cluster and small invented networks.

The cluster is two worker processes of one thread each (the CI machine has 2 cores), started
once per test session and shared by the batch test modules (``dask_client`` fixture).
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from click.testing import CliRunner

from benchmarks._network import feature, invented_roads, write_geojson

FIELDS = dict(id_field="road_id", speed_field="speed_kmh", friction_field="friction")


@pytest.fixture(scope="session")
def dask_client():
    import logging

    from curvespeed.batch.cluster import start_local_cluster

    logging.getLogger("distributed").setLevel(logging.CRITICAL)
    cluster, client = start_local_cluster(2)
    yield client
    client.close()
    cluster.close()


def small_roads(count: int, seed: int = 11) -> list[dict]:
    """Short roads (0.7-1.0 km, a point every 5 m; curves from 200 m to 300 m before the end)
    so that a whole batch takes seconds."""
    return invented_roads(count, 0.7, 1.0, seed=seed)


def network(tmp_path: Path, roads: list[dict], extra: list[dict] = (),
            name: str = "net.geojson") -> Path:
    return write_geojson(tmp_path / name, [feature(r) for r in roads] + list(extra))


def single_road_plan(tmp_path: Path, road: dict, *options) -> bytes:
    """The profile ``curvespeed plan`` writes for one road saved as its own GeoJSON file, with
    the road's speed (as the top speed, the exact float) and friction on the command line."""
    from curvespeed.cli.main import cli
    from curvespeed.units import kmh_to_mps

    path = write_geojson(tmp_path / f"single-{road['road_id']}.geojson", [feature(road)])
    out = tmp_path / f"single-{road['road_id']}.csv"
    result = CliRunner().invoke(cli, ["plan", str(path), "-o", str(out), "--max-speed",
                                      repr(kmh_to_mps(road["speed_kmh"])), "--friction",
                                      repr(road["friction"]), *options])
    assert result.exit_code == 0, result.output
    return out.read_bytes()


def read_csv_rows(path: Path) -> list[dict]:
    import csv

    with open(path, newline="") as fh:
        return list(csv.DictReader(fh))


def manifest(outdir: Path, route_id: str, folder: str = "profiles") -> dict:
    return json.loads((outdir / folder / f"{route_id}.batch.json").read_text())
