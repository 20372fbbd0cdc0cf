"""A processed road's outputs made ready to write, where the road was computed.

The task (:func:`~curvespeed.batch.task.run_route`) hands back each output file's UTF-8 bytes,
the manifest's bytes (with those bytes' SHA-256) and the road's curves in the form the layers
are written from: their GeoJSON features' text and their attributes, pickled together. The main
process of a batch then writes bytes and formats nothing of a road again: the encoding, hashing
and formatting run on the workers, beside the road's own computation, and grow with them.

The manifest's fields (what :class:`~curvespeed.batch.store.BatchStore` reads back to resume a
road): ``input_sha256``, ``files`` (name -> SHA-256 of the bytes written) and ``record``
(``source``, ``summary``, ``curves``, ``warnings``, ``passed``).
"""

from __future__ import annotations

import hashlib
import json
import pickle


def sha256_hex(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


def file_bytes(files: dict[str, str]) -> dict[str, bytes]:
    """Each output's text as the UTF-8 bytes written (every writer ends lines with ``\\n``)."""
    return {name: text.encode("utf-8") for name, text in files.items()}


def manifest_bytes(input_sha256: str, files: dict[str, bytes], source: str, summary: dict,
                   curves, warnings, passed) -> bytes:
    """The manifest of a road whose files are ``files`` (name -> the bytes written)."""
    manifest = {"input_sha256": input_sha256,
                "files": {name: sha256_hex(data) for name, data in files.items()},
                "record": {"source": source, "summary": summary, "curves": list(curves),
                           "warnings": list(warnings), "passed": passed}}
    return (json.dumps(manifest, allow_nan=True) + "\n").encode("utf-8")


def layer_piece(curves) -> bytes:
    """A road's share of the curves layers: its GeoJSON features (one line each, joined by
    ``,\n`` as the layer file holds them) and, per curve, its attributes and its line as WKB,
    pickled together."""
    from ..io.batch_tables import curve_feature_text, curve_wkb

    text = ",\n".join(curve_feature_text(curve) for curve in curves)
    rows = [({k: v for k, v in curve.items() if k != "lonlat"}, curve_wkb(curve))
            for curve in curves]
    return pickle.dumps((text, rows), protocol=pickle.HIGHEST_PROTOCOL)


def read_layer_piece(piece: bytes) -> tuple[str, list]:
    """The GeoJSON text and the ``(attributes, WKB)`` rows of a piece :func:`layer_piece` made
    (a batch's own task made it; never bytes from an input file)."""
    if not piece:
        return "", []
    return pickle.loads(piece)


def piece_curves(piece: bytes) -> list[dict]:
    """The curves of a layer piece with their ``lonlat`` positions back (from the WKB's
    doubles, the same numbers), as the manifest holds them."""
    import shapely

    curves = []
    for attrs, wkb in read_layer_piece(piece)[1]:
        lonlat = None if wkb is None else shapely.get_coordinates(shapely.from_wkb(wkb)).tolist()
        curves.append({**attrs, "lonlat": lonlat})
    return curves
