"""``curvespeed replay``: simulate a vehicle and a path tracker following a planned profile.

Exit status: 0 the vehicle followed the profile to its end (within --max-lateral-error when
given), 1 it exceeded --max-lateral-error or did not reach the end (lost the path or ran out of
time), 2 bad input (nothing written).
"""

from __future__ import annotations

import sys

import click

from ..dynamics.tracker_kind import TrackerKind
from ._common import EXIT_OK, EXIT_VIOLATIONS, FINITE, echo, handle_errors


@click.command()
@click.argument("profile_file", type=click.Path())
@click.option("-v", "--vehicle", "vehicle_file", type=click.Path(), default=None,
              help="Vehicle file (TOML, table [vehicle]). Without it, a built-in mid-size car.")
@click.option("-o", "--output", required=True, type=click.Path(),
              help="Time series of the run to write (CSV).")
@click.option("--plot", "plot_file", type=click.Path(), default=None,
              help="Also draw the run: lateral error, speed, steering, tyre use (.png, .svg, "
                   ".pdf).")
@click.option("--json", "json_file", type=click.Path(), default=None,
              help="Also write the summary (SI units) to this JSON file.")
@click.option("--tracker", type=click.Choice([k.value for k in TrackerKind]),
              default=TrackerKind.LQR.value, show_default=True,
              help="Lateral tracker: scheduled LQR with curvature feed-forward, or linear "
                   "time-varying MPC over a preview horizon (OSQP).")
@click.option("--max-lateral-error", "max_lateral_error_m", type=FINITE, default=None,
              metavar="M", help="Exit with status 1 when the lateral error exceeds M metres.")
@click.option("--dwell", "dwell_s", type=FINITE, default=0.0, show_default=True, metavar="S",
              help="Seconds held at each stop before leaving it.")
@click.option("--force", is_flag=True, help="Replace output files that exist.")
@handle_errors
def replay(profile_file, vehicle_file, output, plot_file, json_file, tracker,
           max_lateral_error_m, dwell_s, force):
    """Simulate a vehicle following the profile PROFILE_FILE (from `curvespeed plan`).

    A dynamic single-track model (brush tyres within the friction circle, steering angle and
    rate limits, actuator lag; kinematic at low speed) is steered by the chosen tracker and
    driven by the planned acceleration plus a PI on speed. Reports how far it strays from the
    path, how close the tyres come to their limits and where the steering saturates. A replay
    supports engineering judgment; it does not replace tests on a closed track.
    """
    from ..errors import SpeedFileError
    from ..io.atomic import OutputFiles
    from ..limits import check_dwell
    from ..io.meta_json import default_meta_path
    from ..plots import figure_format

    if max_lateral_error_m is not None and not max_lateral_error_m > 0.0:
        raise SpeedFileError(f"--max-lateral-error {max_lateral_error_m:g}: give a positive "
                             "distance in metres")
    check_dwell(dwell_s, name="--dwell")
    fmt = figure_format(plot_file) if plot_file else None
    outputs = OutputFiles(force)
    outputs.add_input(profile_file, "the profile")
    outputs.add_input(default_meta_path(profile_file), "the profile's sidecar")
    outputs.add_input(vehicle_file, "the vehicle file (-v/--vehicle)")
    outputs.add_output(output, "-o/--output")
    for path, option in ((plot_file, "--plot"), (json_file, "--json")):
        if path:
            outputs.add_output(path, option)

    with outputs:               # every output checked here; written together at the end
        result, summary = _run(profile_file, vehicle_file, tracker, dwell_s)
        from ..io.replay_csv import replay_csv_text, replay_summary_json_text

        outputs.write_text(output, replay_csv_text(result))
        if json_file:
            outputs.write_text(json_file, replay_summary_json_text(result, summary))
        if plot_file:
            from ..replay_plots import replay_figure_bytes

            outputs.write_bytes(plot_file, replay_figure_bytes(result, summary, fmt,
                                                               max_lateral_error_m))
    for line in describe(result, summary, vehicle_file):
        echo(line)
    echo(f"wrote  {' and '.join(str(p) for p in outputs.paths)}")
    sys.exit(_verdict(summary, max_lateral_error_m))


def _run(profile_file, vehicle_file, tracker, dwell_s):
    from ..dynamics.simulate import ReplaySettings, replay as run_replay
    from ..dynamics.summary import summarise
    from ..dynamics.vehicle import DEFAULT_VEHICLE
    from ..friction import grip_along
    from ._common import read_profile_and_sidecar

    sp, sidecar = read_profile_and_sidecar(
        profile_file, "the route name is taken from the file name and the vehicle's friction "
        "applies all along instead")
    from ..station_profile import check_planned_time

    check_planned_time(sp)
    grip = None
    if sidecar is not None and sidecar.constraints.friction:
        grip = grip_along(sidecar.limits, sidecar.constraints.friction)
    if vehicle_file is None:
        vehicle = DEFAULT_VEHICLE
    else:
        from ..io.vehicle_toml import read_vehicle

        vehicle = read_vehicle(vehicle_file)
    settings = ReplaySettings(tracker=TrackerKind(tracker), dwell_s=dwell_s)
    if vehicle_file is not None:
        # the step the vehicle needs, found here so that one no step follows is refused naming
        # its file; the replay then finds it follows at once
        from dataclasses import replace

        from ..dynamics.vehicle import integration_step

        settings = replace(settings, integration_dt_s=integration_step(
            vehicle, settings.integration_dt_s, str(vehicle_file)))
    result = run_replay(sp, vehicle, settings, grip)
    return result, summarise(result)


def _sections(grip, mu: float) -> str:
    """What the plan's friction sections made of the vehicle's friction, for the summary."""
    if grip is None or not grip.scale.size:
        return ""
    other = grip.scale[grip.scale != 1.0]
    if not other.size:
        return ""
    spans = int(other.size)
    low, high = mu * float(other.min()), mu * float(other.max())
    shown = f"{low:.3g}" if low == high else f"{low:.3g} to {high:.3g}"
    return (f"; {shown} over {spans} stretch{'es' if spans != 1 else ''} of the plan's friction "
            "sections")


def describe(result, summary, vehicle_file) -> list[str]:
    """The summary as lines for the terminal."""
    import warnings

    from ..errors import CurvespeedWarning

    v = result.vehicle
    lines = [
        f"replay {result.source} with {vehicle_file or 'the built-in mid-size car'}, "
        f"{result.settings.tracker.value} tracker: {summary.message} after "
        f"{summary.duration_s:.2f} s (planned {summary.planned_time_s:.2f} s)",
        f"lateral error  max {summary.max_lateral_error_m:.3f} m at station "
        f"{summary.max_lateral_error_station_m:.1f} m, RMS {summary.rms_lateral_error_m:.3f} m",
        f"heading error  max {summary.max_heading_error_rad:.4f} rad, RMS "
        f"{summary.rms_heading_error_rad:.4f} rad",
        f"speed error    max {summary.max_speed_error_mps:.3f} m/s, RMS "
        f"{summary.rms_speed_error_mps:.3f} m/s",
        f"tyre use       front {summary.peak_front_tyre_use:.2f} at station "
        f"{summary.peak_front_tyre_use_station_m:.1f} m, rear {summary.peak_rear_tyre_use:.2f} "
        f"at station {summary.peak_rear_tyre_use_station_m:.1f} m (friction "
        f"{v.friction_coefficient:g}{_sections(result.grip, v.friction_coefficient)})",
        f"steering       max {summary.max_steer_rad:.3f} rad of {v.max_steer_rad:g}; at the "
        f"angle limit {summary.steer_angle_saturated_s:.2f} s, at the rate limit "
        f"{summary.steer_rate_saturated_s:.2f} s",
    ]
    from ..dynamics.vehicle import INTEGRATION_STEP_S

    if result.settings.integration_dt_s < INTEGRATION_STEP_S:
        lines.append(f"integration    {result.settings.integration_dt_s * 1000:.3g} ms steps: "
                     f"the vehicle's tyres are stiff for its mass and yaw inertia, which the "
                     f"{INTEGRATION_STEP_S * 1000:g} ms step would not follow (docs/replay.md)")
    stats = result.tracker_stats
    if stats:
        lines.append(f"MPC            {stats['qp_solves']} QPs (OSQP), "
                     f"{stats['mean_qp_iterations']:.1f} iterations each on average, "
                     f"{stats['qp_fallbacks']} not solved (LQR command used)")
    if summary.saturated:
        spans = ", ".join(f"{a:.0f}-{b:.0f} m" for a, b in summary.saturated_spans_m[:8])
        more = len(summary.saturated_spans_m) - 8
        spans += f" and {more} more" if more > 0 else ""
        warnings.warn(f"the tyres reach their friction limit for {summary.saturated_s:.2f} s, "
                      f"at stations {spans}: the profile asks more grip than this vehicle "
                      "has there; lower the limits (plan -l) or check the vehicle file",
                      CurvespeedWarning, stacklevel=2)
    return lines


def _verdict(summary, gate_m) -> int:
    from ..dynamics.summary import exceeds

    if not summary.completed:
        click.echo(f"FAIL: the vehicle {summary.message}", err=True)
        return EXIT_VIOLATIONS
    if exceeds(summary, gate_m):
        echo(f"FAIL: lateral error {summary.max_lateral_error_m:.3f} m exceeds "
             f"--max-lateral-error {gate_m:g} m")
        return EXIT_VIOLATIONS
    if gate_m is not None:
        echo(f"PASS: lateral error within {gate_m:g} m")
    return EXIT_OK
