"""Read a road network for a batch run: one :class:`RouteSpec` per road, streamed.

Input kinds (:func:`input_kind`, chosen from the path):

* a GeoJSON FeatureCollection (``.geojson``/``.json``) or a GeoPackage layer (``.gpkg``, with
  ``layer``), read with pyogrio in chunks of :data:`CHUNK_FEATURES` features, so a large layer
  is never held in memory whole. Each LineString feature is one road; a MultiLineString with one
  part is that part. Coordinates in another reference system are transformed to WGS84 first;
  a GeoPackage layer without one is refused. Attributes map onto settings by field name
  (route id, speed, friction).
* a folder: every route file in it (``.csv``, ``.geojson``, ``.json``, ``.gpx``; not its
  sub-folders), in name order, each read by :func:`curvespeed.io.read_route` when its task runs.
  The route id is the file name without its extension.
* an ASAM OpenDRIVE file (``.xodr``): every road that is not a connecting road inside a
  junction is one task, driven in its default lane (the first driving lane on the side its
  traffic rule drives on) along its reference line's direction, with the road's own speed records
  and superelevation under the command's, as ``plan ROAD.xodr --road ID`` does. The route id is
  ``road-<id>``. The file is parsed once up front (a broken file is refused before any work) and
  again by each task.

A road that cannot be used (no geometry, another geometry type, an empty attribute) does not stop
the reading: its spec carries the reason in ``problem`` and the batch records it as a failure.
"""

from __future__ import annotations

import math
import os
from collections.abc import Iterator
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ..errors import BatchError
from ..limits import MAX_SPEED_MPS
from . import ROUTE_EXTENSIONS

#: Features read from a layer at a time.
CHUNK_FEATURES = 256
#: Input kinds recognised but not read yet, with what to do instead.
NOT_YET: dict[str, str] = {}
_LAYER_EXTENSIONS = {".geojson": "geojson", ".json": "geojson", ".gpkg": "gpkg",
                     ".xodr": "opendrive"}


@dataclass(frozen=True)
class RouteSpec:
    """One road of a batch: where it comes from and what its attributes say.

    Attributes
    ----------
    route_id : str
        Name of its outputs (``profiles/<route_id>.csv``).
    source : str
        Where it came from, for messages ("roads.gpkg, layer roads, feature 12" or a file name).
    order : int
        Position in the input, 0-based over all inputs (summary rows follow it).
    lonlat : ndarray or None, shape (n, 2) or (n, 3)
        Longitude, latitude (WGS84 degrees) and elevation (metres) of a feature's positions.
    path : str or None
        The route file of a folder input.
    speed_mps : float or None
        The road's speed from ``--speed-field`` (m/s).
    friction : float or None
        The road's friction coefficient from ``--friction-field``.
    name : str or None
        The feature's ``name`` attribute, if any.
    problem : str or None
        Why this road cannot be used (recorded as its failure); None when it can.
    """

    route_id: str
    source: str
    order: int
    lonlat: np.ndarray | None = None
    path: str | None = None
    speed_mps: float | None = None
    friction: float | None = None
    name: str | None = None
    problem: str | None = field(default=None, compare=False)
    road: str | None = None

    def content(self) -> bytes:
        """The bytes the road's result depends on (the file's and the road's id, or the
        positions')."""
        if self.path is not None:
            from ._common import read_bytes

            road = b"" if self.road is None else f"\0road {self.road}".encode()
            return read_bytes(Path(self.path), self.path) + road
        return b"" if self.lonlat is None else np.ascontiguousarray(self.lonlat).tobytes()

    def to_route(self):
        """The :class:`~curvespeed.route.Route`, read as the single-route reader reads it."""
        if self.path is not None:
            from . import read_route

            return read_route(self.path)
        from ..route import make_route
        from ._common import project_latlon

        lon, lat = self.lonlat[:, 0], self.lonlat[:, 1]
        ele = self.lonlat[:, 2] if self.lonlat.shape[1] == 3 else None
        x, y, projection = project_latlon(lat, lon, self.source)
        where = np.array([f"position {i + 1}" for i in range(lon.size)], dtype=object)
        return make_route(x, y, ele, where=where, source=self.source, projection=projection,
                          name=self.name or self.route_id)


@dataclass(frozen=True)
class FieldMap:
    """Which attributes say what: ``id_field``, ``speed_field`` (in ``speed_unit``: km/h, mph or
    m/s), ``friction_field``; None leaves the setting to the command's options."""

    id_field: str | None = None
    speed_field: str | None = None
    speed_unit: str = "km/h"
    friction_field: str | None = None

    def used(self) -> list[str]:
        return [f for f in (self.id_field, self.speed_field, self.friction_field) if f]


def input_kind(path: str | os.PathLike) -> str:
    """``folder``, ``geojson``, ``gpkg`` or ``opendrive``; anything else is a :class:`BatchError`."""
    p = Path(path)
    if p.is_dir():
        return "folder"
    if not p.exists():
        raise BatchError(f"{path}: no such file or folder; give a GeoJSON or GeoPackage file "
                         "of roads, or a folder of route files")
    kind = _LAYER_EXTENSIONS.get(p.suffix.lower())
    if kind is None:
        raise BatchError(f"{path}: '{p.suffix or 'no extension'}' is not a road network "
                         f"curvespeed reads in a batch; give {', '.join(_LAYER_EXTENSIONS)} "
                         "or a folder of route files")
    if kind in NOT_YET:
        raise BatchError(f"{path}: {NOT_YET[kind]}")
    return kind


def count_roads(path: str | os.PathLike, layer: str | None = None) -> int:
    """How many roads an input holds (features of the layer, or route files of the folder)."""
    kind = input_kind(path)
    if kind == "folder":
        return len(_folder_files(Path(path)))
    if kind == "opendrive":
        return len(_opendrive_roads(path))
    import pyogrio

    return int(_layer_info(path, layer, pyogrio)["features"])


def iter_specs(paths, fields: FieldMap, layer: str | None = None) -> Iterator[RouteSpec]:
    """Every road of every input, in input order, as :class:`RouteSpec` (streamed).

    Problems of a whole input (a missing layer or field, no reference system) raise
    :class:`BatchError` before its first road; :func:`check_inputs` finds them all up front.
    """
    order = 0
    for path in paths:
        kind = input_kind(path)
        reader = {"folder": _folder_specs, "opendrive": _opendrive_specs}.get(kind, _layer_specs)
        for spec in reader(path, fields, layer, order, prefix=len(paths) > 1):
            yield spec
            order += 1


def check_inputs(paths, fields: FieldMap, layer: str | None = None) -> int:
    """Check every input before any work (kind, layer, fields, reference system); return the
    number of roads."""
    total = 0
    for path in paths:
        kind = input_kind(path)
        if kind == "folder":
            if fields.used():
                raise BatchError(f"{path}: a folder of route files has no attributes, so "
                                 f"--id-field, --speed-field and --friction-field do not apply; "
                                 "leave them out (the file names are the route ids)")
            total += len(_folder_files(Path(path)))
            continue
        if kind == "opendrive":
            if fields.used():
                raise BatchError(f"{path}: an OpenDRIVE file's roads carry their own speed "
                                 "records, so --id-field, --speed-field and --friction-field do "
                                 "not apply; leave them out (the road ids are the route ids)")
            total += len(_opendrive_roads(path))
            continue
        import pyogrio

        info = _layer_info(path, layer, pyogrio)
        present = list(info["fields"])
        for name in fields.used():
            if name not in present:
                raise BatchError(f"{path}: the layer has no field '{name}' (its fields: "
                                 f"{', '.join(present) or 'none'}); give one of them")
        _to_wgs84(info.get("crs"), path, kind)
        total += int(info["features"])
    return total


# -- folders -------------------------------------------------------------------------------------

def _folder_files(folder: Path) -> list[Path]:
    return sorted(p for p in folder.iterdir()
                  if p.is_file() and p.suffix.lower() in ROUTE_EXTENSIONS)


def _folder_specs(path, fields, layer, order, prefix) -> Iterator[RouteSpec]:
    for i, file in enumerate(_folder_files(Path(path))):
        yield RouteSpec(route_id=file.stem, source=str(file), order=order + i, path=str(file))


# -- OpenDRIVE ------------------------------------------------------------------------------------

def _opendrive_roads(path) -> list[str]:
    """Ids of the file's roads that are not connecting roads inside a junction, in file order;
    the file's own errors (with their line) propagate as they do for ``plan``."""
    from ._common import check_text, read_bytes
    from .opendrive import parse_opendrive

    data = read_bytes(Path(path), str(path))
    check_text(data, str(path))
    network = parse_opendrive(data, str(path))
    return [rid for rid, road in network.roads.items() if road.junction in ("", "-1")]


def _opendrive_specs(path, fields, layer, order, prefix) -> Iterator[RouteSpec]:
    stem = Path(path).stem
    for i, rid in enumerate(_opendrive_roads(path)):
        route_id = f"{stem}-road-{rid}" if prefix else f"road-{rid}"
        yield RouteSpec(route_id=route_id, source=f"{path}, road {rid}", order=order + i,
                        path=str(path), road=rid)


# -- layers --------------------------------------------------------------------------------------

def _layer_info(path, layer, pyogrio) -> dict:
    try:
        return pyogrio.read_info(str(path), layer=layer)
    except Exception as exc:          # GDAL's own errors name the problem
        where = f"layer '{layer}'" if layer else "its first layer"
        raise BatchError(f"{path}: cannot read {where} ({exc}); check the file and --layer "
                         "(the layers are listed by any GIS)") from None


def _to_wgs84(crs: str | None, path, kind: str):
    """A transformer to WGS84 longitude/latitude, or None when the layer is in WGS84 already."""
    if crs is None:
        if kind == "geojson":
            return None               # RFC 7946: WGS84 longitude, latitude
        raise BatchError(f"{path}: the layer has no coordinate reference system, so its "
                         "positions cannot be placed on Earth; assign one in a GIS and save "
                         "again")
    from pyproj import CRS, Transformer

    source = CRS.from_user_input(crs)
    if source.equals(CRS.from_epsg(4326), ignore_axis_order=True):
        return None
    return Transformer.from_crs(source, CRS.from_epsg(4326), always_xy=True)


def _layer_specs(path, fields: FieldMap, layer, order, prefix) -> Iterator[RouteSpec]:
    import pyogrio
    import shapely

    kind = input_kind(path)
    info = _layer_info(path, layer, pyogrio)
    transform = _to_wgs84(info.get("crs"), path, kind)
    columns = [f for f in dict.fromkeys(fields.used() + ["name"]) if f in list(info["fields"])]
    n = int(info["features"])
    stem = Path(path).stem
    for first in range(0, n, CHUNK_FEATURES):
        _, fids, wkb, values = pyogrio.raw.read(
            str(path), layer=layer, columns=columns, skip_features=first,
            max_features=CHUNK_FEATURES, return_fids=True)
        attrs = dict(zip(columns, values))
        geoms = shapely.from_wkb(wkb)
        for j, geom in enumerate(geoms):
            number = first + j + 1
            # a GeoPackage's feature id is its key; a GeoJSON feature's is its place in the file
            fid = fids[j] if fids is not None and kind == "gpkg" else number
            row = {name: attrs[name][j] for name in columns}
            source = f"{path}, feature {number}"
            yield _feature_spec(geom, row, fields, transform, source, order + first + j,
                                f"{stem}-{fid}" if prefix else str(fid))


def _feature_spec(geom, row: dict, fields: FieldMap, transform, source: str, order: int,
                  default_id: str) -> RouteSpec:
    import shapely

    problem = None
    route_id = default_id
    if fields.id_field:
        value = row[fields.id_field]
        text = "" if _missing(value) else str(value).strip()
        if text:
            route_id = text
        else:
            problem = f"field '{fields.id_field}' (the route id) is empty; give every road an id"
    lonlat = None
    if geom is None:
        problem = problem or "the feature has no geometry; give its road as a LineString"
    else:
        kind = shapely.get_type_id(geom)
        if kind == 5 and shapely.get_num_geometries(geom) == 1:      # one-part MultiLineString
            geom, kind = shapely.get_geometry(geom, 0), 1
        if kind != 1:
            problem = problem or (f"its geometry is a {geom.geom_type}, not a LineString; give "
                                  "each road as one LineString in driving order")
        else:
            lonlat = shapely.get_coordinates(geom, include_z=shapely.has_z(geom))
            if transform is not None:
                lonlat = lonlat.copy()
                lonlat[:, 0], lonlat[:, 1] = transform.transform(lonlat[:, 0], lonlat[:, 1])
    speed = _number_field(row, fields.speed_field, "speed")
    friction = _number_field(row, fields.friction_field, "friction")
    for value in (speed, friction):
        if isinstance(value, str):
            problem = problem or value
    if not isinstance(speed, str) and speed is not None:
        from ..units import kmh_to_mps, mph_to_mps

        given = speed
        speed = {"km/h": kmh_to_mps, "mph": mph_to_mps, "m/s": float}[fields.speed_unit](speed)
        problem = problem or _too_fast(speed, given, fields)
        speed = None if speed > MAX_SPEED_MPS else speed
    name = row.get("name")
    return RouteSpec(route_id=route_id, source=source, order=order, lonlat=lonlat,
                     speed_mps=None if isinstance(speed, str) else speed,
                     friction=None if isinstance(friction, str) else friction,
                     name=None if _missing(name) else str(name).strip() or None, problem=problem)


def _too_fast(speed_mps: float, value: float, fields: FieldMap) -> str | None:
    """Why a road's speed field is above any road vehicle's speed (None if it is not)."""
    if speed_mps <= MAX_SPEED_MPS:
        return None
    return (f"field '{fields.speed_field}' (the speed): {value:g} {fields.speed_unit} is "
            f"{speed_mps:g} m/s, above {MAX_SPEED_MPS:g} m/s (3600 km/h), which no road vehicle "
            "reaches; check the value and --speed-unit")


def _missing(value) -> bool:
    return value is None or (isinstance(value, float) and math.isnan(value))


def _number_field(row: dict, name: str | None, what: str):
    """The field's positive number, None without a field, or a message (str) saying why not."""
    if not name:
        return None
    value = row[name]
    if _missing(value) or (isinstance(value, str) and not value.strip()):
        return f"field '{name}' (the {what}) is empty; give a value or leave the road out"
    if isinstance(value, str):
        from ._common import number_problem, parse_number

        number = parse_number(value.strip())
        if number is None:
            return f"field '{name}' (the {what}): '{value}' {number_problem(value.strip())}"
        value = number
    try:
        number = float(value)
    except (TypeError, ValueError):
        return f"field '{name}' (the {what}): {value!r} is not a number; give a number"
    if not (math.isfinite(number) and number > 0):
        return f"field '{name}' (the {what}): {value!r} must be a positive number"
    return number
