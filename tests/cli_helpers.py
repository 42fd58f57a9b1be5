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


def cli_captured(args):
    """(exit code, stdout, stderr) of `timer-sweep ARGS`, captured without pytest's capsys (for
    fixtures wider than one test)."""
    import contextlib
    import io
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        try:
            code = main(args)
        except SystemExit as e:
            code = e.code
    return code, out.getvalue(), err.getvalue()


def wait_while_running(proc, ready, timeout: float, poll: float = 0.005) -> bool:
    """Wait until ready() holds while the subprocess `proc` is still running (a readiness
    condition, not a guessed delay); False if the process ended first or `timeout` seconds
    passed. True means: the condition holds and the process had not ended a moment before."""
    import time
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        if proc.poll() is not None:
            return False
        if ready():
            return proc.poll() is None
        time.sleep(poll)
    return False
