"""Command line: registers commands; each validates its input and calls the library.

Exit codes: 0 done; 2 bad input (one message naming the file, the key and the problem, no
traceback, nothing written); 1 an internal error.
"""
from __future__ import annotations

import os
import sys

from ..errors import InputError, printable, shorten

from . import commands  # noqa: F401  (registers the commands on `app`)
from .app import STOPPED, app


STOP_SIGNALS = ("SIGINT", "SIGTERM", "SIGHUP")


def _stop(signum, frame):
    """Ctrl-C, SIGTERM and SIGHUP: unwind (staging removed, previous outputs kept) and exit
    128 + the signal number. A second signal while unwinding is ignored, so cleanup finishes."""
    if STOPPED["signal"] is None:
        STOPPED["signal"] = signum
    if not STOPPED["raised"]:
        STOPPED["raised"] = True
        raise KeyboardInterrupt


def _unraisable(hook):
    """A hook for exceptions Python cannot raise (in a finaliser, for example): when it is our
    own interrupt that landed there, it was swallowed, so send the signal again a moment later
    (from a helper thread, once the finaliser and this hook are done) to raise it at the run's
    next step, quietly; anything else goes to the usual hook."""
    def quiet(info):
        if isinstance(info.exc_value, KeyboardInterrupt) and STOPPED["signal"] is not None:
            import threading
            STOPPED["raised"] = False
            again = threading.Timer(0.005, os.kill, (os.getpid(), STOPPED["signal"]))
            again.daemon = True
            again.start()
            return
        hook(info)
    return quiet


def _stopped_exit(hard: bool = False) -> None:
    """Say the run was stopped and exit 128 + the signal. hard (the console command): leave
    with os._exit once the outputs are settled, so nothing at interpreter shutdown (a library's
    exit hook meeting the pending interrupt) can turn the code into a death by SIGINT, as seen
    under heavy load; in-process callers get SystemExit."""
    import signal
    after_write = STOPPED["written"]
    signum = STOPPED["signal"] or signal.SIGINT
    name = "Ctrl-C" if signum == signal.SIGINT else signal.Signals(signum).name
    if after_write:
        print(f"timer-sweep: stopped by {name} after the new outputs were written whole",
              file=sys.stderr)
    else:
        print(f"timer-sweep: stopped by {name}; the run did not finish and the previous outputs "
              "were kept", file=sys.stderr)
    if hard:
        sys.stdout.flush()
        sys.stderr.flush()
        os._exit(128 + signum)
    sys.exit(128 + signum)


def main(argv: list[str] | None = None) -> int:
    """Console entry point: bad input exits 2 with one line, internal errors exit 1; Ctrl-C,
    SIGTERM and SIGHUP exit 130, 143 and 129 with one line, temporary files removed and earlier
    outputs as they were."""
    import signal
    if argv is None:
        for name in STOP_SIGNALS:
            if hasattr(signal, name):
                signal.signal(getattr(signal, name), _stop)
        sys.unraisablehook = _unraisable(sys.unraisablehook)
    STOPPED.update(signal=None, written=False, raised=False)
    try:
        rv = app(args=argv, standalone_mode=False)
    except InputError as e:
        print(f"timer-sweep: error: {e.message}", file=sys.stderr)
        sys.exit(2)
    except SystemExit:
        raise
    except KeyboardInterrupt:
        _stopped_exit(hard=argv is None)
    except Exception as e:  # noqa: BLE001
        if type(e).__name__ == "Abort":
            _stopped_exit(hard=argv is None)
        if hasattr(e, "show") and hasattr(e, "exit_code"):   # a usage error of the CLI framework
            import io
            text = io.StringIO()
            e.show(file=text)
            sys.stderr.write("".join(shorten(printable(ln)) + "\n" for ln in text.getvalue().splitlines()))
            sys.exit(2)
        if os.environ.get("TIMER_SWEEP_DEBUG"):
            raise
        print(printable(f"timer-sweep: internal error: {type(e).__name__}: {shorten(str(e))} "
                        "(set TIMER_SWEEP_DEBUG=1 for the details)"), file=sys.stderr)
        sys.exit(1)
    # the CLI framework turns an interrupt into the return value 130
    if rv == 130 or STOPPED["signal"] is not None:
        _stopped_exit(hard=argv is None)
    if isinstance(rv, int) and rv:
        sys.exit(rv)
    return 0
