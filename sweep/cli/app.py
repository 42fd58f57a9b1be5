"""The command-line application object and the run's stop state, shared by the entry point
(`cli.main`) and the commands (`cli.commands`)."""
from __future__ import annotations

import typer

from .. import __version__

app = typer.Typer(
    help="Sweep 555-timer designs over standard parts, supply and temperature; rank them for "
         "robustness; write a workbook and a chart page.",
    no_args_is_help=True, add_completion=False, pretty_exceptions_enable=False,
    context_settings={"help_option_names": ["-h", "--help"]})


def _version(value: bool):
    if value:
        typer.echo(f"timer-sweep {__version__}")
        raise typer.Exit()


@app.callback()
def _root(version: bool = typer.Option(False, "--version", callback=_version, is_eager=True,
                                       help="Print the version and exit.")):
    """timer-sweep: from a study file to ranked 555 designs, a workbook and a chart page."""


STOPPED: dict = {"signal": None, "written": False, "raised": False}   # the stopping signal;
# outputs in place?; has the interrupt been raised where the run can see it?
