"""The output folder of a batch: each road's files and manifest, then the tables and layers.

Layout (``plan``; ``check`` writes ``checks/`` instead of ``profiles/``)::

    OUTDIR/batch.json                 what wrote the folder (tool, command)
    OUTDIR/profiles/<id>.csv          the road's profile, byte-identical to ``curvespeed plan``'s
    OUTDIR/profiles/<id>.meta.json    its sidecar
    OUTDIR/profiles/<id>.batch.json   its manifest: input digest, each file's SHA-256, its
                                      summary row and curves (written last)
    OUTDIR/summary.csv, failures.csv, curves.geojson, curves.gpkg

A road's files are written together (temporary files in the folder, renamed into place) and its
manifest after them, so a manifest means the files are whole. The task made the bytes and the
manifest (:mod:`~curvespeed.batch.pack`); the store writes nothing of a road whose manifest
does not hold the SHA-256 of the very bytes it is about to write. A rerun reuses a road whose
manifest's digest matches the road and settings and whose files still have the recorded hashes;
everything else is computed again. The folder must be new, empty, or one a batch of the same
command wrote: nothing else in it is ever replaced.
"""

from __future__ import annotations

import json
import os
import re
from collections.abc import Iterable, Iterator
from pathlib import Path

from .. import __version__
from ..errors import BatchError
from .pack import layer_piece, read_layer_piece, sha256_hex
from .task import RouteRecord

MARKER = "batch.json"
MANIFEST_SUFFIX = ".batch.json"
FOLDERS = {"plan": "profiles", "check": "checks"}
AGGREGATES = ("summary.csv", "failures.csv", "curves.geojson", "curves.gpkg")
_UNSAFE = re.compile(r"[^A-Za-z0-9._-]")
#: Longest route id used in a file name, characters.
MAX_ID = 120


def safe_id(route_id: str) -> str:
    """The id as a file name: characters other than letters, digits, ``.``, ``_`` and ``-``
    become ``_``; no leading dot; at most :data:`MAX_ID` characters."""
    text = _UNSAFE.sub("_", route_id.strip())[:MAX_ID].lstrip(".")
    return text or "_"


class BatchStore:
    """Reads and writes one batch's output folder (module docstring)."""

    def __init__(self, outdir: str | os.PathLike, command: str):
        self.outdir = Path(outdir)
        self.command = command
        self.folder = self.outdir / FOLDERS[command]

    def open(self) -> None:
        """Create the folder, or accept one a batch of the same command wrote."""
        self.check()
        marker = self.outdir / MARKER
        if not self.outdir.exists():
            self.outdir.mkdir()
        if not marker.exists():
            marker.write_text(json.dumps({"tool": "curvespeed", "version": __version__,
                                          "command": self.command}, indent=2) + "\n")
        self.folder.mkdir(exist_ok=True)

    def check(self) -> None:
        """Raise :class:`BatchError` unless the folder is new, empty, or a batch of the same
        command wrote it (nothing is created)."""
        marker = self.outdir / MARKER
        if self.outdir.exists():
            if not self.outdir.is_dir():
                raise BatchError(f"{self.outdir}: exists and is not a folder; give a folder "
                                 "for the batch's outputs (-o)")
            if marker.exists():
                self._check_marker(marker)
            elif any(self.outdir.iterdir()):
                raise BatchError(f"{self.outdir}: the folder holds files a batch did not write "
                                 f"(no {MARKER}); give a new or empty folder (-o)")
        else:
            parent = self.outdir.parent
            if not parent.is_dir():
                raise BatchError(f"{self.outdir}: folder {parent} does not exist; create it "
                                 "first")

    def _check_marker(self, marker: Path) -> None:
        try:
            found = json.loads(marker.read_text()).get("command")
        except (OSError, ValueError, AttributeError):
            found = None
        if found != self.command:
            raise BatchError(f"{self.outdir}: holds the outputs of 'batch {found}' "
                             f"({marker}); give another folder for 'batch {self.command}'")

    def manifest_path(self, route_id: str) -> Path:
        return self.folder / (route_id + MANIFEST_SUFFIX)

    def reusable(self, route_id: str, digest: str) -> RouteRecord | None:
        """The stored record of a road whose inputs and files are unchanged, else None."""
        try:
            manifest = json.loads(self.manifest_path(route_id).read_text())
            if manifest.get("input_sha256") != digest:
                return None
            for name, sha in manifest["files"].items():
                if sha256_hex((self.folder / name).read_bytes()) != sha:
                    return None
            record = manifest["record"]
            layer = layer_piece(record["curves"])
        except (OSError, ValueError, KeyError, TypeError, AttributeError):
            return None
        return RouteRecord(route_id, record["source"], digest, True,
                           summary=record["summary"], layer=layer,
                           warnings=tuple(record["warnings"]), passed=record["passed"])

    def save(self, record: RouteRecord) -> None:
        """Write a processed road's files, then its manifest (renamed into place after every
        file is); for a failure, remove what an earlier run left for that id (it no longer
        matches the inputs)."""
        from ..io.atomic import OutputFiles

        if not record.ok:
            self.discard(record.route_id)
            return
        if not record.manifest:
            raise ValueError(f"road {record.route_id}: a record without its manifest cannot be "
                             "stored; records come from run_route")
        for name, data in record.files.items():      # the manifest vouches for these bytes
            if f'"{name}": "{sha256_hex(data)}"'.encode() not in record.manifest:
                raise BatchError(f"{self.folder / name}: the manifest made for road "
                                 f"{record.route_id} does not hold the SHA-256 of the bytes to "
                                 "be written; nothing of the road was written (a fault of the "
                                 "batch, not of the road: run it again)")
        outputs = OutputFiles(force=True, signals=False)
        for name in record.files:
            outputs.add_output(self.folder / name, f"the batch output {name}")
        path = outputs.add_output(self.manifest_path(record.route_id), "a batch manifest")
        with outputs:
            for name, data in record.files.items():
                outputs.write_bytes(self.folder / name, data)
            outputs.write_bytes(path, record.manifest)

    def discard(self, route_id: str) -> None:
        path = self.manifest_path(route_id)
        try:
            names = list(json.loads(path.read_text())["files"])
        except (OSError, ValueError, KeyError, TypeError):
            return
        for name in names + [path.name]:
            try:
                (self.folder / name).unlink()
            except FileNotFoundError:
                pass

    def write_aggregates(self, summaries: list[dict], failures: list[dict],
                         pieces: Iterable[bytes]) -> None:
        """``summary.csv``, ``failures.csv`` and the curves layers, each renamed into place
        whole; ``pieces`` are the processed roads' layer pieces in output order."""
        import tempfile

        from ..io.atomic import OutputFiles
        from ..io.batch_tables import (CurvesGeoJSON, CurvesGeoPackage, failures_csv_text,
                                       summary_csv_text)

        tmp_json = tempfile.NamedTemporaryFile("w", dir=self.outdir, suffix=".geojson.tmp",
                                               delete=False, encoding="utf-8", newline="")
        tmp_gpkg = Path(tmp_json.name).with_suffix(".gpkg")
        try:
            with tmp_json as fh:
                geojson, gpkg = CurvesGeoJSON(fh), CurvesGeoPackage(str(tmp_gpkg))
                for piece in pieces:
                    text, rows = read_layer_piece(piece)
                    geojson.add_text(text, len(rows))
                    for curve, wkb in rows:
                        gpkg.add_row(curve, wkb)
                geojson.close()
                gpkg.close()
            outputs = OutputFiles(force=True, signals=False)
            for name in ("summary.csv", "failures.csv"):
                outputs.add_output(self.outdir / name, f"the batch's {name}")
            with outputs:
                outputs.write_text(self.outdir / "summary.csv",
                                   summary_csv_text(self.command, summaries))
                outputs.write_text(self.outdir / "failures.csv", failures_csv_text(failures))
            os.replace(tmp_json.name, self.outdir / "curves.geojson")
            os.replace(tmp_gpkg, self.outdir / "curves.gpkg")
        finally:
            for leftover in (Path(tmp_json.name), tmp_gpkg):
                leftover.unlink(missing_ok=True)


class LayerSpool:
    """The processed roads' layer pieces, kept in an unnamed temporary file in the output folder
    until the layers are written in input order: a network of any size is never held in memory,
    and nothing is left behind however the batch ends. Use as a context manager."""

    def __init__(self, folder: str | os.PathLike):
        import tempfile

        self.fh = tempfile.TemporaryFile(dir=folder)
        self.where: dict[int, tuple[int, int]] = {}
        self.end = 0

    def add(self, order: int, piece: bytes) -> None:
        self.fh.write(piece)
        self.where[order] = (self.end, len(piece))
        self.end += len(piece)

    def pieces(self, orders: Iterable[int]) -> Iterator[bytes]:
        """The pieces of ``orders``, in that order."""
        self.fh.flush()
        for order in orders:
            start, size = self.where[order]
            self.fh.seek(start)
            yield self.fh.read(size)
        self.fh.seek(self.end)

    def __enter__(self) -> LayerSpool:
        return self

    def __exit__(self, *exc) -> None:
        self.fh.close()
