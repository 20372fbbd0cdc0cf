"""The replay drives the plan's friction sections: a wet patch is driven wet.

- :func:`curvespeed.friction.grip_along` states the road's grip along the route relative to
  the route's friction, with the planning rules for a section's two coefficients and for
  overlaps (lowest wins; a high-grip section raises it);
- on a circle driven at constant speed the tyre use is the steady-state closed form
  ``v^2 / (R g mu)`` (point mass on a circle, Newton's second law: each axle carries the share
  of ``m v^2 / R`` that its load carries of ``m g``), with ``mu`` the vehicle's coefficient off
  the section and the section's share of it on the section;
- ``curvespeed replay`` takes the sections from the plan's sidecar and says so.
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from click.testing import CliRunner

from curvespeed.cli.main import cli
from curvespeed.dynamics.simulate import replay
from curvespeed.dynamics.vehicle import DEFAULT_VEHICLE
from curvespeed.export import make_station_profile
from curvespeed.friction import FrictionSection, grip_along
from curvespeed.limits import Limits

ROUTE_MU = Limits().friction_coefficient          # the default limits' friction


def test_grip_along_follows_the_planning_rules_for_sections():
    limits = Limits(friction_coefficient=0.8, lateral_friction_coefficient=0.9)
    grip = grip_along(limits, (
        FrictionSection(100.0, 300.0, 0.4),                 # keeps the ellipse's shape: 0.5
        FrictionSection(200.0, 400.0, 0.6, 0.36),           # given both: min(0.75, 0.4) = 0.4
        FrictionSection(500.0, 600.0, 1.0),                 # high grip: 1.25
    ))
    expect = {50.0: 1.0, 150.0: 0.5, 250.0: 0.4, 350.0: 0.4, 450.0: 1.0, 550.0: 1.25,
              650.0: 1.0, 100.0: 0.5, 300.0: 0.4, 400.0: 1.0}
    for station, scale in expect.items():
        assert grip.at(station) == pytest.approx(scale, rel=1e-15), station
    assert grip.stretches(0.9) == [
        {"start_m": 100.0, "end_m": 200.0, "friction_coefficient": pytest.approx(0.45)},
        {"start_m": 200.0, "end_m": 300.0, "friction_coefficient": pytest.approx(0.36)},
        {"start_m": 300.0, "end_m": 400.0, "friction_coefficient": pytest.approx(0.36)},
        {"start_m": 500.0, "end_m": 600.0, "friction_coefficient": pytest.approx(1.125)}]


def _circle(radius_m: float, speed_mps: float):
    s = np.arange(0.0, 2.0 * math.pi * radius_m, 1.0)
    theta = s / radius_m
    return make_station_profile(s, radius_m * np.sin(theta), radius_m * (1.0 - np.cos(theta)),
                                theta + 0.0, np.full(s.size, 1.0 / radius_m),
                                np.full(s.size, speed_mps))


def test_tyre_use_on_a_wet_half_circle_is_the_steady_state_closed_form():
    R, v = 100.0, 18.0
    wet = FrictionSection(300.0, 550.0, 0.5 * ROUTE_MU)      # half the route's grip
    result = replay(_circle(R, v), grip=grip_along(Limits(), (wet,)))
    assert result.success
    s = result["station_m"]
    g, mu = DEFAULT_VEHICLE.gravity_mps2, DEFAULT_VEHICLE.friction_coefficient
    for lo, hi, mu_here in ((100.0, 280.0, mu), (350.0, 530.0, 0.5 * mu), (600.0, 620.0, mu)):
        inside = (s > lo) & (s < hi)
        expected = v * v / (R * g * mu_here)
        # 0.5 %: the front axle's force turns with the steering angle (about wheelbase / R =
        # 0.028 rad, cos 0.9996) and the tracker's speed loop leaves a small longitudinal force;
        # measured within 0.13 % of the closed form
        for axle in ("front_tyre_use", "rear_tyre_use"):
            assert np.median(result[axle][inside]) == pytest.approx(expected, rel=5e-3), (lo, axle)
    # without the section the same run keeps the vehicle's coefficient all along
    dry = replay(_circle(R, v))
    inside = (dry["station_m"] > 350.0) & (dry["station_m"] < 530.0)
    assert np.median(dry["rear_tyre_use"][inside]) == pytest.approx(v * v / (R * g * mu),
                                                                     rel=5e-3)


def test_replay_command_drives_the_sidecars_friction_sections(tmp_path):
    route = tmp_path / "arc.csv"
    theta = np.arange(0.0, 601.0) / 150.0
    rows = "\n".join(f"{150 * math.sin(t):.4f},{150 * (1 - math.cos(t)):.4f}" for t in theta)
    route.write_text("x_m,y_m\n" + rows + "\n")
    limits = tmp_path / "wet.toml"
    limits.write_text("[limits]\n\n[[friction]]\nstart_m = 200\nend_m = 400\n"
                      f"friction_coefficient = {0.5 * ROUTE_MU}\n")
    runner = CliRunner()
    plan = runner.invoke(cli, ["plan", str(route), "-o", str(tmp_path / "p.csv"),
                               "--limits", str(limits)])
    assert plan.exit_code == 0, plan.output
    out = runner.invoke(cli, ["replay", str(tmp_path / "p.csv"), "-o", str(tmp_path / "r.csv"),
                              "--json", str(tmp_path / "r.json")])
    assert out.exit_code == 0, out.output
    half = 0.5 * DEFAULT_VEHICLE.friction_coefficient
    assert f"friction {DEFAULT_VEHICLE.friction_coefficient:g}; {half:.3g} over 1 stretch" \
        in out.output
    doc = json.loads((tmp_path / "r.json").read_text())
    assert doc["road_friction"] == [{"start_m": 200.0, "end_m": 400.0,
                                     "friction_coefficient": pytest.approx(half)}]
    # a profile without sections: the summary and the JSON say nothing of sections
    plain = runner.invoke(cli, ["plan", str(route), "-o", str(tmp_path / "q.csv")])
    assert plain.exit_code == 0, plain.output
    out = runner.invoke(cli, ["replay", str(tmp_path / "q.csv"), "-o", str(tmp_path / "s.csv"),
                              "--json", str(tmp_path / "s.json")])
    assert out.exit_code == 0 and "stretch" not in out.output
    assert "road_friction" not in json.loads((tmp_path / "s.json").read_text())
