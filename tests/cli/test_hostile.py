"""Hostile files and a flaky machine, through the real command line in a subprocess with a time
limit (the subprocess timeout) and a memory limit (RLIMIT_AS in a preexec_fn): each case exits 2
with one clear line, or 0, or 128 + the signal; never hangs, never loses the previous outputs.
Faults that cannot be made for real here (a full disk, a rename failing mid-commit) are made
in-process with monkeypatch; the pieces behind the contract are checked in-process at the end."""
from __future__ import annotations

import errno
import hashlib
import json
import os
import resource
import signal
import socket
import subprocess
import sys
import threading
import time
from pathlib import Path

import pytest

from tests.cli_helpers import cli, wait_while_running

MEMORY = 2 * 2**30        # bytes of address space a run may use [issue: 2 GiB]
SECONDS = 10              # a refusal or a failure must come within this [issue: 10 s]
RUN_SECONDS = 120         # a whole run of an example study, on a busy shared machine

SMALL = """[study]
title = "small"
circuit = "astable"
[design]
ra = "10k"
rb = "47k"
c = "100n"
[analysis]
monte_carlo = 0
"""
OUTPUTS = ("points.parquet", "designs.parquet", "run.json")


def _limits():
    resource.setrlimit(resource.RLIMIT_AS, (MEMORY, MEMORY))
    resource.setrlimit(resource.RLIMIT_CORE, (0, 0))


def sweep(args, cwd=None, timeout=SECONDS):
    """(exit code, stdout, stderr) of `python -m sweep ARGS` under the time and memory limits."""
    r = subprocess.run([sys.executable, "-m", "sweep", *map(str, args)], cwd=cwd,
                       capture_output=True, text=True, timeout=timeout, preexec_fn=_limits,
                       env={**os.environ, "PYTHONPATH": str(Path.cwd())})
    return r.returncode, r.stdout, r.stderr


def refused(code, err, *words):
    """Exit 2, one line on stderr, no traceback, every word in the message."""
    assert code == 2, err
    assert "Traceback" not in err and len(err.strip().splitlines()) == 1, err
    for w in words:
        assert w in err, (w, err)


def sha(p: Path) -> str:
    return hashlib.sha256(p.read_bytes()).hexdigest()


def snapshot(out: Path) -> dict:
    """Every file in the folder and its hash; the record's hashes match the files beside it."""
    files = {p.name: sha(p) for p in out.iterdir()}
    rec = json.loads((out / "run.json").read_text())
    for name, digest in rec["sha256"].items():
        assert files[name] == digest, name
    return files


def study_file(tmp_path, text=SMALL, name="small.toml") -> Path:
    p = tmp_path / name
    p.write_text(text, encoding="utf-8")
    return p


# ------------------------------------------------------------------ all-or-nothing commit

@pytest.mark.slow
def test_a_folder_where_the_chart_page_goes_is_named_and_nothing_changes(tmp_path):
    study, out = study_file(tmp_path), tmp_path / "out"
    assert sweep(["run", study, "--out", out, "-q"], timeout=RUN_SECONDS)[0] == 0
    (out / "small.html").unlink()
    (out / "small.html").mkdir()
    before = {p.name: (sha(p) if p.is_file() else "dir") for p in out.iterdir()}
    code, _, err = sweep(["run", study, "--out", out, "-q"], timeout=RUN_SECONDS)
    refused(code, err, str(out / "small.html"), "folder", "previous outputs were kept")
    assert {p.name: (sha(p) if p.is_file() else "dir") for p in out.iterdir()} == before


def test_a_rename_failing_mid_commit_puts_the_previous_set_back(tmp_path, capsys, monkeypatch):
    import sweep.pipeline as pl
    study, out = study_file(tmp_path), tmp_path / "out"
    assert cli(["run", str(study), "--out", str(out), "-q"], capsys)[0] == 0
    before = snapshot(out)
    real = os.replace
    calls = []

    def replace(src, dst):       # the fourth output (the chart page) cannot be put in place
        calls.append(Path(dst).name)
        if Path(dst) == out / "small.html" and ".timer-sweep-run-" in str(src):
            raise IsADirectoryError(errno.EISDIR, "Is a directory", str(dst))
        return real(src, dst)
    monkeypatch.setattr(pl.os, "replace", replace)
    code, _, err = cli(["run", str(study), "--out", str(out), "-q"], capsys)
    refused(code, err, str(out / "small.html"), "previous outputs were kept")
    assert {"points.parquet", "designs.parquet", "small.xlsx"} <= set(calls)   # some were placed
    assert snapshot(out) == before                                            # and rolled back


def test_a_commit_killed_outright_is_rolled_back_by_the_next_run(tmp_path, capsys):
    from sweep.pipeline import PREVIOUS, clean_stale
    out = tmp_path / "out"
    out.mkdir()
    dead = subprocess.run([sys.executable, "-c", "import os; print(os.getpid())"],
                          capture_output=True, text=True, check=True).stdout.strip()
    aside = out / f"{PREVIOUS}{dead}"
    aside.mkdir()
    (aside / "run.json").write_text("old")          # moved aside, then the process died
    (out / "run.json").write_text("new, alone")     # the new set only half in place
    clean_stale(out)
    assert (out / "run.json").read_text() == "old" and not aside.exists()


# ------------------------------------------------------------------ signals

def long_study(tmp_path) -> Path:
    """The buzzer example with 40 times its Monte Carlo builds: a run of a minute or more, so a
    signal sent once it has started lands long before its end; stopped, it costs nothing more."""
    text = Path("studies/buzzer.toml").read_text(encoding="utf-8")
    assert "monte_carlo = 500" in text
    return study_file(tmp_path, text.replace("monte_carlo = 500", "monte_carlo = 20000"), "buzzer.toml")


@pytest.mark.slow
@pytest.mark.parametrize("sig", [signal.SIGINT, signal.SIGTERM, signal.SIGHUP])
def test_a_signal_mid_run_exits_128_plus_its_number_and_keeps_the_outputs(sig, examples, tmp_path):
    from sweep.pipeline import STAGING
    study = long_study(tmp_path)
    assert examples["buzzer"].code == 0
    out = examples["buzzer"].copy_to(tmp_path / "out")          # the previous outputs
    before = snapshot(out)
    proc = subprocess.Popen([sys.executable, "-m", "sweep", "run", str(study), "--out", str(out), "-q"],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                            preexec_fn=_limits)
    staging = out / f"{STAGING}{proc.pid}"
    # the run made its staging folder (its stop handlers are in place by then) and is still going
    if not wait_while_running(proc, staging.exists, RUN_SECONDS):
        proc.kill()
        _, err = proc.communicate(timeout=RUN_SECONDS)
        pytest.fail(f"the run ended (exit {proc.returncode}) before it was seen running: {err}")
    proc.send_signal(sig)
    _, err = proc.communicate(timeout=RUN_SECONDS)
    # stopped by the signal: 128 + its number [POSIX shell convention], never 0 (a run that
    # finished before the signal landed fails here), and it says the run did not finish
    assert proc.returncode == 128 + sig, (proc.returncode, err)
    assert len(err.strip().splitlines()) == 1 and "stopped by" in err
    assert "the run did not finish" in err and "previous outputs were kept" in err
    assert "Traceback" not in err
    assert snapshot(out) == before                   # nothing written: the previous set, whole
    assert not staging.exists()


# ------------------------------------------------------------------ bounded inputs

def _fifo(p: Path):
    os.mkfifo(p)


def _dev_zero(p: Path):
    p.symlink_to("/dev/zero")


def _fat(p: Path):                       # 50 MB of valid TOML: a comment
    with open(p, "w") as f:
        f.write(SMALL)
        for _ in range(50):
            f.write("# " + "x" * (2**20 - 3) + "\n")


def _text(text):
    return lambda p: p.write_text(text, encoding="utf-8")


def _list(p: Path, n: int):
    values = ",".join(f"{i}e-12" for i in range(1, n + 1))
    p.write_text(SMALL.replace('c = "100n"', f"c = [{values}]"), encoding="utf-8")


def _with(old, new):
    assert old in SMALL
    return _text(SMALL.replace(old, new))


STUDY_CASES = [
    ("named-pipe", _fifo, ["named pipe"]),
    ("dev-zero", _dev_zero, ["device"]),
    ("fifty-megabytes", _fat, ["MiB", "limit is 1 MiB"]),
    ("nested-5000-deep", _with('c = "100n"', "c = " + "[" * 5000 + "1" + "]" * 5000),
     ["nested 5000 deep", "limit is 16", "line 7"]),
    ("5001-digit-integer", _with('c = "100n"', "c = " + "1" * 5001), ["5,001 characters", "line 7"]),
    ("decimal-overflow", _with('c = "100n"', 'c = "1e1000000"'), ["design.c", "out of range"]),
    ("full-width-digits", _with('c = "100n"', 'c = "\uff11\uff10\uff10n"'), ["design.c", "not a quantity"]),
    ("one-farad", _with('c = "100n"', 'c = "1"'), ["design.c", "below 1 F"]),
    ("steps-1-drops-max", _text(SMALL + "[conditions]\nvcc = { min = 6, max = 9, steps = 1 }\n"),
     ["conditions.vcc.steps", "differ"]),
    ("list-over-axis-limit", lambda p: _list(p, 100_001), ["design.c", "100,001 values", "100,000"]),
    ("list-of-a-million", lambda p: _list(p, 1_000_000), ["limit is 1 MiB"]),
    ("long-bad-value", _with('c = "100n"', f'c = "{"x" * 100_000}"'), ["design.c", "100,000 characters"]),
]


@pytest.mark.slow
@pytest.mark.parametrize("case_id,make,words", STUDY_CASES, ids=[c[0] for c in STUDY_CASES])
def test_hostile_study_is_refused_quickly(case_id, make, words, tmp_path):
    p = tmp_path / "s.toml"
    make(p)
    out = tmp_path / "out"
    code, _, err = sweep(["run", p, "--out", out, "-q"])
    refused(code, err, "s.toml", *words)
    assert len(err) < 400                            # a pasted value is cut, not echoed whole
    assert not out.exists()


TIMER_CASES = [
    ("timer-named-pipe", _fifo, ["named pipe", "timer-model file"]),
    ("timer-dev-zero", _dev_zero, ["device"]),
    ("timer-fifty-megabytes", _fat, ["limit is 1 MiB"]),
    ("timer-folder", lambda p: p.mkdir(), ["is a folder"]),
    ("timer-nested", _text("name = " + "[" * 3000 + "]" * 3000), ["nested"]),
]


@pytest.mark.slow
@pytest.mark.parametrize("case_id,make,words", TIMER_CASES, ids=[c[0] for c in TIMER_CASES])
def test_hostile_timer_file_is_refused_quickly(case_id, make, words, tmp_path):
    make(tmp_path / "t.toml")
    study = study_file(tmp_path, SMALL.replace('circuit = "astable"', 'circuit = "astable"\ntimer = "t.toml"'))
    code, _, err = sweep(["check", study])
    refused(code, err, "t.toml", *words)


@pytest.mark.slow
def test_a_workbook_that_is_a_pipe_is_refused(tmp_path):
    os.mkfifo(tmp_path / "s.xlsx")
    code, _, err = sweep(["run", tmp_path / "s.xlsx", "--out", tmp_path / "out", "-q"])
    refused(code, err, "named pipe")
    assert not (tmp_path / "out").exists()          # refused before anything was written


@pytest.mark.slow
def test_ten_billion_conditions_are_refused_before_any_allocation(tmp_path):
    study = study_file(tmp_path, SMALL + "[conditions]\nvcc = { min = 5, max = 15, steps = 100000 }\n"
                       "temperature = { min = -40, max = 85, steps = 100000 }\n")
    code, _, err = sweep(["run", study, "--out", tmp_path / "out", "-q"])
    refused(code, err, "sweep too large", "10,000,000,000 points")
    code, out, err = sweep(["check", study])
    assert code == 0 and "run refuses this without --yes" in out, err


@pytest.mark.slow
def test_a_list_at_the_axis_limit_is_read_as_one_array(tmp_path):
    # 99 999 values, each checked (positive, finite, unique): the subprocess limit is the clock
    study = tmp_path / "s.toml"
    _list(study, 99_999)
    code, out, err = sweep(["check", study])
    assert code == 0 and "99,999" in out, err


# ------------------------------------------------------------------ bounded waits

def _listener(answer: bytes | None):
    """A loopback listener that accepts and then says nothing (None) or `answer`; stops itself."""
    srv = socket.socket()
    srv.bind(("127.0.0.1", 0))
    srv.listen(4)
    srv.settimeout(0.2)
    stop = threading.Event()
    held = []

    def serve():
        end = time.monotonic() + 60
        while not stop.is_set() and time.monotonic() < end:
            try:
                c, _ = srv.accept()
            except OSError:
                continue
            held.append(c)
            if answer is not None:
                c.sendall(answer)
        for c in held:
            c.close()
        srv.close()
    threading.Thread(target=serve, daemon=True).start()
    return srv.getsockname()[1], stop


def _greeting(frames_of=None) -> bytes:
    """A greeting framed as the cluster library frames one: size, frame count, lengths, frames."""
    import struct
    from distributed.protocol import dumps
    from distributed.protocol.utils import pack_frames
    frames = frames_of or dumps({"compression": None, "python": (3, 11, 0), "pickle-protocol": 5})
    body = pack_frames(frames)
    return struct.pack("Q", len(body)) + body


@pytest.mark.slow
@pytest.mark.parametrize("answer,words", [
    (lambda: None, ["did not greet within 5 s"]),
    (lambda: b"\xff" * 8 + b"HTTP/1.0 200 OK\r\n\r\n", ["not a Dask scheduler"]),
    (lambda: (2**60).to_bytes(8, "little") * 3, ["not a Dask scheduler"]),     # claims an exabyte
    (lambda: _greeting([b"\xc1" * 4]), ["cannot connect", "compatible version"]),   # not msgpack
    (lambda: _greeting(), ["did not complete the handshake"]),   # greets, then says nothing
], ids=["silent", "junk", "exabyte", "garbled-greeting", "greets-then-silent"])
def test_a_scheduler_that_never_answers_or_answers_junk_is_refused_in_time(answer, words, tmp_path):
    pytest.importorskip("distributed")
    port, stop = _listener(answer())
    try:
        out = tmp_path / "out"
        code, _, err = sweep(["run", study_file(tmp_path), "--out", out, "-q",
                              "--scheduler", f"tcp://127.0.0.1:{port}"])
    finally:
        stop.set()
    refused(code, err, "--scheduler", *words)
    assert not out.exists()                          # a refusal writes nothing


@pytest.mark.slow
@pytest.mark.parametrize("address", ["not-an-address", "tcp://127.0.0.1:99999", "tcp://:8786",
                                     "http://127.0.0.1:8786", "tcp://127.0.0.1:8786/x"])
def test_a_scheduler_address_is_checked_before_use(address, tmp_path):
    out = tmp_path / "out"
    code, _, err = sweep(["run", study_file(tmp_path), "--out", out, "-q", "--scheduler", address])
    refused(code, err, "--scheduler")
    assert not out.exists()


# ------------------------------------------------------------------ messages

@pytest.mark.slow
def test_escape_sequences_in_a_title_do_not_reach_the_terminal(tmp_path):
    study = study_file(tmp_path, SMALL.replace('title = "small"',
                                               'title = "\\u001b[2J\\u001b[31mred\\u0007"'))
    code, out, err = sweep(["run", study, "--out", tmp_path / "out"], timeout=RUN_SECONDS)
    assert code == 0, err
    assert "\x1b" not in out + err and "\x07" not in out + err
    assert "\\x1b[2J" in out                          # shown, visibly


@pytest.mark.slow
def test_an_empty_out_never_writes_into_the_current_folder(tmp_path):
    unrelated = tmp_path / "run.json"
    unrelated.write_text('{"someone": "else"}')
    study = study_file(tmp_path)
    code, _, err = sweep(["run", study, "--out", "", "-q"], cwd=tmp_path)
    refused(code, err, "--out", "empty")
    assert unrelated.read_text() == '{"someone": "else"}'
    assert sorted(p.name for p in tmp_path.iterdir()) == ["run.json", "small.toml"]


def _enospc(*a, **k):
    raise OSError(errno.ENOSPC, "No space left on device")


def _eacces(*a, **k):
    raise PermissionError(errno.EACCES, "Permission denied")


def _wrapped_enospc(*a, **k):          # the workbook writer wraps the OSError in its own type
    from xlsxwriter.exceptions import FileCreateError
    raise FileCreateError(OSError(errno.ENOSPC, "No space left on device"))


@pytest.mark.parametrize("target,fail,words", [
    ("pathlib.Path.write_text", _enospc, ["No space left on device"]),
    ("pathlib.Path.write_text", _eacces, ["Permission denied"]),
    ("xlsxwriter.Workbook.close", _wrapped_enospc, ["No space left on device"]),
    ("pyarrow.parquet.ParquetWriter.write_table", _enospc, ["No space left on device"]),
], ids=["disk-full-record", "permission-record", "disk-full-workbook", "disk-full-tables"])
def test_disk_full_and_permission_errors_name_the_folder(target, fail, words, tmp_path, capsys,
                                                         monkeypatch):
    study, out = study_file(tmp_path), tmp_path / "out"
    assert cli(["run", str(study), "--out", str(out), "-q"], capsys)[0] == 0
    before = snapshot(out)
    monkeypatch.setattr(target, fail)
    code, _, err = cli(["run", str(study), "--out", str(out), "-q"], capsys)
    refused(code, err, str(out), "--out", "previous outputs were kept", *words)
    assert snapshot(out) == before


# ------------------------------------------------------------------ the pieces, in-process

def test_a_signal_during_the_commit_waits_until_the_whole_set_is_in_place(tmp_path):
    from sweep.pipeline import commit
    staged, out = tmp_path / "staged", tmp_path / "out"
    staged.mkdir(), out.mkdir()
    names = ["a.parquet", "b.xlsx", "run.json"]
    for n in names:
        (staged / n).write_text("new " + n)
        (out / n).write_text("old " + n)
    seen = []

    def stop(signum, frame):
        seen.append([(out / n).read_text() for n in names])
        raise KeyboardInterrupt
    old = signal.signal(signal.SIGHUP, stop)
    try:
        with pytest.raises(KeyboardInterrupt):     # delivered once the renames are done
            commit([(staged / n, out / n) for n in names],
                   on_commit=lambda: os.kill(os.getpid(), signal.SIGHUP))
    finally:
        signal.signal(signal.SIGHUP, old)
    assert seen == [["new " + n for n in names]]
    assert sorted(p.name for p in out.iterdir()) == sorted(names)


@pytest.mark.parametrize("written,words", [(False, "previous outputs were kept"),
                                           (True, "new outputs were written whole")])
def test_the_stop_message_says_which_outputs_are_there(written, words, capsys):
    from sweep.cli import STOPPED, _stopped_exit
    STOPPED.update(signal=signal.SIGTERM, written=written)
    try:
        with pytest.raises(SystemExit) as e:
            _stopped_exit()
    finally:
        STOPPED.update(signal=None, written=False)
    assert e.value.code == 143 and words in capsys.readouterr().err


def test_series_rank_agrees_with_the_one_value_lookup():
    import numpy as np
    from sweep import values as qv
    vals = np.concatenate([qv.series_values(k, 1e-12, 1e7) for k in qv.SERIES]
                          + [np.random.default_rng(3).uniform(1e-9, 1e6, 2000), [0.0, -1.0, np.nan]])
    one = [list(qv.SERIES).index(s) if (s := qv.series_of(v)) else len(qv.SERIES) for v in vals]
    assert qv.series_rank(vals).tolist() == one
    assert qv.series_rank([4700.0, 4750.0, 4990.0, 1234.5]).tolist() == [0, 5, 5, 7]   # [std IEC 60063]


@pytest.mark.parametrize("text", ["\x1b[2J", "a\x07b", "\u202eevil", "line\nbreak", "\x9b31m"])
def test_printable_shows_every_control_character_as_an_escape(text):
    from sweep.errors import printable
    shown = printable(text)
    assert shown.isprintable() and "\\" in shown
