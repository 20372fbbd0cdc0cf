"""``curvespeed batch plan|check`` on the command line: exit codes 0/1/2/3, the files written
(or not), GeoPackage and folder inputs. The runs go to the tests' local cluster through
``--scheduler`` (one cluster for the session); one test starts the command's own local cluster.
"""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import pytest
from click.testing import CliRunner

from batch_helpers import network, read_csv_rows, single_road_plan, small_roads
from curvespeed.cli.main import cli

ROUTES = Path(__file__).resolve().parent.parent / "routes"
FIELD_ARGS = ["--id-field", "road_id", "--speed-field", "speed_kmh", "--friction-field",
              "friction"]


def batch(*args):
    return CliRunner().invoke(cli, ["batch", *map(str, args)])


def scheduler(client) -> list[str]:
    return ["--scheduler", client.scheduler.address]


@pytest.fixture(scope="module")
def roads():
    return small_roads(3, seed=21)


def test_plan_writes_every_output_and_exits_0(tmp_path, roads, dask_client):
    net = network(tmp_path, roads)
    out = tmp_path / "out"
    result = batch("plan", net, "-o", out, *FIELD_ARGS, *scheduler(dask_client))
    assert result.exit_code == 0, result.output
    assert "3 road(s): 3 processed, 0 kept from an earlier run, 0 failed" in result.output
    for road in roads:
        rid = road["road_id"]
        assert (out / "profiles" / f"{rid}.meta.json").exists()
        assert (out / "profiles" / f"{rid}.csv").read_bytes() == single_road_plan(tmp_path, road)
    assert [r["route_id"] for r in read_csv_rows(out / "summary.csv")] == \
        [r["road_id"] for r in roads]
    assert read_csv_rows(out / "failures.csv") == []
    layer = json.loads((out / "curves.geojson").read_text())
    assert layer["features"], "the invented roads have curves"
    first = layer["features"][0]
    assert first["geometry"]["type"] == "LineString"
    assert {"route_id", "curve", "start_m", "apex_m", "end_m", "min_radius_m",
            "advisory_speed_kmh", "worst_use", "verdict"} <= set(first["properties"])
    import pyogrio

    info = pyogrio.read_info(str(out / "curves.gpkg"))
    assert info["crs"] == "EPSG:4326" and info["features"] == len(layer["features"])
    again = batch("plan", net, "-o", out, *FIELD_ARGS, *scheduler(dask_client))
    assert again.exit_code == 0 and "0 processed, 3 kept from an earlier run" in again.output


def test_a_broken_road_exits_3_and_the_rest_is_written(tmp_path, roads, dask_client):
    bad = {"type": "Feature", "properties": {"road_id": "BAD", "speed_kmh": "fast",
                                             "friction": 0.7},
           "geometry": {"type": "LineString", "coordinates": roads[0]["lonlat"].tolist()}}
    net = network(tmp_path, roads[:2], [bad])
    out = tmp_path / "out"
    result = batch("plan", net, "-o", out, *FIELD_ARGS, *scheduler(dask_client))
    assert result.exit_code == 3, result.output
    assert "1 road(s) could not be processed" in result.output
    (failure,) = read_csv_rows(out / "failures.csv")
    assert failure["route_id"] == "BAD" and "'fast'" in failure["message"]
    assert len(read_csv_rows(out / "summary.csv")) == 2


def test_check_exits_1_on_a_violation_and_0_when_every_road_passes(tmp_path, roads,
                                                                   dask_client):
    fast = [dict(r, speed_kmh=200.0) for r in roads]       # far over every curve's limit
    out = tmp_path / "fast"
    result = batch("check", network(tmp_path, fast, name="fast.geojson"), "-o", out,
                   *FIELD_ARGS, *scheduler(dask_client))
    assert result.exit_code == 1, result.output
    assert "FAIL: 3 road(s) fail the check" in result.output
    assert {r["result"] for r in read_csv_rows(out / "summary.csv")} == {"fail"}
    assert (out / "checks" / f"{roads[0]['road_id']}.json").exists()
    slow = [dict(r, speed_kmh=20.0) for r in roads]
    out = tmp_path / "slow"
    result = batch("check", network(tmp_path, slow, name="slow.geojson"), "-o", out,
                   *FIELD_ARGS, *scheduler(dask_client))
    assert result.exit_code == 0, result.output
    assert "PASS: every road within the limits" in result.output


def test_geopackage_and_folder_inputs(tmp_path, roads, dask_client):
    import pyogrio

    net = network(tmp_path, roads)
    gpkg = tmp_path / "net.gpkg"
    meta, _, geoms, values = pyogrio.raw.read(str(net))
    pyogrio.raw.write(str(gpkg), geoms, values, meta["fields"], driver="GPKG", layer="roads",
                      geometry_type="LineString", crs="EPSG:4326")
    out = tmp_path / "from-gpkg"
    result = batch("plan", gpkg, "--layer", "roads", "-o", out, *FIELD_ARGS,
                   *scheduler(dask_client))
    assert result.exit_code == 0, result.output
    for road in roads:
        rid = road["road_id"]
        assert (out / "profiles" / f"{rid}.csv").read_bytes() == \
            single_road_plan(tmp_path, road)
    folder = tmp_path / "routes"
    folder.mkdir()
    for name in ("mountain_road.csv", "test_loop.geojson"):
        shutil.copy(ROUTES / name, folder / name)
    out = tmp_path / "from-folder"
    result = batch("plan", folder, "-o", out, *scheduler(dask_client))
    assert result.exit_code == 0, result.output
    single = tmp_path / "single.csv"
    assert CliRunner().invoke(cli, ["plan", str(folder / "mountain_road.csv"), "-o",
                                    str(single)]).exit_code == 0
    assert (out / "profiles" / "mountain_road.csv").read_bytes() == single.read_bytes()
    assert (out / "profiles" / "test_loop.csv").exists()


def test_opendrive_roads_are_the_single_road_plans(tmp_path, dask_client):
    """Every road of the invented proving ground that is not a junction's connecting road is
    one task, planned byte for byte as ``plan ROAD.xodr --road ID`` plans it (its default lane,
    the road's speed records and superelevation)."""
    from curvespeed.io.opendrive import parse_opendrive

    xodr = ROUTES / "proving_ground.xodr"
    network_ = parse_opendrive(xodr.read_bytes(), str(xodr))
    ids = [rid for rid, road in network_.roads.items() if road.junction in ("", "-1")]
    assert len(ids) < len(network_.roads)          # the demo has a junction to leave out
    out = tmp_path / "out"
    result = batch("plan", xodr, "-o", out, *scheduler(dask_client))
    assert result.exit_code == 0, result.output
    assert [r["route_id"] for r in read_csv_rows(out / "summary.csv")] == \
        [f"road-{rid}" for rid in ids]
    for rid in ids:
        single = tmp_path / f"single-{rid}.csv"
        plan = CliRunner().invoke(cli, ["plan", str(xodr), "--road", rid, "-o", str(single)])
        assert plan.exit_code == 0, plan.output
        assert (out / "profiles" / f"road-{rid}.csv").read_bytes() == single.read_bytes()


def test_own_local_cluster_by_default(tmp_path, roads):
    out = tmp_path / "out"
    result = batch("plan", network(tmp_path, roads[:1]), "-o", out, *FIELD_ARGS,
                   "--workers", "1")
    assert result.exit_code == 0, result.output
    assert (out / "profiles" / f"{roads[0]['road_id']}.csv").exists()


@pytest.mark.parametrize("case, message", [
    ("missing field", "has no field 'maxspeed'"),
    ("opendrive without roads", "no <road> elements"),
    ("fields on an OpenDRIVE file", "an OpenDRIVE file's roads carry their own speed records"),
    ("foreign folder", "holds files a batch did not write"),
    ("other command", "holds the outputs of 'batch check'"),
    ("output in input folder", "never writes among its inputs"),
    ("fields on a folder", "a folder of route files has no attributes"),
    ("unknown extension", "is not a road network"),
    ("missing input", "no such file or folder"),
])
def test_bad_invocations_exit_2_and_write_nothing(tmp_path, roads, case, message):
    net = network(tmp_path, roads[:1])
    out = tmp_path / "out"
    args = [net, "-o", out]
    if case == "missing field":
        args += ["--speed-field", "maxspeed"]
    elif case == "opendrive without roads":
        (tmp_path / "roads.xodr").write_text("<OpenDRIVE/>")
        args[0] = tmp_path / "roads.xodr"
    elif case == "fields on an OpenDRIVE file":
        args[0] = ROUTES / "proving_ground.xodr"
        args += ["--id-field", "x"]
    elif case == "foreign folder":
        out.mkdir()
        (out / "notes.txt").write_text("mine")
    elif case == "other command":
        out.mkdir()
        (out / "batch.json").write_text('{"tool": "curvespeed", "command": "check"}')
    elif case == "output in input folder":
        args = [tmp_path, "-o", tmp_path / "out"]
    elif case == "fields on a folder":
        args = [tmp_path, "-o", tmp_path.parent / f"{tmp_path.name}-out", "--id-field", "x"]
    elif case == "unknown extension":
        (tmp_path / "roads.shp.txt").write_text("")
        args[0] = tmp_path / "roads.shp.txt"
    elif case == "missing input":
        args[0] = tmp_path / "nowhere.geojson"
    before = sorted(p.name for p in out.iterdir()) if out.exists() else None
    result = batch("plan", *args)
    assert result.exit_code == 2, result.output
    assert message in result.output
    assert (sorted(p.name for p in out.iterdir()) if out.exists() else None) == before


def test_an_unreachable_scheduler_exits_2_and_writes_nothing(tmp_path, roads):
    import importlib

    import dask

    # distributed's defaults loaded into dask's config before the context below, which would
    # drop them again on leaving if distributed were first imported inside it
    importlib.import_module("distributed.comm.addressing")

    out = tmp_path / "out"
    with dask.config.set({"distributed.comm.timeouts.connect": "2s"}):
        result = batch("plan", network(tmp_path, roads[:1]), "-o", out, "--scheduler",
                       "tcp://127.0.0.1:9")          # the discard port: nothing listens
    assert result.exit_code == 2, result.output
    assert "--scheduler tcp://127.0.0.1:9: cannot connect" in result.output
    assert not out.exists()


@pytest.mark.parametrize("address, why", [
    ("notanaddress", "missing port number"),
    ("tcp://127.0.0.1", "missing port number"),
    ("tcp://127.0.0.1:99999", "port 99999 is outside 1..65535"),
    ("nosuchscheme://127.0.0.1:8786", "unknown address scheme"),
])
def test_a_malformed_scheduler_address_exits_2_and_writes_nothing(tmp_path, roads, address,
                                                                  why):
    out = tmp_path / "out"
    result = batch("plan", network(tmp_path, roads[:1]), "-o", out, "--scheduler", address)
    assert result.exit_code == 2, result.output
    assert "Traceback" not in result.output and result.exception is None \
        or isinstance(result.exception, SystemExit), result.exception
    assert "'--scheduler'" in result.output and f"'{address}' is not a scheduler address" \
        in result.output
    assert why in result.output and "tcp://HOST:PORT" in result.output
    assert not out.exists()
