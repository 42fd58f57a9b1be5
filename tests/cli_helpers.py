"""Running the command line in-process, as the tests do."""
from __future__ import annotations

from sweep.cli import main


def cli(args, capsys):
    """(exit code, stdout, stderr) of `timer-sweep ARGS`."""
    try:
        code = main(args)
    except SystemExit as e:
        code = e.code
    cap = capsys.readouterr()
    return code, cap.out, cap.err
