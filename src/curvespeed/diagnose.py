"""Why no speed profile exists, said in the user's terms.

Solvers call these when they find no profile, before blaming the jerk bound: a station where
the vehicle cannot move at all (:func:`undrivable_station`), or a stop too close to the start
for the start speed (:func:`stop_out_of_reach`). Each returns the message of an
:class:`~curvespeed.errors.InfeasibleError` (or None when the cause is not this one): what is
wrong, where (the station, the stop as the user gave it and where it came from), why, and what
to do. Core numerics: nothing here reads or writes files.
"""

from __future__ import annotations

import math

import numpy as np

from . import rest_step
from .errors import InfeasibleError
from .limits import stop_node
from .problem import SpeedProblem

#: Squared speed at which "at rest or nearly" is judged, m^2/s^2 ((1 mm/s)^2).
_CRAWL_B = 1e-6

#: A steady climbing speed below this, m/s (walking pace, 3.6 km/h), is too little power to
#: plan with: a crawl that slow is a power in the wrong unit, not a vehicle.
_WALKING_MPS = 1.0


#: Where the curvature bound planning uses is at least this many times the estimate's
#: |curvature|, a message naming a curve there says that the bound, not the road as read, sets it.
BOUND_OVER_ESTIMATE = 1.5

#: What sets a node's speed cap (``SpeedProblem.cap_source``), in words.
_CAP_WORDS = {"stop": "a stop", "zone": "a speed zone", "max_speed": "the top speed",
              "jerk_launch": "the last step into a stop, jerk-limited",
              "window_end": "braking for what lies beyond the window"}


def cap_words(problem: SpeedProblem, k: int, ceiling_b) -> str:
    """What sets the ceiling ``ceiling_b`` (squared speed) at node ``k``, in words: its speed
    cap (a stop, a zone, the top speed) where the ceiling is that cap, else the curve there
    (:func:`curve_words`)."""
    if float(ceiling_b) >= float(problem.cap_b[k]) * (1.0 - 1e-9):
        source = str(problem.cap_source[k])
        return _CAP_WORDS.get(source, source)
    return curve_words(problem, k)


def _radius(kappa: float) -> str:
    return "a straight" if kappa < 1e-5 else f"R {1.0 / kappa:.0f} m"


def curve_words(problem: SpeedProblem, k: int) -> str:
    """``a curve, R .. m`` at node ``k`` (the radius planning uses); where that is the
    curvature bound and the bound lies well above the estimate (:data:`BOUND_OVER_ESTIMATE`),
    also what the estimate reads and why the two differ, so a refusal on a recorded drive's
    start or end does not send the user looking for a bend that is not there."""
    planned = float(problem.kappa_abs[k])
    read = abs(float(problem.kappa_signed[k]))
    words = f"a curve, {_radius(planned)}"
    if planned >= BOUND_OVER_ESTIMATE * read and planned > 1e-5:
        words += (f" by the curvature bound, where the estimate reads {_radius(read)}: the "
                  "points do not pin the curvature down there, as at a log's start or end or "
                  "where the points are sparse or scattered; more or better points there "
                  "narrow the bound")
    return words


def undrivable_station(problem: SpeedProblem) -> str | None:
    """The first station where the vehicle can neither stand nor move forward, explained.

    At (nearly) zero speed the acceleration interval of a station must contain zero for the
    vehicle to stand there, and a positive acceleration for it to move on: the tyres must hold
    or climb the grade, and carry the cross-slope. A grade steeper than friction allows (in
    practice an elevation error: a spike, or receiver noise) fails both; no profile can pass
    such a station, whatever the jerk bound. Returns None when every station is drivable.
    """
    lo, hi = problem.accel_bounds(np.full(problem.n_nodes, _CRAWL_B))
    stuck = (hi <= 0.0) | (lo > 0.0) | (lo > hi)
    if not stuck.any():
        return None
    bad = np.flatnonzero(stuck)
    k = int(bad[0])
    grade = math.tan(math.asin(float(problem.sin_grade[k])))
    mu = float(problem.mu_long[k])
    section = friction_section_note(problem, k)
    station = float(problem.station_m[k])
    others = (f" (and {bad.size - 1} more station(s) up to {problem.station_m[bad[-1]]:.1f} m)"
              if bad.size > 1 else "")
    if abs(grade) > 0.0 and abs(problem.resistance(_CRAWL_B, k)) >= abs(grade) * 1e-3:
        steepest = int(bad[np.argmax(np.abs(problem.sin_grade[bad]))])
        worst = 100.0 * math.tan(math.asin(float(problem.sin_grade[steepest])))
        return (f"{problem.source}: a grade of {100.0 * grade:+.0f} % at station {station:.1f} m"
                f"{others} is steeper than the tyres can climb or hold (friction "
                f"{mu:g}{section} allows about {100.0 * mu:.0f} %; the steepest is "
                f"{worst:+.0f} % at {problem.station_m[steepest]:.1f} m): no vehicle can pass it, "
                "whatever the other limits. Public roads stay below about 35 %; grades like "
                "this come from elevation errors (a spike, receiver noise, a design file's "
                "elevation record): check the elevations, or plan without them (--no-elevation)")
    return (f"{problem.source}: at station {station:.1f} m{others} the vehicle cannot stand or "
            f"move forward at any speed (acceleration allowed there at rest: {lo[k]:.3g} to "
            f"{hi[k]:.3g} m/s^2; friction there {mu:g}{section}); check the grade, the "
            "superelevation, the friction coefficient and the drag there")


def friction_section_note(problem: SpeedProblem, k: int) -> str:
    """`` of the friction section a..b m (origin)`` when a friction section sets node ``k``'s
    friction, else an empty string."""
    i = int(problem.friction_index[k])
    return f" of the {problem.friction_sections[i].label()}" if i >= 0 else ""


def braking_decel(problem: SpeedProblem, last: int) -> tuple[float, int | None]:
    """The mean deceleration a vehicle can brake at on the level from the first node up to
    node ``last``, m/s^2, and the node of lowest friction where friction (``mu g``) is below
    the deceleration cap somewhere on the way (None where the cap binds all along).

    Each step brakes at the smaller of the cap and ``mu g`` at its lower-friction node; over
    the way the squared speed can fall by ``2 * mean * distance`` (exact without jerk bound).
    """
    lim = problem.limits
    last = max(int(last), 1)
    mu = problem.mu_long[: last + 1]
    k = int(np.argmin(mu))
    if not float(mu[k]) * lim.gravity_mps2 < lim.max_decel_mps2:
        return lim.max_decel_mps2, None      # the cap all along, exactly
    return float(np.mean(step_decels(problem)[:last])), k


def step_decels(problem: SpeedProblem) -> np.ndarray:
    """The deceleration each step can brake at on the level, m/s^2: the smaller of the cap and
    ``mu g`` at its lower-friction node (:func:`braking_decel` averages them over the way)."""
    lim, mu = problem.limits, problem.mu_long
    return np.minimum(lim.max_decel_mps2, np.minimum(mu[:-1], mu[1:]) * lim.gravity_mps2)


def grip_words(problem: SpeedProblem, slippery: int, decel: float) -> str:
    """How friction limits braking on the way: the friction, its section, where, the mean."""
    lim = problem.limits
    mu = float(problem.mu_long[slippery])
    return (f"friction {mu:g}{friction_section_note(problem, slippery)} from station "
            f"{problem.station_m[slippery]:.1f} m allows only {mu * lim.gravity_mps2:.2f} m/s^2 "
            f"(mu g, below max_decel_mps2 = {lim.max_decel_mps2:g}): {decel:.2f} m/s^2 on "
            "average over the way")


def jerk_limited_stopping_distance(v0: float, decel: float, jerk: float | None) -> float:
    """Shortest distance to come to rest from ``v0``, m.

    Without a jerk bound ``v0^2 / (2 a)``; with one, the double-S stop (Biagiotti & Melchiorri
    2008, section 3.4): ``v0^2 / (2 a) + v0 a / (2 j)`` if ``v0 j >= a^2``, else
    ``v0 sqrt(v0 / j)``.
    """
    if jerk is None:
        return v0 * v0 / (2.0 * decel)
    if v0 * jerk >= decel * decel:
        return v0 * v0 / (2.0 * decel) + v0 * decel / (2.0 * jerk)
    return v0 * math.sqrt(v0 / jerk)


def _fastest_start_that_stops(distance: float, decel: float, jerk: float | None) -> float:
    """The largest ``v0`` whose stopping distance is ``distance`` (inverse of the above)."""
    if jerk is None:
        return math.sqrt(2.0 * decel * distance)
    # v0^2 / (2 a) + v0 a / (2 j) = d, valid where v0 j >= a^2
    half = decel * decel / (2.0 * jerk)
    v0 = -half + math.sqrt(half * half + 2.0 * decel * distance)
    return v0 if v0 * jerk >= decel * decel else (distance * distance * jerk) ** (1.0 / 3.0)


def braking_reach(v0: float, v1, decel, jerk: float) -> np.ndarray:
    """Shortest distance to slow from ``v0`` (at zero deceleration) to ``v1`` (arrays allowed)
    with deceleration up to ``decel`` and jerk up to ``jerk``, m: the deceleration ramps up at
    ``jerk`` and holds at ``decel`` once it gets there (uniform-jerk kinematics, as in the
    double-S of Biagiotti & Melchiorri 2008, section 3.4). The ramp alone takes the speed down
    by ``decel^2 / (2 jerk)``; a smaller change ends within it, after ``sqrt(2 dv / jerk)``."""
    v1, decel = np.asarray(v1, dtype=float), np.asarray(decel, dtype=float)
    dv = np.maximum(v0 - v1, 0.0)
    ramp_dv = decel * decel / (2.0 * jerk)
    t = np.sqrt(2.0 * np.minimum(dv, ramp_dv) / jerk)          # time on the ramp
    on_ramp = v0 * t - jerk * t ** 3 / 6.0
    t2 = np.maximum(dv - ramp_dv, 0.0) / decel                   # then at the cap
    return on_ramp + (v0 - np.minimum(dv, ramp_dv)) * t2 - 0.5 * decel * t2 * t2


def ceiling_out_of_reach(problem: SpeedProblem) -> str | None:
    """The first station ahead whose speed ceiling (a curve, a zone, the top speed) the vehicle
    cannot brake down to from the start speed in time with the jerk bound, explained; None
    when the route starts at rest, has no jerk bound, starts with a given acceleration (a
    replanned vehicle), or every ceiling can be reached.

    Braking starts at zero acceleration (:func:`braking_reach`), at the mean deceleration
    friction and the cap allow on the level up to that station (:func:`braking_decel`); on a
    curve friction also carries the lateral load, so this is the least it takes.
    """
    lim = problem.limits
    if (problem.closed or not problem.b_start or lim.max_jerk_mps3 is None
            or problem.accel_start_mps2 != 0.0):
        return None
    jerk, v0 = lim.max_jerk_mps3, math.sqrt(problem.b_start)
    ceiling = problem.lateral_ceiling_b()
    ahead = np.flatnonzero(ceiling[1:] < problem.b_start) + 1
    if ahead.size == 0:
        return None
    mean_decel = np.cumsum(step_decels(problem))[ahead - 1] / ahead   # each one's braking_decel
    v_k = np.sqrt(np.maximum(ceiling[ahead], 0.0))
    need = braking_reach(v0, v_k, mean_decel, jerk)
    available = problem.station_m[ahead] - problem.station_m[0]
    short = np.flatnonzero(need > available * (1.0 + 1e-9))
    if short.size == 0:
        return None
    i = int(short[0])
    k = int(ahead[i])
    decel, slippery = braking_decel(problem, k)
    how = (f"braking where {grip_words(problem, slippery, decel)}" if slippery is not None
           else f"braking at up to {decel:g} m/s^2")
    fastest = rest_step.largest_true(
        lambda v: braking_reach(float(v), v_k[i], decel, jerk) <= available[i],
        np.float64(v_k[i]), np.float64(v0))
    return (f"{problem.source}: start speed {v0:.2f} m/s is too high: the vehicle must be down "
            f"to {v_k[i]:.2f} m/s at station {problem.station_m[k]:.1f} m "
            f"({cap_words(problem, k, ceiling[k])}), and {how} with jerk up to {jerk:g} m/s^3 "
            f"from zero deceleration takes at least {need[i]:.1f} m, only {available[i]:.1f} m "
            f"are available. Lower the start speed to {float(fastest):.2f} m/s or less, or "
            "raise max_jerk_mps3 or max_decel_mps2")


def stop_out_of_reach(problem: SpeedProblem, jerk: bool) -> str | None:
    """The first stop the vehicle cannot come to rest at from the start speed, explained.

    Names the stop as the user gave it (its station and where it came from: ``--stop`` or the
    limits file) and compares the distance from the start with the shortest stop from the
    start speed at the deceleration cap (and the jerk bound when ``jerk``) on the level. None
    when the route starts at rest or every stop is far enough.
    """
    if problem.closed or not problem.b_start:
        return None
    lim = problem.limits
    v0 = math.sqrt(problem.b_start)
    j = lim.max_jerk_mps3 if jerk else None
    s0 = float(problem.station_m[0])
    for stop in sorted(problem.stops, key=lambda st: st.station_m):
        node = stop_node(stop.station_m, problem.ds, problem.n_nodes, problem.closed)
        decel, slippery = braking_decel(problem, node)
        need = jerk_limited_stopping_distance(v0, decel, j)
        available = float(problem.station_m[node]) - s0
        if need <= available:
            continue
        origin = f"{stop.origin}: " if stop.origin else ""
        name = f" '{stop.name}'" if getattr(stop, "name", "") else ""
        jerk_part = f" with jerk up to {j:g} m/s^3" if j is not None else ""
        fastest = _fastest_start_that_stops(available, decel, j)
        if slippery is not None:
            how = (f"braking where {grip_words(problem, slippery, decel)}{jerk_part}")
            raise_limit = ("check the friction of that section" if problem.friction_index[
                slippery] >= 0 else "check friction_coefficient")
        else:
            how = f"braking at up to {decel:g} m/s^2{jerk_part}"
            raise_limit = "raise max_decel_mps2" + (" or max_jerk_mps3" if j is not None
                                                   else "")
        return (f"{problem.source}: {origin}the stop{name} at station {stop.station_m:g} m is "
                f"{available:.1f} m from the start, too close to come to rest from the start "
                f"speed {v0:.2f} m/s: {how}, takes {need:.1f} m on the level. Lower the "
                f"start speed to {fastest:.2f} m/s or less, move the stop to {need:.1f} m or "
                f"more from the start, or {raise_limit}")
    return None


def standstill(problem: SpeedProblem, b: np.ndarray) -> str | None:
    """A profile that stands still somewhere other than at a rest point never arrives: the
    first such station, explained (None when the profile moves everywhere it should).

    A step with zero speed at both ends is never covered; the limits leave no speed there
    (:func:`undrivable_station` explains the usual causes first)."""
    v = np.sqrt(np.maximum(np.asarray(b, dtype=float), 0.0))
    dead = np.flatnonzero((v[:-1] <= 0.0) & (v[1:] <= 0.0))
    if dead.size == 0:
        return None
    stuck = undrivable_station(problem)
    if stuck is not None:
        return stuck
    k = int(dead[0])
    stops = [st for st in problem.stops
             if stop_node(st.station_m, problem.ds, problem.n_nodes, problem.closed) in (k, k + 1)]
    if len(stops) >= 2 or problem.cap_b[k] == problem.cap_b[k + 1] == 0.0:
        named = " and ".join(f"{st.station_m:g} m" + (f" ({st.origin})" if st.origin else "")
                             for st in stops) or (f"{problem.station_m[k]:.1f} and "
                                                 f"{problem.station_m[k + 1]:.1f} m")
        return (f"{problem.source}: the vehicle must be at rest at {named}, on neighbouring "
                f"stations {problem.ds:g} m apart, so it never covers the step between them; "
                "merge the stops or move them at least two station steps apart")
    return (f"{problem.source}: the limits leave no speed at all between stations "
            f"{problem.station_m[k]:.1f} and {problem.station_m[k + 1]:.1f} m, so no profile "
            "gets past them; check the limits (units, drag and mass, the cross-slope) and the "
            "route there")


def underpowered(problem: SpeedProblem) -> str | None:
    """The power limit as the cause, when the vehicle cannot climb the route's steepest uphill
    faster than walking pace (None otherwise).

    On a grade the drive force P/v must carry the grade and rolling resistance, so the
    steady climbing speed there is ``v = (P/m) / (g sin(theta) + Crr g cos(theta))`` (drag
    is negligible at a crawl). A power that small (most likely in kW under the W key) leaves
    no jerk-limited profile; the solver's own message would blame the jerk bound.
    """
    lim = problem.limits
    p = lim.power_per_mass_wpkg
    if not math.isfinite(p):
        return None
    res = problem.resistance(np.zeros(problem.n_nodes))
    k = int(np.argmax(res))
    if res[k] <= 0.0 or p / res[k] >= _WALKING_MPS:
        return None
    v = p / float(res[k])
    grade = 100.0 * math.tan(math.asin(float(problem.sin_grade[k])))
    return (f"{problem.source}: a power of {lim.max_power_w:g} W (max_power_w, --max-power) "
            f"for {lim.mass_kg:g} kg (mass_kg, --mass) ({p:.3g} W/kg) climbs the {grade:+.1f} % grade at station "
            f"{problem.station_m[k]:.1f} m at {v:.3g} m/s at most ({3.6 * v:.3g} km/h), "
            f"slower than walking: the power is too small to plan with. If the power is "
            f"{lim.max_power_w:g} kW, give {lim.max_power_w * 1000.0:g} W; otherwise check "
            "the mass and the grades")


def check_start_end(problem: SpeedProblem, ceiling_b: np.ndarray) -> None:
    """Raise :class:`InfeasibleError` if a fixed start or end speed exceeds its node's ceiling."""
    for which, b_fixed, k in (("start", problem.b_start, 0), ("end", problem.b_end, -1)):
        if b_fixed is not None and b_fixed > ceiling_b[k] * (1 + 1e-9) + 1e-12:
            k = k % problem.n_nodes
            i = int(problem.friction_index[k])
            grip = ("" if i < 0 else f" on friction {problem.mu_lat[k]:g} across the path of the "
                    f"{problem.friction_sections[i].label()}")
            raise InfeasibleError(
                f"{problem.source}: {which} speed {math.sqrt(b_fixed):.2f} m/s exceeds what the "
                f"route allows at station {problem.station_m[k]:.1f} m "
                f"({math.sqrt(ceiling_b[k]):.2f} m/s, set by "
                f"{cap_words(problem, k, ceiling_b[k])}{grip}); lower the {which} speed")
