"""``curvespeed batch plan|check``: every road of a network, one task each, on Dask.

Exit status: 0 every road processed (and, for ``check``, every road passes); 1 ``check`` found a
violation on some road; 2 bad invocation (nothing written); 3 some roads could not be processed
(``failures.csv`` says why). Stopped by a signal: 128 + its number; the roads finished so far are
kept, and the same command continues where it stopped.
"""

from __future__ import annotations

import sys

import click

from ..solvers import QPBackend, SolverKind
from ._common import FINITE, echo, fit_options, handle_errors
from ._limits import limit_override_options

EXIT_SOME_FAILED = 3
SPEED_UNITS = ("km/h", "mph", "m/s")


def batch_options(func):
    """Inputs, output folder, attribute fields, cluster, limits and geometry options."""
    options = [
        click.argument("inputs", nargs=-1, required=True, type=click.Path()),
        click.option("-o", "--output-dir", "outdir", type=click.Path(), required=True,
                     help="Folder for the outputs: new, empty, or one an earlier run of the "
                          "same batch command wrote (the run then continues it)."),
        click.option("--layer", default=None, help="Layer of a GeoPackage (default: the first)."),
        click.option("--id-field", default=None, metavar="FIELD",
                     help="Attribute naming each road (its outputs' file names); default: the "
                          "feature's number in the layer."),
        click.option("--speed-field", default=None, metavar="FIELD",
                     help="Attribute with each road's speed: plan: its top speed; check: the "
                          "speed checked along it (default: the top speed and zones)."),
        click.option("--speed-unit", type=click.Choice(SPEED_UNITS), default="km/h",
                     show_default=True, help="Unit of --speed-field."),
        click.option("--friction-field", default=None, metavar="FIELD",
                     help="Attribute with each road's friction coefficient."),
        click.option("--scheduler", default=None, metavar="ADDRESS",
                     help="Run on this dask.distributed scheduler (e.g. tcp://host:8786); "
                          "default: a local cluster of this machine."),
        click.option("--workers", type=click.IntRange(min=1), default=None, metavar="N",
                     help="Local cluster: worker processes (default: one per core)."),
        click.option("--force", is_flag=True,
                     help="Process every road again, even those an earlier run finished."),
        click.option("-l", "--limits", "limits_file", type=click.Path(), default=None,
                     help="Limits file (TOML) for every road. Without it, built-in "
                          "passenger-car comfort limits."),
    ]
    func = fit_options(limit_override_options(func))
    for option in reversed(options):
        func = option(func)
    return func


@click.group()
def batch():
    """Plan or check every road of a network (GeoJSON, GeoPackage or a folder of route files).

    Each road is one task on a Dask cluster: a local one on this machine by default, or the one
    at --scheduler. Results support engineering judgment: speeds on public roads follow local
    codes and licensed engineering practice.
    """


@batch.command("plan")
@batch_options
@click.option("--solver", type=click.Choice([k.value for k in SolverKind]), default=None,
              help="As for 'plan' (default: convex with a jerk bound, else envelope).")
@click.option("--qp-backend", type=click.Choice([b.value for b in QPBackend]), default=None,
              help="As for 'plan'.")
@click.option("--comfort-weight", type=FINITE, default=0.0, show_default=True, metavar="W",
              help="As for 'plan'.")
@handle_errors
def batch_plan(solver, qp_backend, comfort_weight, **common):
    """Plan the fastest speed profile of every road in INPUTS.

    Writes OUTDIR/profiles/<id>.csv (+ .meta.json), summary.csv, failures.csv and the curves
    layer (curves.gpkg, curves.geojson) with the planned speeds judged on every curve.
    """
    if comfort_weight < 0:
        raise click.BadParameter("must be zero or positive", param_hint="--comfort-weight")
    _run("plan", common, dict(solver=solver, qp_backend=qp_backend,
                              comfort_weight=comfort_weight))


@batch.command("check")
@batch_options
@click.option("--design-speed-kmh", type=FINITE, default=None, metavar="V",
              help="Design speed for the AASHTO minimum-radius check, km/h (20-120).")
@click.option("--emax", "e_max", type=FINITE, default=0.08, show_default=True, metavar="E",
              help="Maximum superelevation rate for the minimum-radius check.")
@click.option("--curve-radius", "curve_radius_m", type=FINITE, default=None, metavar="M",
              help="Stations with a radius below this belong to a curve, metres (default 1000).")
@handle_errors
def batch_check(design_speed_kmh, e_max, curve_radius_m, **common):
    """Check every road in INPUTS: its speed field (or top speed and zones) on every curve.

    Writes OUTDIR/checks/<id>.json and <id>.csv, summary.csv, failures.csv and the curves layer.
    Exit 1 when a road fails the check.
    """
    if design_speed_kmh is not None:
        from ..design import design_criterion

        design_criterion(design_speed_kmh, e_max)
    if curve_radius_m is not None and not curve_radius_m > 0:
        raise click.BadParameter("give a positive radius in metres", param_hint="--curve-radius")
    _run("check", common, dict(design_speed_kmh=design_speed_kmh, e_max=e_max,
                               curve_radius_m=curve_radius_m))


def _settings(command: str, common: dict, extra: dict):
    from ..batch import BatchSettings
    from ._limits import LIMIT_OPTIONS, resolve_limits

    overrides = {k: common.pop(k) for k in list(common) if k in LIMIT_OPTIONS}
    limits, constraints, origin = resolve_limits(common.pop("limits_file"), overrides,
                                                 (), (), (), None, None)
    geometry = {k: common.pop(k) for k in ("spacing_m", "position_noise_m",
                                           "elevation_noise_m", "use_elevation", "closed")}
    if not geometry["spacing_m"] > 0:
        raise click.BadParameter("must be a positive number of metres", param_hint="--spacing")
    return BatchSettings(command, limits, constraints, origin, geometry, **extra)


def _run(command: str, common: dict, extra: dict) -> None:
    from ..io.network import FieldMap, check_inputs, iter_specs

    limits_file = common["limits_file"]
    settings = _settings(command, common, extra)
    fields = FieldMap(common["id_field"], common["speed_field"], common["speed_unit"],
                      common["friction_field"])
    inputs, outdir = common["inputs"], common["outdir"]
    if common["scheduler"] and common["workers"]:
        raise click.UsageError("--workers sizes the local cluster; with --scheduler the "
                               "cluster's own workers run the roads: give one of them")
    if common["scheduler"] is not None:
        _check_scheduler(common["scheduler"])
    total = check_inputs(inputs, fields, common["layer"])
    _refuse_overlap(inputs, limits_file, outdir)
    from ..batch import BatchStore, run_batch

    store = BatchStore(outdir, command)
    store.check()                     # before a cluster starts; created once one runs
    progress = ProgressLine(total)
    restore = _stop_on_sigterm()
    try:
        with _client(common["scheduler"], common["workers"]) as client:
            store.open()
            outcome = run_batch(iter_specs(inputs, fields, common["layer"]), settings, store,
                                client, progress=progress, resume=not common["force"])
    except KeyboardInterrupt as exc:
        progress.close()
        signum = getattr(exc, "signum", 2)
        click.echo(f"error: interrupted; the roads finished so far are kept in {outdir}: "
                   "run the same command again to continue", err=True)
        sys.exit(128 + signum)
    finally:
        restore()
    progress.close()
    echo(f"{command}: {outcome.total} road(s): {outcome.computed} processed, {outcome.reused} "
         f"kept from an earlier run, {outcome.failed} failed, in {outcome.elapsed_s:.1f} s")
    echo(f"wrote {outdir}/summary.csv, failures.csv, curves.gpkg and curves.geojson")
    if outcome.failed:
        click.echo(f"error: {outcome.failed} road(s) could not be processed; see "
                   f"{outdir}/failures.csv", err=True)
        sys.exit(EXIT_SOME_FAILED)
    if command == "check" and outcome.violations:
        echo(f"FAIL: {outcome.violations} road(s) fail the check; see {outdir}/summary.csv")
        sys.exit(1)
    if command == "check":
        echo("PASS: every road within the limits")


def _refuse_overlap(inputs, limits_file, outdir) -> None:
    """The output folder may not be an input, hold one, or lie in an input folder."""
    from pathlib import Path

    out = Path(outdir).resolve()
    for path in list(inputs) + ([limits_file] if limits_file else []):
        p = Path(path).resolve()
        if p == out or out in p.parents or p in out.parents:
            from ..errors import BatchError

            raise BatchError(f"{outdir}: the output folder holds the input {path}; curvespeed "
                             "never writes among its inputs: give another folder (-o)")


def _stop_on_sigterm():
    """SIGTERM stops the batch as Ctrl-C does (the finished roads stay; the cluster closes);
    returns what puts the previous handler back."""
    import signal
    import threading

    from ..io.atomic import Interrupted

    def stop(signum, frame):
        raise Interrupted(signum)

    if threading.current_thread() is not threading.main_thread():
        return lambda: None
    previous = signal.signal(signal.SIGTERM, stop)
    return lambda: signal.signal(signal.SIGTERM, previous)


def _check_scheduler(address: str) -> None:
    """Refuse a --scheduler that is not an address Dask can connect to (SCHEME://HOST:PORT)
    before any input is read; whether a scheduler listens there is found on connecting."""
    from distributed.comm.addressing import get_address_host_port

    try:
        _, port = get_address_host_port(address)
        why = None if 0 < port < 65536 else f"port {port} is outside 1..65535"
    except ValueError as exc:
        why = str(exc)
    if why is not None:
        raise click.BadParameter(
            f"'{address}' is not a scheduler address ({why}); give it as tcp://HOST:PORT, "
            "e.g. tcp://10.0.0.5:8786, as the scheduler prints it when it starts",
            param_hint="'--scheduler'")


class _client:
    """The Dask client: connect to ``scheduler``, or start a local cluster of processes."""

    def __init__(self, scheduler, workers):
        self.scheduler, self.workers = scheduler, workers
        self.cluster = self.client = None

    def __enter__(self):
        import logging

        from distributed import Client

        logging.getLogger("distributed").setLevel(logging.ERROR)
        if self.scheduler:
            try:
                # the wait is Dask's distributed.comm.timeouts.connect (30 s by default)
                self.client = Client(self.scheduler)
            except (OSError, ValueError) as exc:
                from ..errors import BatchError

                raise BatchError(f"--scheduler {self.scheduler}: cannot connect ({exc}); start "
                                 "the scheduler first or check the address") from None
        else:
            from ..batch.cluster import start_local_cluster

            self.cluster, self.client = start_local_cluster(self.workers)
        return self.client

    def __exit__(self, *exc):
        self.client.close()
        if self.cluster is not None:
            self.cluster.close()
        return False


class ProgressLine:
    """Roads done of the total, the rate and the time left, on standard error."""

    def __init__(self, total: int):
        import time

        self.total = total
        self.tty = sys.stderr.isatty()
        self.last = 0.0
        self.clock = time.monotonic
        self.shown = False

    def __call__(self, outcome) -> None:
        done = outcome.computed + outcome.reused + outcome.failed
        now = self.clock()
        if done < self.total and now - self.last < (0.2 if self.tty else 10.0):
            return
        self.last = now
        rate = outcome.computed / outcome.elapsed_s if outcome.elapsed_s > 0 else 0.0
        left = (self.total - done) / rate if rate > 0 else float("nan")
        width = 30
        filled = min(width, int(width * done / self.total)) if self.total else width
        when = (f"done in {_duration(outcome.elapsed_s)}" if done >= self.total
                else f"{_duration(left)} left")
        text = (f"[{'#' * filled}{'.' * (width - filled)}] {done}/{self.total} roads, "
                f"{outcome.failed} failed, {rate:.2f} roads/s, {when}")
        click.echo(("\r" + text) if self.tty else text, err=True, nl=not self.tty)
        self.shown = True

    def close(self) -> None:
        if self.tty and self.shown:
            click.echo("", err=True)


def _duration(seconds: float) -> str:
    if seconds != seconds:
        return "time unknown"
    seconds = int(round(seconds))
    if seconds < 60:
        return f"{seconds} s"
    if seconds < 3600:
        return f"{seconds // 60} min {seconds % 60:02d} s"
    return f"{seconds // 3600} h {seconds // 60 % 60:02d} min"
