"""The batch's output folder: what a road's task hands back is what lands on disk.

Each task makes its road's file bytes, their SHA-256 and its manifest, and its share of the
curves layers (``curvespeed.batch.pack``); the main process only writes them. Checked here:

* every manifest's hashes against SHA-256 (FIPS 180-4) computed by Python's ``hashlib`` over the
  files on disk after a distributed batch;
* the curves layer written from the tasks' pieces against the same curves written one feature
  at a time by the layer writer, byte for byte, and the GeoPackage's rows against the manifests;
* a road's files and manifest written all or none;
* the layer pieces' temporary file never visible in the folder, the pieces read back in the
  order asked for;
* the local cluster's workers running with the cluster's settings.
"""

from __future__ import annotations

import hashlib
import io
import json
import os
import time

import pytest

from batch_helpers import FIELDS, manifest, network, read_csv_rows, small_roads
from curvespeed.batch import BatchSettings, BatchStore, run_batch, run_route
from curvespeed.batch.store import LayerSpool
from curvespeed.batch.task import input_digest
from curvespeed.errors import OutputError
from curvespeed.io.network import FieldMap, iter_specs
from curvespeed.limits import DEFAULT_LIMITS


def _batch(tmp_path, roads, client, name="out", command="plan"):
    net = network(tmp_path, roads)
    store = BatchStore(tmp_path / name, command)
    store.open()
    outcome = run_batch(iter_specs([net], FieldMap(**FIELDS)),
                        BatchSettings(command, DEFAULT_LIMITS), store, client)
    assert outcome.failed == 0, outcome.failures
    return store.outdir


def test_manifest_hashes_are_sha256_of_the_files_on_disk(tmp_path, dask_client):
    roads = small_roads(3, seed=17)
    out = _batch(tmp_path, roads, dask_client)
    for road in roads:
        stored = manifest(out, road["road_id"])
        rid = road["road_id"]
        assert sorted(stored["files"]) == [f"{rid}.csv", f"{rid}.meta.json"]
        for name, sha in stored["files"].items():
            data = (out / "profiles" / name).read_bytes()
            assert sha == hashlib.sha256(data).hexdigest(), name


def test_layers_from_the_tasks_pieces_equal_the_curves_written_one_by_one(tmp_path):
    import pyogrio

    from curvespeed.io.batch_tables import CurvesGeoJSON

    roads = small_roads(3, seed=23)
    out = _batch(tmp_path, roads, None, command="check")
    order = [row["route_id"] for row in read_csv_rows(out / "summary.csv")]
    curves = [c for rid in order for c in manifest(out, rid, "checks")["record"]["curves"]]
    assert curves, "the invented roads have curves"
    text = io.StringIO(newline="")
    writer = CurvesGeoJSON(text)
    for curve in curves:
        writer.add(curve)
    writer.close()
    assert (out / "curves.geojson").read_text(encoding="utf-8") == text.getvalue()
    meta, _, geometry, fields = pyogrio.raw.read(str(out / "curves.gpkg"))
    columns = dict(zip(meta["fields"].tolist(), fields))
    assert columns["route_id"].tolist() == [c["route_id"] for c in curves]
    assert columns["curve"].tolist() == [c["curve"] for c in curves]
    # the attributes are the manifests' floats, stored as doubles: equal, not close
    assert columns["min_radius_m"].tolist() == [c["min_radius_m"] for c in curves]
    assert len(geometry) == len(curves)


def test_a_records_curves_are_its_manifests(tmp_path):
    roads = small_roads(1, seed=29)
    spec = next(iter_specs([network(tmp_path, roads)], FieldMap(**FIELDS)))
    settings = BatchSettings("plan", DEFAULT_LIMITS)
    record = run_route(spec, settings, input_digest(spec, settings))
    stored = json.loads(record.manifest)
    assert record.curves and record.curves == stored["record"]["curves"]
    assert stored["record"]["summary"] == record.summary
    assert stored["files"] == {name: hashlib.sha256(data).hexdigest()
                               for name, data in record.files.items()}


def _one_record(tmp_path):
    roads = small_roads(1, seed=31)
    spec = next(iter_specs([network(tmp_path, roads)], FieldMap(**FIELDS)))
    settings = BatchSettings("plan", DEFAULT_LIMITS)
    return run_route(spec, settings, input_digest(spec, settings))


def test_a_roads_files_and_manifest_are_written_all_or_none(tmp_path):
    record = _one_record(tmp_path)
    store = BatchStore(tmp_path / "out", "plan")
    store.open()
    blocker = store.manifest_path(record.route_id)
    blocker.mkdir()                      # the manifest's name taken by a folder
    with pytest.raises(OutputError, match="is a folder"):
        store.save(record)
    assert os.listdir(store.folder) == [blocker.name]     # no file, no temporary left
    blocker.rmdir()
    store.save(record)
    for name, data in record.files.items():
        assert (store.folder / name).read_bytes() == data
    assert blocker.read_bytes() == record.manifest


def _refused(tmp_path, record, error, message):
    store = BatchStore(tmp_path / "out", "plan")
    store.open()
    with pytest.raises(error, match=message):
        store.save(record)
    assert os.listdir(store.folder) == []              # nothing of the road written


def test_a_record_without_its_manifest_is_refused(tmp_path):
    import dataclasses

    record = dataclasses.replace(_one_record(tmp_path), manifest=b"")
    _refused(tmp_path, record, ValueError, f"road {record.route_id}: .*without its manifest")


def test_bytes_the_manifest_does_not_vouch_for_are_not_written(tmp_path):
    import dataclasses

    from curvespeed.errors import BatchError

    record = _one_record(tmp_path)
    name = next(iter(record.files))
    changed = dataclasses.replace(record, files={**record.files,
                                                 name: record.files[name] + b"0\n"})
    _refused(tmp_path, changed, BatchError, f"{name}: the manifest .* does not hold the SHA-256")


def test_layer_pieces_come_back_in_the_order_asked_and_leave_nothing(tmp_path):
    pieces = {2: b"third", 0: b"", 1: b"second piece"}
    with LayerSpool(tmp_path) as spool:
        for order, piece in pieces.items():           # added as roads finish, out of order
            spool.add(order, piece)
        assert os.listdir(tmp_path) == []             # an unnamed file
        assert list(spool.pieces([0, 1, 2])) == [b"", b"second piece", b"third"]
        spool.add(3, b"after")                        # still appends at the end
        assert list(spool.pieces([3, 2])) == [b"after", b"third"]
    assert os.listdir(tmp_path) == []


def test_the_local_clusters_workers_run_with_its_settings_also_when_started_again():
    # A cluster of its own: on the session's shared one a worker killed by an earlier test
    # leaves Dask's check for lost workers pending (``distributed.deploy.lost-worker-timeout``,
    # 15 s); if it falls while this test's killed worker of the same name is being started
    # again, the cluster closes that worker's nanny for good (seen once under load).
    from curvespeed.batch.cluster import start_local_cluster

    cluster, client = start_local_cluster(2)
    try:
        _check_settings_survive_a_restart(client)
    finally:
        client.close()
        cluster.close()


def _check_settings_survive_a_restart(dask_client):
    import signal

    import dask
    from dask.utils import parse_timedelta

    from curvespeed.batch.cluster import SERVER_CLOCKS, WORKER_PROFILER

    def settings():
        return {key: dask.config.get(key) for key in SERVER_CLOCKS}

    def tick_ms(dask_worker):
        return dask_worker.periodic_callbacks["tick"].callback_time

    killed = next(iter(dask_client.run(os.getpid).values()))
    os.kill(killed, signal.SIGKILL)                    # its nanny starts it again
    deadline = time.monotonic() + 60
    while True:
        try:
            pids = dask_client.run(os.getpid)
            if len(pids) == 2 and killed not in pids.values():
                break
        except OSError:                                # the dead worker's connection
            pass
        assert time.monotonic() < deadline, "the killed worker was not started again"
        time.sleep(0.2)
    assert list(dask_client.run(settings).values()) == [SERVER_CLOCKS] * 2
    profiler = dask_client.run(lambda: dask.config.get("distributed.worker.profile.enabled"))
    assert list(profiler.values()) == [WORKER_PROFILER] * 2
    # in force in each worker process's own periodic callback, not only in its settings
    tick = parse_timedelta(SERVER_CLOCKS["distributed.admin.tick.interval"]) * 1000
    assert list(dask_client.run(tick_ms).values()) == [tick] * 2


def test_a_layer_piece_gives_back_its_curves_with_and_without_a_place_on_earth():
    from curvespeed.batch.pack import layer_piece, piece_curves, read_layer_piece
    from curvespeed.io.batch_tables import curve_feature_text

    base = {"route_id": "X1", "curve": 1, "start_m": 10.0, "apex_m": 20.5, "end_m": 31.25,
            "direction": "left", "min_radius_m": 80.0, "min_radius_low_m": 75.5,
            "speed_mps": 12.0, "limit_speed_mps": 13.75, "advisory_speed_kmh": 45.0,
            "advisory_speed_mph": 30.0, "worst_use": 0.8125, "verdict": "pass"}
    placed = {**base, "lonlat": [[-20.000123456789, -30.1], [-20.0002, -30.100011111111],
                                 [-20.0003, -30.1000333]]}
    local = {**base, "curve": 2, "lonlat": None}       # a road in a local metric frame
    piece = layer_piece([placed, local])
    text, rows = read_layer_piece(piece)
    assert text == curve_feature_text(placed) + ",\n" + curve_feature_text(local)
    assert text.endswith('"geometry": null}')
    assert rows[1][1] is None
    # WKB holds IEEE doubles: the positions come back equal, not close
    assert piece_curves(piece) == [placed, local]
