"""Figures are tested by structure: axes, labels with units, and the data the lines carry.

A smoke test writes PNG, SVG and PDF and checks each file's signature, not its pixels.
"""

from __future__ import annotations

import re
import subprocess
import sys

import numpy as np
import pytest

from curvespeed.errors import OutputError
from curvespeed.export import StationProfile
from curvespeed.limits import Limits, RouteConstraints, SpeedZone, Stop
from curvespeed.planner import plan_profile
from curvespeed.check import SpeedKind, check_speeds, checked_constraints
from curvespeed.plots import (gg_bytes, plot_accel, plot_curvature, plot_gg, plot_jerk,
                              plot_overview, plot_plan_view, plot_speed, save_overview)
from curvespeed.report.model import HOLD_ACCEL_MPS2

from helpers import geometry_from_curvature

UNIT = re.compile(r"\((m|m/s|1/m|m/s²|m/s³)\)$")
LIMITS = Limits(friction_coefficient=0.8, lateral_friction_coefficient=0.7,
                max_lateral_accel_mps2=2.5, max_accel_mps2=1.5, max_decel_mps2=2.5,
                max_speed_mps=20.0, max_jerk_mps3=2.0)
CONSTRAINTS = RouteConstraints(zones=(SpeedZone(20.0, 60.0, 8.0),), stops=(Stop(150.0),))


@pytest.fixture(scope="module")
def profile():
    s = np.arange(301.0)
    kappa = np.interp(s, [0, 80, 110, 160, 190, 300], [0, 0, 1 / 35, 1 / 35, 0, 0])
    geo = geometry_from_curvature(kappa, name="Invented test bend")
    # planned without the jerk bound (the envelope solver has none); the figure shades it
    return plan_profile(geo, LIMITS.replace(max_jerk_mps3=None), CONSTRAINTS)


@pytest.fixture(scope="module")
def overview(profile):
    return plot_overview(profile, LIMITS, CONSTRAINTS)


def band_y(band):
    """Data y-range of an axhspan patch (a Rectangle or, in older matplotlib, a Polygon)."""
    y = band.get_patch_transform().transform(band.get_path().vertices)[:, 1]
    return y.min(), y.max()


def test_overview_has_the_expected_axes_with_units(overview):
    assert set(overview.axes) == {"plan", "curves", "speed", "use"}
    assert overview.axes["plan"].get_xlabel() == "x (m)"
    assert overview.axes["plan"].get_ylabel() == "y (m)"
    assert overview.axes["speed"].get_ylabel() == "speed (m/s)"
    assert overview.axes["use"].get_ylabel() == "use (%)"
    assert overview.axes["use"].get_xlabel() == "station (m)"
    assert overview.axes["plan"].get_aspect() == 1.0
    # no panel per derivative and no g-g diagram in the overview
    labels = [ax.get_ylabel() for ax in overview.figure.axes]
    assert not any("jerk" in y or "curvature" in y or "acceleration" in y for y in labels)


@pytest.fixture(scope="module")
def checked(profile):
    """The profile checked along its route, as ``check --speeds`` would number its curves."""
    return check_speeds(profile.geometry, LIMITS, checked_constraints(CONSTRAINTS, warn=False),
                        profile.speed_mps, kind=SpeedKind.TRACE)


def test_plan_view_numbers_the_curves_as_the_check_with_advisory_speeds(overview, checked):
    plan = overview.artists["plan"]
    assert len(checked.curves) == 1                  # the one invented bend
    assert [lab.get_text() for lab in plan.labels] == [
        f"{c.number}  {c.advisory.kmh} km/h" for c in checked.curves]
    (line,) = plan.curves
    c = checked.curves[0]
    s = checked.station_m
    assert line.get_xdata().size == np.count_nonzero((s >= c.start_m) & (s <= c.end_m))
    np.testing.assert_array_equal(plan.route.get_xdata(), checked.geometry.x_m)


def test_speed_panel_bands_and_zones(overview, profile, checked):
    art = overview.artists["speed"]
    np.testing.assert_array_equal(art.speed.get_xdata(), profile.station_m)
    np.testing.assert_array_equal(art.speed.get_ydata(), profile.speed_mps)
    np.testing.assert_array_equal(art.ceiling.get_ydata(), checked.limit_speed_mps)
    assert art.ceiling.get_zorder() < art.speed.get_zorder()
    assert len(art.bands) == len(checked.curves)
    # the planned profile brakes into the bend and for the stop, and speeds up after both
    a = checked.accel_mps2
    assert len(art.braking) >= 2 and len(art.launch) >= 2
    for span in art.braking:
        x0, x1 = span.get_x(), span.get_x() + span.get_width()
        inside = (checked.station_m >= x0) & (checked.station_m <= x1)
        assert a[inside].min() < -HOLD_ACCEL_MPS2


def test_use_strip_is_the_checks_grip_and_comfort_use(overview, checked):
    art = overview.artists["use"]
    np.testing.assert_allclose(art.grip.get_ydata(), 100 * checked.use["friction_ellipse"])
    np.testing.assert_allclose(art.comfort.get_ydata(), 100 * checked.use["comfort_ellipse"])
    assert art.limit.get_ydata()[0] == 100.0


def test_gg_is_a_figure_of_its_own(profile):
    data = gg_bytes(profile, "png", LIMITS)
    assert data.startswith(b"\x89PNG\r\n\x1a\n") and len(data) > 10_000


def test_title_names_route_length_and_time(overview, profile):
    title = overview.figure.get_suptitle()
    assert "Invented test bend" in title
    assert "300 m" in title
    assert f"{profile.total_time_s:.1f} s" in title


def test_speed_panel_data_match_the_profile(profile):
    art = plot_speed(profile, CONSTRAINTS)
    np.testing.assert_array_equal(art.speed.get_xdata(), profile.station_m)
    np.testing.assert_array_equal(art.speed.get_ydata(), profile.speed_mps)
    np.testing.assert_array_equal(art.ceiling.get_ydata(), profile.limit_speed_mps)
    # limits behind the speed line
    assert art.ceiling.get_zorder() < art.speed.get_zorder()
    (zone,) = art.zones
    np.testing.assert_array_equal(zone.get_xdata(), [20.0, 60.0])
    np.testing.assert_array_equal(zone.get_ydata(), [8.0, 8.0])
    assert zone.get_zorder() < art.speed.get_zorder()
    (stop,) = art.stops
    np.testing.assert_array_equal(stop.get_xdata(), [150.0, 150.0])


def test_curvature_accel_and_jerk_panels(profile):
    a = {"curvature": plot_curvature(profile), "accel": plot_accel(profile, LIMITS),
         "jerk": plot_jerk(profile, LIMITS)}
    np.testing.assert_array_equal(a["curvature"].line.get_ydata(),
                                  profile.geometry.curvature_1pm)
    np.testing.assert_array_equal(a["accel"].line.get_ydata(), profile.accel_mps2)
    np.testing.assert_array_equal(a["jerk"].line.get_ydata(), profile.jerk_mps3)
    assert band_y(a["accel"].band) == pytest.approx((-2.5, 1.5))
    assert band_y(a["jerk"].band) == pytest.approx((-2.0, 2.0))


def test_gg_diagram_points_and_ellipses(profile):
    gg = plot_gg(profile, LIMITS)
    np.testing.assert_array_equal(gg.points.get_xdata(), profile.lat_accel_mps2)
    np.testing.assert_array_equal(gg.points.get_ydata(), profile.accel_mps2)
    g = LIMITS.gravity_mps2
    fx, fy = gg.friction.get_xdata(), gg.friction.get_ydata()
    # semi-axes mu_lat g across, mu g along; the 361-point curve includes the axis points
    assert np.abs(fx).max() == pytest.approx(0.7 * g, rel=1e-12)
    assert np.abs(fy).max() == pytest.approx(0.8 * g, rel=1e-12)
    cx, cy = gg.comfort.get_xdata(), gg.comfort.get_ydata()
    assert np.abs(cx).max() == pytest.approx(2.5, rel=1e-12)
    assert cy.max() == pytest.approx(1.5, rel=1e-12)
    assert cy.min() == pytest.approx(-2.5, rel=1e-12)
    assert gg.ax.get_aspect() == 1.0


def test_plan_view_is_coloured_by_speed_with_equal_aspect(profile):
    plan = plot_plan_view(profile)
    segments = plan.path.get_segments()
    assert len(segments) == profile.station_m.size - 1
    np.testing.assert_array_equal(segments[0][0], [profile.geometry.x_m[0],
                                                   profile.geometry.y_m[0]])
    np.testing.assert_allclose(plan.path.get_array(),
                               0.5 * (profile.speed_mps[:-1] + profile.speed_mps[1:]))
    assert plan.colorbar.ax.get_ylabel() == "speed (m/s)"
    assert plan.ax.get_aspect() == 1.0


def test_without_limits_the_panels_say_so(profile):
    assert "no sidecar" in plot_gg(profile).note.get_text()
    assert plot_accel(profile).band is None
    speed = plot_speed(profile)
    assert speed.zones == () and speed.stops == ()
    ov = plot_overview(profile)
    assert ov.artists["use"].grip is None and "not known" in ov.artists["use"].note.get_text()
    assert len(ov.artists["plan"].labels) == 1       # curves depend on the route alone


def test_jerk_panel_without_a_jerk_bound(profile):
    art = plot_jerk(profile, LIMITS.replace(max_jerk_mps3=None))
    assert art.band is None and "no jerk bound" in art.note.get_text()


def test_jerk_panel_shows_lateral_jerk_when_it_is_bounded(profile):
    art = plot_jerk(profile, LIMITS.replace(max_lateral_jerk_mps3=0.6))
    # per step (curvespeed.problem): the rate d(kappa v^2)/ds = kappa' v^2 + 2 kappa a at both
    # ends of the step (curvature and v^2 linear in station), the larger in magnitude, times the
    # larger of the step's two speeds. Planned without a jerk bound: every step has constant
    # acceleration. Tolerance: the same sums in another order (rounding, 1e-15 m/s^3).
    assert not profile.rest_step.any()
    v, kappa, s = profile.speed_mps, profile.geometry.curvature_1pm, profile.geometry.station_m
    rate, accel = np.diff(kappa) / np.diff(s), np.diff(v * v) / (2.0 * np.diff(s))
    first = rate * v[:-1] ** 2 + 2.0 * kappa[:-1] * accel
    last = rate * v[1:] ** 2 + 2.0 * kappa[1:] * accel
    larger = np.where(np.abs(last) > np.abs(first), last, first)
    np.testing.assert_allclose(art.lateral_line.get_ydata(),
                               larger * np.maximum(v[:-1], v[1:]), rtol=1e-12, atol=1e-12)
    np.testing.assert_allclose(art.lateral_line.get_xdata(), 0.5 * (s[:-1] + s[1:]))
    assert sorted(line.get_ydata()[0] for line in art.lateral_limits) == [-0.6, 0.6]
    assert art.ax.get_ylabel() == "jerk (m/s³)" and art.ax.get_legend() is not None
    plain = plot_jerk(profile, LIMITS)
    assert plain.lateral_line is None and plain.lateral_limits == ()


def test_each_panel_draws_on_its_own_figure_or_a_given_axes(profile):
    from matplotlib.figure import Figure

    for func in (plot_speed, plot_curvature, plot_accel, plot_jerk, plot_gg, plot_plan_view):
        art = func(profile)
        assert art.ax.figure is not None
        fig = Figure()
        ax = fig.add_subplot()
        assert func(profile, ax=ax).ax is ax


def test_station_profile_and_profile_give_the_same_lines(profile):
    a = plot_speed(profile)
    b = plot_speed(StationProfile.from_profile(profile))
    np.testing.assert_array_equal(a.speed.get_ydata(), b.speed.get_ydata())


@pytest.mark.parametrize("suffix, magic", [(".png", b"\x89PNG\r\n\x1a\n"), (".svg", b"<?xml"),
                                           (".pdf", b"%PDF-")])
def test_smoke_writes_png_svg_pdf(profile, tmp_path, suffix, magic):
    path = save_overview(profile, tmp_path / f"overview{suffix}", LIMITS, CONSTRAINTS)
    data = path.read_bytes()
    assert data.startswith(magic) and len(data) > 10_000
    # no time stamps: the same figure twice gives the same bytes
    again = save_overview(profile, tmp_path / f"again{suffix}", LIMITS, CONSTRAINTS)
    assert again.read_bytes() == data
    # an existing file is kept unless force
    with pytest.raises(OutputError, match="file exists"):
        save_overview(profile, path, LIMITS, CONSTRAINTS)
    assert path.read_bytes() == data


def test_unknown_figure_format_is_refused(profile, tmp_path):
    with pytest.raises(OutputError, match=r"\.png, \.svg, \.pdf"):
        save_overview(profile, tmp_path / "overview.jpg")
    assert not (tmp_path / "overview.jpg").exists()


def test_matplotlib_is_imported_lazily_and_never_pyplot():
    code = (
        "import sys\n"
        "import curvespeed.plots, curvespeed.export, curvespeed.io.trajectory\n"
        "import curvespeed.io.profile_csv, curvespeed.io.meta_json\n"
        "assert 'matplotlib' not in sys.modules, 'imported at module level'\n"
        "import numpy as np\n"
        "from curvespeed.export import make_station_profile\n"
        "s = np.arange(10.0); z = np.zeros(10)\n"
        "sp = make_station_profile(s, s, z, z, z, np.linspace(0, 3, 10))\n"
        "curvespeed.plots.plot_overview(sp).figure.savefig(__import__('io').BytesIO())\n"
        "assert 'matplotlib.pyplot' not in sys.modules, 'pyplot imported'\n"
    )
    subprocess.run([sys.executable, "-c", code], check=True)
