"""Run analysis blocks in local processes or on a Dask cluster; results come back in block
order, so they equal a serial run exactly."""
from __future__ import annotations

import logging
import re
import socket
import struct
import sys
import threading
import time

from .errors import InputError
from .values import clip


def _run(args):
    fn, study, opt, job = args
    return fn(study, *job, opt) if isinstance(job, tuple) else fn(study, job, opt)


def process_mapper(workers: int):
    """Spread blocks over `workers` local processes."""
    def mapper(fn, study, opt, jobs):
        from concurrent.futures import ProcessPoolExecutor
        with ProcessPoolExecutor(workers) as ex:
            yield from ex.map(_run, [(fn, study, opt, job) for job in jobs])
    return mapper


CONNECT_S = 5.0          # seconds for the connection and the scheduler's first answer
HANDSHAKE_S = 10.0       # seconds for the whole handshake of the cluster client
WORKERS_S = 5.0          # seconds to wait for a first worker
CALL_S = 600.0           # seconds for any one remote call (one block of designs)
MAX_GREETING = 16 * 2**20   # bytes a scheduler's first message may announce
SCHEMES = ("tcp", "tls")


def check_address(address: str) -> tuple[str, str, int]:
    """(scheme, host, port) of a scheduler address such as tcp://host:8786 or host:8786;
    InputError for anything else, before any connection is tried."""
    from urllib.parse import urlsplit
    text = address.strip()
    bad = InputError("", "--scheduler", f"{text!r} is not a scheduler address; expected "
                     "tcp://HOST:PORT (e.g. tcp://scheduler-host:8786)")
    if not text or any(ch.isspace() or not ch.isprintable() for ch in text) or len(text) > 300:
        raise bad
    parts = urlsplit(text if "://" in text else "tcp://" + text)
    if parts.scheme not in SCHEMES:
        raise InputError("", "--scheduler", f"scheme {parts.scheme!r} is not supported; use "
                         "tcp://HOST:PORT or tls://HOST:PORT")
    try:
        port = parts.port
    except ValueError:
        raise bad from None
    host = parts.hostname
    if not host or port is None or not 0 < port < 65536 or parts.path not in ("", "/") \
            or parts.query or parts.fragment or parts.username or parts.password:
        raise bad
    if not re.fullmatch(r"[A-Za-z0-9.\-]+|[0-9A-Fa-f:.]+", host, re.ASCII):
        raise bad
    return parts.scheme, host, port


def probe(address: str, timeout: float = CONNECT_S) -> None:
    """Connect to the scheduler and read its greeting (a Dask scheduler speaks first: a 64-bit
    size, then that many bytes: a frame count, the frame lengths, the frames), all within
    `timeout`; refuse silence, or sizes no greeting has, before the cluster client sees them
    (it would wait without limit, or try to allocate what the sizes claim)."""
    scheme, host, port = check_address(address)
    where = f"the Dask scheduler at {address}"
    junk = InputError("", "--scheduler", f"{where} answered with something that is not a Dask "
                      "scheduler's greeting")
    try:
        sock = socket.create_connection((host, port), timeout=timeout)
    except OSError as e:
        raise InputError("", "--scheduler", f"cannot reach {where}: {e.strerror or e}") from None
    deadline = time.monotonic() + timeout

    def read(n: int) -> bytes:
        got = bytearray()
        while len(got) < n:
            sock.settimeout(max(0.01, deadline - time.monotonic()))
            chunk = sock.recv(min(n - len(got), 1 << 16))
            if not chunk:
                raise InputError("", "--scheduler", f"{where} closed the connection without "
                                 "a greeting: is it a Dask scheduler?")
            got += chunk
        return bytes(got)

    with sock:
        if scheme != "tcp":
            return
        try:
            (size,) = struct.unpack("Q", read(8))        # the cluster's framing: native 64-bit
            if not 8 <= size <= MAX_GREETING:
                raise junk
            body = read(size)
            (n,) = struct.unpack_from("Q", body)
            if not 0 < n <= size // 8 - 1:
                raise junk
            lengths = struct.unpack_from(f"{n}Q", body, 8)
            if sum(lengths) > MAX_GREETING:
                raise junk
        except (TimeoutError, socket.timeout):
            raise InputError("", "--scheduler", f"{where} accepted the connection but did not "
                             f"greet within {timeout:g} s: is it a Dask scheduler?") from None
        except OSError as e:
            raise InputError("", "--scheduler", f"{where}: {e.strerror or e}") from None


def _in_thread(fn, seconds: float, what: str):
    """fn() in a daemon thread, waiting at most `seconds`; InputError if it does not return.
    Only the error's type and text cross back, so whatever the failed call leaves behind (a
    half-made client closing itself) is cleaned up in that thread, not waited for here."""
    box: dict = {}
    done = threading.Event()

    def target():
        try:
            box["value"] = fn()
        except BaseException as e:  # noqa: BLE001 - handed to the caller as text
            box["error"] = type(e).__name__ + (f": {e}" if str(e) else "")
        done.set()
    threading.Thread(target=target, daemon=True).start()
    if not done.wait(seconds):
        raise InputError("", "--scheduler", f"{what} took more than {seconds:g} s")
    if "error" in box:
        raise ConnectionError(box["error"])
    return box["value"]


def _quiet_failed_client(unraisable):
    """A cluster client that failed in its constructor complains from its finaliser; the user
    has had the one clear message already."""
    if getattr(unraisable.object, "__qualname__", "") != "Client.__del__":
        _HOOK(unraisable)


_HOOK = sys.unraisablehook


def dask_mapper(address: str):
    """Connect to the Dask scheduler at `address` now (every step with a timeout) and return a
    mapper that sends blocks to it; `mapper.close()` disconnects."""
    try:
        from distributed import Client
    except ImportError:
        raise InputError("", "--scheduler", "needs dask.distributed: pip install 'timer-sweep[cluster]'") from None
    probe(address)
    where = f"the Dask scheduler at {address}"
    log = logging.getLogger("distributed")
    level = log.level
    log.setLevel(logging.CRITICAL + 1)       # its failures come back as one message below
    made = []

    class _Client(Client):                   # remembered, so a failed one can be let go
        def __init__(self, *args, **kwargs):
            made.append(self)
            super().__init__(*args, **kwargs)
    try:
        client = _in_thread(lambda: _Client(address, timeout=f"{CONNECT_S:g}s", set_as_default=False),
                            HANDSHAKE_S, f"connecting to {where}")
    except (ConnectionError, InputError) as e:
        for c in made:          # its finaliser would wait 2 x the timeout to close a dead link
            c.status = "closed"
        sys.unraisablehook = _quiet_failed_client
        if isinstance(e, InputError):
            raise
        if str(e).startswith("TimeoutError"):
            raise InputError("", "--scheduler", f"{where} greeted but did not complete the handshake "
                             f"within {CONNECT_S:g} s: is it a Dask scheduler?") from None
        raise InputError("", "--scheduler", f"cannot connect to {where} (is it a Dask scheduler of "
                         f"a compatible version?): {clip(str(e), 160)}") from None
    finally:
        log.setLevel(level)
    try:
        client.wait_for_workers(1, timeout=WORKERS_S)
    except Exception:  # noqa: BLE001
        client.close(timeout=CONNECT_S)
        raise InputError("", "--scheduler", f"{where} has no workers (waited {WORKERS_S:g} s); "
                         "start some with: dask worker ADDRESS") from None

    def mapper(fn, study, opt, jobs):
        futures: list = []
        try:
            st = client.scatter(study, broadcast=True, timeout=CALL_S)
            futures = [client.submit(_run, (fn, st, opt, job), pure=False) for job in jobs]
            for i, f in enumerate(futures):
                try:
                    yield f.result(timeout=CALL_S)
                except TimeoutError:
                    raise InputError("", "--scheduler", f"block {i + 1} of {len(futures)} got no "
                                     f"result from {where} within {CALL_S:g} s") from None
        finally:
            if futures:
                client.cancel(futures)

    mapper.close = lambda: client.close(timeout=CONNECT_S)
    return mapper
