"""What a report shows, gathered from a check result, the route's plan positions and provenance.

:func:`report_data` is the one way in: ``plan --report`` (the planned profile checked along its
route), ``check --report`` and ``report`` (an existing profile and check JSON) all hand it the
check's result as the dictionary of the check JSON (:func:`curvespeed.io.check_report.
check_report_dict`), so the curves carry the check table's numbers in every report and figure.
Pure: dictionaries and arrays in, a frozen :class:`ReportData` out.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ..errors import SpeedFileError

#: Accelerations with a magnitude at most this are "holding speed", m/s^2. Braking and launch
#: zones start above it: 0.05 m/s^2 is a change of speed a driver does not notice (common
#: practice puts gentle deceleration at 0.5-1 m/s^2) and stays clear of the few 1e-4 m/s^2 a
#: profile's printed speeds leave in the acceleration.
HOLD_ACCEL_MPS2 = 0.05

#: Keys of the check JSON's ``per_station`` the report reads.
STATION_KEYS = ("station_m", "speed_mps", "accel_mps2", "limit_speed_mps")

CAUTIONS = (
    "curvespeed supports engineering judgment; it does not replace it. The speeds, uses and "
    "advisory speeds here follow from the route, limits and settings stated in this report "
    "and are only as good as they are.",
    "Speeds on public roads and advisory signs follow local codes and licensed engineering "
    "practice, set by the road authority.",
    "A fitted route's curvature is an estimate: curves are judged on its bound, which covers "
    "the true road at the noise stated; a wrong noise makes the bound wrong.",
    "Test-track and vehicle speeds need the test site's own safety rules and a qualified "
    "person's approval before anyone drives them.",
)


@dataclass(frozen=True)
class ReportStop:
    """A stop of the plan: station (m), name ("" for none) and dwell (s, None: not given)."""

    station_m: float
    name: str = ""
    dwell_s: float | None = None

    def label(self) -> str:
        """``"Workshops (290 m, dwell 30 s)"``, or ``"stop (290 m)"`` without name or dwell."""
        dwell = "" if self.dwell_s is None else f", dwell {self.dwell_s:g} s"
        return f"{self.name or 'stop'} ({self.station_m:.0f} m{dwell})"


def report_stops(constraints: dict | None) -> tuple[ReportStop, ...]:
    """The stops of a constraints dictionary (as the sidecar and the plan's report write
    them), in station order."""
    out = []
    for item in (constraints or {}).get("stops") or []:
        if not isinstance(item, dict) or not isinstance(item.get("station_m"), (int, float)):
            continue
        dwell = item.get("dwell_s")
        name = item.get("name")
        out.append(ReportStop(float(item["station_m"]), name if isinstance(name, str) else "",
                              float(dwell) if isinstance(dwell, (int, float)) else None))
    return tuple(sorted(out, key=lambda stop: stop.station_m))


@dataclass(frozen=True)
class ReportCurve:
    """One curve as the check table numbers it (all values from the check result).

    Attributes
    ----------
    number : int
        The check table's curve number (1-based, station order).
    start_m, end_m, tightest_station_m : float
        Station range and tightest point, metres.
    direction : str
        "left" or "right".
    radius_m, radius_low_m, radius_high_m : float
        Smallest radius: estimate and its plausible interval, metres (``inf``: unbounded).
    speed_mps, limit_speed_mps : float
        Speed checked and highest speed the limits allow at the tightest point, m/s.
    advisory_kmh, advisory_low_kmh, advisory_high_kmh, advisory_mph : int or None
        Ball-bank advisory speeds (10 km/h and 5 mph steps), estimate and interval.
    grip_use, comfort_use : float
        Peak use of the friction and comfort ellipses over the curve (1 = at the limit).
    brake_ok : bool
    verdict : str
        ``pass``, ``fail`` or ``fails_on_bound``.
    """

    number: int
    start_m: float
    end_m: float
    tightest_station_m: float
    direction: str
    radius_m: float
    radius_low_m: float
    radius_high_m: float
    speed_mps: float
    limit_speed_mps: float
    advisory_kmh: int | None
    advisory_low_kmh: int | None
    advisory_high_kmh: int | None
    advisory_mph: int | None
    grip_use: float
    comfort_use: float
    brake_ok: bool
    verdict: str


@dataclass(frozen=True)
class ReportData:
    """Everything a report or the overview figure draws, in SI units.

    Attributes
    ----------
    title : str
        Route name and what was done ("planned", "checked").
    what : str
        One sentence: what was planned or checked, from which speeds.
    station_m, x_m, y_m : ndarray
        Stations and plan positions (metres) of the check's stations.
    speed_mps, accel_mps2, limit_speed_mps : ndarray
        Speed, acceleration along the path and speed ceiling at each station.
    grip_use, comfort_use : ndarray or None
        Use of the friction and comfort ellipses at each station (1 = at the limit); None
        when the limits are not known.
    curves : tuple of ReportCurve
    verdict : str
        ``pass`` or ``fail`` (the check's).
    violations : tuple of str
        The check's violation messages.
    limits : tuple of (str, str)
        The limits and route constraints (zones, stops, superelevation, end speeds) used, as
        label and value with unit.
    provenance : tuple of (str, str)
        Input files and hashes, noise, solver and status, tool version, date.
    length_m : float
    closed : bool
    notes : tuple of str
        What the report could not show, and why.
    stops : tuple of ReportStop
        The plan's stops with their names and dwells (shown on the charts), in station order.
    """

    title: str
    what: str
    station_m: np.ndarray
    x_m: np.ndarray
    y_m: np.ndarray
    speed_mps: np.ndarray
    accel_mps2: np.ndarray
    limit_speed_mps: np.ndarray
    grip_use: np.ndarray | None
    comfort_use: np.ndarray | None
    curves: tuple[ReportCurve, ...]
    verdict: str
    violations: tuple[str, ...]
    limits: tuple[tuple[str, str], ...]
    provenance: tuple[tuple[str, str], ...]
    length_m: float
    closed: bool
    notes: tuple[str, ...] = field(default=())
    stops: tuple[ReportStop, ...] = field(default=())

    def zones(self, sign: int) -> list[tuple[float, float]]:
        """Station ranges of braking (``sign=-1``) or launch (``+1``) zones, metres.

        A zone is a run of steps whose acceleration, taken at both ends, is beyond
        :data:`HOLD_ACCEL_MPS2` in that direction.
        """
        a = sign * self.accel_mps2
        inside = (a[:-1] > HOLD_ACCEL_MPS2) | (a[1:] > HOLD_ACCEL_MPS2)
        return _runs(self.station_m, inside)


def _runs(s: np.ndarray, inside: np.ndarray) -> list[tuple[float, float]]:
    """Station ranges of the runs of True steps (step k spans s[k]..s[k+1])."""
    edges = np.diff(np.concatenate(([0], inside.astype(np.int8), [0])))
    starts = np.flatnonzero(edges == 1)
    ends = np.flatnonzero(edges == -1)
    return [(float(s[i]), float(s[j])) for i, j in zip(starts, ends)]


def _number(value, default: float = math.nan) -> float:
    return default if value is None else float(value)


def _curve(row: dict) -> ReportCurve:
    def advisory(key):
        value = row.get(key)
        return None if value is None else int(value)

    return ReportCurve(
        number=int(row["number"]), start_m=float(row["start_m"]), end_m=float(row["end_m"]),
        tightest_station_m=float(row["tightest_station_m"]), direction=str(row["direction"]),
        radius_m=_number(row["min_radius_m"]),
        radius_low_m=_number(row.get("min_radius_low_m", row["min_radius_m"])),
        # an unbounded high end is written null in the JSON
        radius_high_m=_number(row.get("min_radius_high_m"), math.inf),
        speed_mps=float(row["speed_mps"]), limit_speed_mps=_number(row["limit_speed_mps"]),
        advisory_kmh=advisory("advisory_speed_kmh"),
        advisory_low_kmh=advisory("advisory_speed_low_kmh"),
        advisory_high_kmh=advisory("advisory_speed_high_kmh"),
        advisory_mph=advisory("advisory_speed_mph"),
        grip_use=_number(row["friction_use"]), comfort_use=_number(row["comfort_use"]),
        brake_ok=bool(row["brake_ok"]),
        verdict=str(row.get("verdict", "pass" if row["passed"] else "fail")))


def limit_rows(limits: dict) -> tuple[tuple[str, str], ...]:
    """The limits as label/value pairs, with units (unset optional limits left out)."""
    table = (("friction coefficient", "friction_coefficient", ""),
             ("lateral friction coefficient", "lateral_friction_coefficient", ""),
             ("lateral acceleration (comfort)", "max_lateral_accel_mps2", " m/s²"),
             ("acceleration", "max_accel_mps2", " m/s²"),
             ("deceleration", "max_decel_mps2", " m/s²"),
             ("top speed", "max_speed_mps", " m/s"),
             ("jerk", "max_jerk_mps3", " m/s³"),
             ("lateral jerk", "max_lateral_jerk_mps3", " m/s³"),
             ("power", "max_power_w", " W"), ("mass", "mass_kg", " kg"))
    rows = []
    for label, key, unit in table:
        value = limits.get(key)
        if value is not None:
            extra = f" ({3.6 * value:.0f} km/h)" if key == "max_speed_mps" else ""
            rows.append((label, f"{value:g}{unit}{extra}"))
    return tuple(rows)


def constraint_rows(constraints: dict | None) -> tuple[tuple[str, str], ...]:
    """Speed zones, stops, superelevation, friction sections and end speeds as label/value
    pairs (those given)."""
    c = constraints or {}
    rows = []
    zones = [f"{z['start_m']:g}–{z['end_m']:g} m: {z['max_speed_mps']:g} m/s"
             for z in c.get("zones") or []]
    stops = [f"{s['station_m']:g} m" + (f" '{s['name']}'" if s.get("name") else "")
             + (f", dwell {s['dwell_s']:g} s" if s.get("dwell_s") is not None else "")
             for s in c.get("stops") or []]
    banks = [f"{b['start_m']:g}–{b['end_m']:g} m: {100 * b['rate']:g} %"
             for b in c.get("superelevation") or []]
    grip = [f"{f['start_m']:g}–{f['end_m']:g} m: mu {f['friction_coefficient']:g}"
            + (f" along, {f['lateral_friction_coefficient']:g} across"
               if f.get("lateral_friction_coefficient") is not None else "")
            for f in c.get("friction") or []]
    for label, items in (("speed zones", zones), ("stops", stops), ("superelevation", banks),
                         ("friction sections", grip)):
        if items:
            rows.append((label, "; ".join(items)))
    for label, key in (("start speed", "start_speed_mps"), ("end speed", "end_speed_mps")):
        if c.get(key) is not None:
            rows.append((label, f"{c[key]:g} m/s"))
    return tuple(rows)


def noise_rows(fit: dict | None) -> tuple[tuple[str, str], ...]:
    """Position and elevation noise: stated, estimated and used, metres."""
    rows = []
    for label, key in (("position noise", "position_noise"),
                       ("elevation noise", "elevation_noise")):
        entry = (fit or {}).get(key)
        if not isinstance(entry, dict):
            continue

        def metres(name):
            value = entry.get(name)
            return "-" if value is None else f"{value:.4g} m"

        stated = ("not stated" if entry.get("stated_m") is None
                  else f"stated {metres('stated_m')}")
        rows.append((label, f"{stated}; estimated {metres('estimated_m')}; used "
                            f"{metres('used_m')} ({entry.get('origin') or 'origin not recorded'})"))
    if not rows:
        rows.append(("noise", "none: exact geometry (no fitted points)"))
    return tuple(rows)


def report_data(check: dict, x_m, y_m, *, doing: str, provenance, notes=()) -> ReportData:
    """Gather a report from the check result ``check`` and the stations' plan positions.

    Parameters
    ----------
    check : dict
        The check JSON's content (:func:`curvespeed.io.check_report.check_report_dict`).
    x_m, y_m : array_like
        Plan position of each of the check's stations, metres.
    doing : str
        ``"planned"`` or ``"checked"``, for the title.
    provenance : sequence of (str, str)
        Input files and hashes, solver, tool version, date (:func:`noise_rows` is added).
    notes : sequence of str
        Anything the report leaves out, said once at its top.

    Raises
    ------
    SpeedFileError
        Positions not one per station.
    """
    per = check["per_station"]
    s = np.asarray(per["station_m"], dtype=float)
    x = np.asarray(x_m, dtype=float)
    y = np.asarray(y_m, dtype=float)
    if x.shape != s.shape or y.shape != s.shape:
        raise SpeedFileError(f"{x.size} plan positions for {s.size} stations of the check; give "
                             "the positions of the check's own stations")

    def array(key):
        values = per.get(key)
        return None if values is None else np.array(
            [math.nan if v is None else v for v in values], dtype=float)

    route = check.get("route", {})
    name = route.get("name") or "route"
    speeds = check.get("speeds", {})
    what = (f"{'Planned speeds' if doing == 'planned' else 'Speeds'} along {name} "
            f"({route.get('length_m', s[-1]):.0f} m, "
            f"{'closed loop' if route.get('closed') else 'open route'}, {s.size} stations) "
            f"checked against the limits below; speeds from {speeds.get('source', 'unknown')}.")
    limits = check.get("limits") or {}
    return ReportData(
        title=f"{name}: speeds {doing}", what=what, station_m=s, x_m=x, y_m=y,
        speed_mps=array("speed_mps"), accel_mps2=array("accel_mps2"),
        limit_speed_mps=array("limit_speed_mps"),
        grip_use=array("friction_ellipse_use"), comfort_use=array("comfort_ellipse_use"),
        curves=tuple(_curve(row) for row in check.get("curves", [])),
        verdict=str(check.get("verdict", "unknown")),
        violations=tuple(str(v.get("message", "")) for v in check.get("violations", [])),
        limits=limit_rows(limits) + constraint_rows(check.get("constraints")),
        provenance=tuple(provenance) + noise_rows(check.get("fit")),
        length_m=float(route.get("length_m", s[-1])), closed=bool(route.get("closed", False)),
        notes=tuple(notes), stops=report_stops(check.get("constraints")))


def provenance_rows(files, solver: str, version: str, generated: str) -> list[tuple[str, str]]:
    """Provenance as label/value pairs.

    Parameters
    ----------
    files : sequence of (str, str, str or None)
        Each input's role, path and SHA-256 (None: not known).
    solver : str
        The solver and its status, or why there is none.
    version, generated : str
        The tool's version and when the report was made (UTC).
    """
    rows = []
    for role, path, digest in files:
        rows.append((role, str(path)))
        rows.append((f"{role}: sha256", digest or "not known"))
    rows += [("solver", solver), ("tool", f"curvespeed {version}"), ("generated (UTC)", generated)]
    return rows
