"""Entry point of the ``curvespeed`` command: the group, error mapping and warning display.

Exit status: 0 success, 1 a check found violations (``check``), 2 bad input or a request that
cannot be met. Subcommands live one per module; heavy libraries are imported inside them so
``curvespeed --help`` stays instant.
"""

from __future__ import annotations

import warnings

import click

from .. import __version__
from ..errors import CurvespeedWarning

def _show_warning(message, category, filename, lineno, file=None, line=None):
    prefix = "warning" if issubclass(category, CurvespeedWarning) else category.__name__
    click.echo(f"{prefix}: {message}", err=True)


class _Group(click.Group):
    def main(self, *args, **kwargs):
        warnings.showwarning = _show_warning
        # click exits with 2 on usage errors already, matching our bad-input status.
        return super().main(*args, **kwargs)


@click.group(cls=_Group, context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="curvespeed")
def cli() -> None:
    """Target speed profiles along a known route, within friction, comfort and design limits.

    Profiles are engineering aids. Speeds used on public roads and advisory signs follow local
    codes and licensed engineering practice.
    """


def _register() -> None:
    from . import (batch_cmd, check_cmd, export_cmd, plan_cmd, plot_cmd, replay_cmd,
                   report_cmd, route_cmd)

    cli.add_command(route_cmd.route)
    cli.add_command(plan_cmd.plan)
    cli.add_command(check_cmd.check)
    cli.add_command(export_cmd.export)
    cli.add_command(plot_cmd.plot)
    cli.add_command(batch_cmd.batch)
    cli.add_command(replay_cmd.replay)
    cli.add_command(report_cmd.report)


_register()


def main() -> None:  # console-script entry point
    cli()
