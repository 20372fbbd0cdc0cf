"""Numbers no run can have, given to the library from a script rather than through the command
line or a limits file: each is refused at once with a :class:`LimitsError` in the words the
command line uses (the range, the reason, what to do), never a memory error or an overflow deep
inside the sampler; and the same bound on the command line where it was missing.

Every route and profile here is invented for the tests.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from curvespeed.dynamics.simulate import ReplaySettings, replay
from curvespeed.errors import LimitsError
from curvespeed.export import make_station_profile, sample_by_station, sample_in_time
from curvespeed.export_laps import MAX_LAPS, join_laps, lap_sequence
from curvespeed.limits import MAX_DWELL_S

from hostile_helpers import csv_text, run, snapshot, write

#: An invented stretch: 100 m at 10 m/s braking to rest at 100 m (v^2 = 2 a (100 - s), 1 m/s^2),
#: then leaving it the same way; one stop, at station 100 m.
S = np.linspace(0.0, 200.0, 201)
STOPPING = make_station_profile(S, S, np.zeros(S.size), np.zeros(S.size), np.zeros(S.size),
                                np.minimum(np.sqrt(2.0 * np.abs(S - 100.0)), 10.0),
                                source="stopping")
#: An invented circular loop (radius 50 m) driven at 10 m/s.
R = 50.0
_ANGLE = np.linspace(0.0, 2.0 * np.pi, 101)
LOOP = make_station_profile(R * _ANGLE, R * np.sin(_ANGLE), R * (1.0 - np.cos(_ANGLE)), _ANGLE,
                            np.full(_ANGLE.size, 1.0 / R), np.full(_ANGLE.size, 10.0),
                            source="loop")


# --- dwell: 1e300 s ran the time sampler out of memory and "sampled" 1e300 s by station -----

@pytest.mark.parametrize("sampler, step", [(sample_in_time, 0.05), (sample_by_station, 1.0)])
@pytest.mark.parametrize("dwell, why", [(1e300, "parked"), (3601.0, "parked"),
                                        (math.inf, "parked"),
                                        (-5.0, "how long the vehicle stands there"),
                                        (math.nan, "a number of seconds")])
def test_an_export_dwell_outside_an_hour_is_refused_as_on_the_command_line(sampler, step,
                                                                           dwell, why):
    with pytest.raises(LimitsError) as caught:
        sampler(STOPPING, step, dwell_s=dwell)
    message = str(caught.value)
    assert message.startswith("dwell_s = ")
    for fragment in ("is outside 0..3600 s", why, "give zero or a positive number of seconds "
                     "up to 3600"):
        assert fragment in message, message


@pytest.mark.parametrize("sampler, step", [(sample_in_time, 0.05), (sample_by_station, 1.0)])
def test_a_stop_s_own_dwell_outside_an_hour_names_the_stop(sampler, step):
    with pytest.raises(LimitsError, match=r"^stop at station 100 m: dwell_s = 1e\+300 is "
                                          r"outside 0\.\.3600 s: .*parked"):
        sampler(STOPPING, step, stop_dwell_s=[1e300])


def test_an_hour_at_the_stop_is_sampled_and_held_exactly():
    plain = sample_by_station(STOPPING, 1.0)
    held = sample_by_station(STOPPING, 1.0, dwell_s=MAX_DWELL_S)
    # the dwell is added to the moving time: both sums of the same step times, to round-off
    assert held.total_time_s - plain.total_time_s == pytest.approx(MAX_DWELL_S, abs=1e-9)
    assert sample_in_time(STOPPING, 1.0, stop_dwell_s=[MAX_DWELL_S]).total_time_s == \
        pytest.approx(held.total_time_s, abs=1e-9)


def test_a_replay_with_a_dwell_past_an_hour_is_refused_before_any_work():
    # without the bound the replay's reference sampler asked for 5e301 samples
    with pytest.raises(LimitsError, match=r"dwell_s = 1e\+300 is outside 0\.\.3600 s"):
        replay(STOPPING, settings=ReplaySettings(dwell_s=1e300))


# --- laps: 10**9 laps built a list of 10**9 entries before anything was checked -------------

@pytest.mark.parametrize("laps", [MAX_LAPS + 1, 10**7, 1e7])
def test_more_laps_than_any_run_drives_are_refused_with_the_bound(laps):
    with pytest.raises(LimitsError) as caught:
        lap_sequence(LOOP, laps)
    message = str(caught.value)
    for fragment in (f"{int(laps)} laps is more than 1000", "24-hour endurance race",
                     "ask for at most 1000 laps"):
        assert fragment in message, message


@pytest.mark.parametrize("laps", [math.inf, math.nan, 2.5, True, "3", 0])
def test_a_lap_count_that_is_no_whole_number_from_one_is_refused(laps):
    with pytest.raises(LimitsError, match="a run needs a whole number of laps, at least 1"):
        lap_sequence(LOOP, laps)


def test_the_most_laps_join_into_one_run():
    run_ = join_laps(lap_sequence(LOOP, MAX_LAPS))
    assert run_.laps == MAX_LAPS
    # stations grow by one loop length a lap: 1000 sums of 100 steps, to round-off
    assert run_.lap_stations_m[-1] == pytest.approx(MAX_LAPS * 2.0 * np.pi * R, rel=1e-12)


def test_export_refuses_more_laps_than_any_run_drives(tmp_path):
    # an invented loop small enough that 1001 laps stay under the run's station limit: only the
    # lap bound refuses it (before, 1001 laps were joined and sampled)
    angle = np.linspace(0.0, 2.0 * np.pi, 41)[:-1]
    route = write(tmp_path, "loop.csv", csv_text(30.0 * np.cos(angle), 30.0 * np.sin(angle)))
    profile = tmp_path / "lap.csv"
    result = run("plan", route, "--closed", "--spacing", "2", "-o", profile)
    assert result.exit_code == 0, result.output
    before = snapshot(tmp_path)
    result = run("export", profile, "-o", tmp_path / "run.csv", "--laps", "1001")
    assert "Invalid value for '--laps'" in result.output, result.output
    assert result.exit_code == 2 and snapshot(tmp_path) == before
    assert "1001 laps is more than 1000" in result.output
    assert "ask for at most 1000 laps" in result.output


# --- samples: a step of 1e-9 s asked numpy for 3e10 samples --------------------------------

@pytest.mark.parametrize("sampler, unit", [(sample_in_time, "s"), (sample_by_station, "m")])
def test_more_samples_than_any_trajectory_holds_are_refused(sampler, unit):
    # the stopping stretch takes 30 s over 200 m: 3e10 or 2e11 samples at 1e-9, where the
    # command line refuses more than MAX_SAMPLES (5 million), naming its option
    from curvespeed.errors import SpeedFileError
    from curvespeed.export import MAX_SAMPLES

    span = STOPPING.moving_time_s if unit == "s" else STOPPING.length_m
    with pytest.raises(SpeedFileError) as caught:
        sampler(STOPPING, 1e-9)
    assert str(caught.value) == (
        f"stopping: sampled every 1e-09 {unit} over its {span:.6g} {unit}, it would take "
        f"{math.ceil(span / 1e-9 - 1e-9):.3g} samples, more than {MAX_SAMPLES}: sample it "
        "less often, or a shorter profile")
