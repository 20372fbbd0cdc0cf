"""Entry point of the ``curvespeed`` command: the group, error mapping and warning display.

Exit status: 0 success, 1 a check found violations (``check``), 2 bad input or a request that
cannot be met. Subcommands live one per module, imported when their command runs; heavy
libraries are imported inside them so ``curvespeed --help`` stays instant.
"""

from __future__ import annotations

import importlib
import os
import warnings

import click

from .. import __version__
from ..errors import CurvespeedWarning

def _show_warning(message, category, filename, lineno, file=None, line=None):
    prefix = "warning" if issubclass(category, CurvespeedWarning) else category.__name__
    click.echo(f"{prefix}: {message}", err=True)


#: Subcommand -> the module under ``cli`` that defines it (as a function of the same name).
_COMMANDS = {"route": "route_cmd", "plan": "plan_cmd", "check": "check_cmd",
             "export": "export_cmd", "plot": "plot_cmd", "batch": "batch_cmd",
             "replay": "replay_cmd", "report": "report_cmd"}


class _Group(click.Group):
    """The command group, each subcommand's module imported when that command is asked for:
    a run of one command reads (and compiles, without cached bytecode) none of the others'."""

    def main(self, *args, **kwargs):
        warnings.showwarning = _show_warning
        # click exits with 2 on usage errors already, matching our bad-input status.
        return super().main(*args, **kwargs)

    def list_commands(self, ctx) -> list[str]:
        return sorted(_COMMANDS)

    def get_command(self, ctx, name: str):
        if name not in _COMMANDS:
            return None
        module = importlib.import_module(f"{__package__}.{_COMMANDS[name]}")
        return getattr(module, name)


@click.group(cls=_Group, context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="curvespeed")
def cli() -> None:
    """Target speed profiles along a known route, within friction, comfort and design limits.

    Profiles are engineering aids. Speeds used on public roads and advisory signs follow local
    codes and licensed engineering practice.
    """


#: The BLAS (OpenBLAS in numpy's wheels) runs one thread in a command unless the user's
#: environment says otherwise: the commands' matrix products are small (a plan's arc-length
#: table, 8,000 x 10 times 10 x 10), and on a shared 2-core machine OpenBLAS's threads made
#: such a product 20 times slower and a whole 10 km plan 15 % slower. Set before numpy is
#: first imported (the command's modules import it); the products' numbers are the same.
BLAS_THREADS = {"OPENBLAS_NUM_THREADS": "1"}


def main() -> None:  # console-script entry point
    for name, value in BLAS_THREADS.items():
        os.environ.setdefault(name, value)
    cli()
