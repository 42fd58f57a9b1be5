"""Command line: registers commands; each validates its input and calls the library.

Exit codes: 0 done; 2 bad input (one message naming the file, the key and the problem, no
traceback, nothing written); 1 an internal error.
"""
from __future__ import annotations

import os
import sys

import typer

from .. import __version__
from ..errors import InputError

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


from . import commands  # noqa: E402,F401  (registers the commands on `app`)


def _terminate(signum, frame):
    raise KeyboardInterrupt


def main(argv: list[str] | None = None) -> int:
    """Console entry point: bad input exits 2 with one line, internal errors exit 1. SIGTERM is
    handled like Ctrl-C: temporary files are removed and earlier outputs stay as they were."""
    import signal
    if argv is None:
        signal.signal(signal.SIGTERM, _terminate)
    try:
        app(args=argv, standalone_mode=False)
    except InputError as e:
        print(f"timer-sweep: error: {e.message}", file=sys.stderr)
        sys.exit(2)
    except SystemExit:
        raise
    except KeyboardInterrupt:
        print("timer-sweep: interrupted; previous outputs left as they were", file=sys.stderr)
        sys.exit(130)
    except Exception as e:  # noqa: BLE001
        if type(e).__name__ == "Abort":
            sys.exit(130)
        if hasattr(e, "show") and hasattr(e, "exit_code"):   # a usage error of the CLI framework
            e.show()
            sys.exit(2)
        if os.environ.get("TIMER_SWEEP_DEBUG"):
            raise
        print(f"timer-sweep: internal error: {type(e).__name__}: {e} "
              "(set TIMER_SWEEP_DEBUG=1 for the details)", file=sys.stderr)
        sys.exit(1)
    return 0
