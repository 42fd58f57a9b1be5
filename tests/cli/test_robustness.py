"""Interrupted runs, the sweep-size guard, determinism and injection through the whole CLI."""
from __future__ import annotations

import hashlib
import json
import signal
import subprocess
import sys
from pathlib import Path

import pytest
from openpyxl import load_workbook

from tests.cli_helpers import cli

OUTPUTS = {"buzzer.xlsx", "buzzer.html", "points.parquet", "designs.parquet", "bom.csv", "waveform.csv",
           "run.json"}




def sha(p: Path) -> str:
    return hashlib.sha256(p.read_bytes()).hexdigest()


def consistent(out: Path) -> dict:
    """The output set is whole: every file there and the record's hashes match the tables."""
    assert {p.name for p in out.iterdir() if not p.name.startswith(".")} == OUTPUTS
    rec = json.loads((out / "run.json").read_text())
    assert set(rec["sha256"]) == OUTPUTS - {"run.json"}
    for name, digest in rec["sha256"].items():
        assert digest == sha(out / name)
    return rec


def run_cmd(study, out):
    return [sys.executable, "-m", "sweep", "run", str(study), "--out", str(out), "--quiet"]


def _in_monte_carlo(staging: Path) -> bool:
    """Pass 1 is done (its points are in the staging folder) and the Monte Carlo is running."""
    return (staging / "points.parquet").exists()


def _writing_the_workbook(staging: Path) -> bool:
    """The workbook is being written: its temporary file, not yet renamed, is in the staging
    folder (the page, the tables and run.json follow)."""
    return any(staging.glob(".buzzer.xlsx.*"))


STAGES = {"monte-carlo": (_in_monte_carlo, "monte_carlo = 20000"),   # long: the signal lands early
          "workbook": (_writing_the_workbook, "monte_carlo = 500")}  # the example as it ships


@pytest.mark.slow
@pytest.mark.parametrize("sig,stage", [(signal.SIGTERM, "workbook"), (signal.SIGTERM, "monte-carlo"),
                                       (signal.SIGINT, "monte-carlo"), (signal.SIGHUP, "workbook"),
                                       (signal.SIGKILL, "monte-carlo")])
def test_a_killed_run_leaves_the_previous_outputs_whole(sig, stage, examples, tmp_path):
    from sweep.pipeline import STAGING
    from tests.cli_helpers import wait_while_running
    ready, monte_carlo = STAGES[stage]
    study = tmp_path / "buzzer.toml"
    text = Path("studies/buzzer.toml").read_text(encoding="utf-8")
    assert "monte_carlo = 500" in text
    study.write_text(text.replace("monte_carlo = 500", monte_carlo), encoding="utf-8")
    assert examples["buzzer"].code == 0
    out = examples["buzzer"].copy_to(tmp_path / "out")          # the previous outputs
    before = consistent(out)
    before_hash = {p.name: sha(p) for p in out.iterdir()}
    proc = subprocess.Popen(run_cmd(study, out), stderr=subprocess.PIPE, text=True)
    staging = out / f"{STAGING}{proc.pid}"
    # the run has reached the stage (a partial output shows it) and is still going
    if not wait_while_running(proc, lambda: ready(staging), 300):
        proc.kill()
        _, err = proc.communicate(timeout=120)
        pytest.fail(f"the run ended (exit {proc.returncode}) before it reached {stage}: {err}")
    proc.send_signal(sig)
    _, err = proc.communicate(timeout=120)
    assert "Traceback" not in err
    if sig == signal.SIGKILL:          # cannot be caught: killed where it stood, mid-run
        assert proc.returncode == -sig, (proc.returncode, err)
        assert staging.exists()        # its half-made outputs are still in the staging folder
    else:
        # stopped, never reported as done: 128 + the signal [POSIX shell convention], and the
        # message says the run did not finish (a run that finished first exits 0 and fails)
        assert proc.returncode == 128 + sig, (proc.returncode, err)
        assert "stopped by" in err and "the run did not finish" in err, err
    after = consistent(out)
    assert {p.name: sha(p) for p in out.iterdir() if not p.name.startswith(".")} == before_hash
    assert after == before
    if sig != signal.SIGKILL:
        assert not [p for p in out.iterdir() if p.name.startswith(".")]   # nothing partial
    else:                              # SIGKILL cannot be caught: the next run sweeps up
        subprocess.run(run_cmd("studies/buzzer.toml", out), check=True, timeout=300)
        assert not [p for p in out.iterdir() if p.name.startswith(".")]
        consistent(out)


def test_size_guard_refuses_a_huge_sweep_and_says_how_to_narrow_it(tmp_path, capsys):
    study = tmp_path / "huge.toml"
    study.write_text("""[study]
circuit = "astable"
[design]
ra = { series = "E192", min = "1", max = "10M" }
rb = { series = "E192", min = "1", max = "10M" }
c = { series = "E24", min = "1p", max = "1m" }
[conditions]
vcc = { min = 5, max = 15, steps = 11 }
""", encoding="utf-8")
    out = tmp_path / "out"
    code, _, err = cli(["run", str(study), "--out", str(out), "--quiet"], capsys)
    assert code == 2 and "Traceback" not in err
    assert "sweep too large" in err and "--yes" in err and "points" in err
    assert "'ra'" in err or "'rb'" in err                       # names the axis to narrow
    assert not out.exists() or not any(out.iterdir())
    code, outp, _ = cli(["check", str(study)], capsys)
    assert code == 0 and "points" in outp and "run refuses this without --yes" in outp


@pytest.mark.slow
def test_same_study_and_seed_give_identical_tables_and_hashes(examples, tmp_path, capsys):
    a, b = examples["buzzer"].out, tmp_path / "b"        # the session's run, and one more
    assert examples["buzzer"].code == 0
    assert cli(["run", "studies/buzzer.toml", "--out", str(b), "-q"], capsys)[0] == 0
    ra, rb = (json.loads((d / "run.json").read_text()) for d in (a, b))
    for k in ("created", "seconds_analysis", "seconds_total"):
        ra.pop(k), rb.pop(k)
    for r in (ra, rb):           # the workbook records when it was made: a timestamp
        r["sha256"].pop("buzzer.xlsx")
    assert ra == rb
    assert sha(a / "points.parquet") == sha(b / "points.parquet")
    assert sha(a / "designs.parquet") == sha(b / "designs.parquet")


HOSTILE = '=HYPERLINK("http://example.invalid","x")<script>alert(1)</script>'


@pytest.mark.slow
def test_hostile_title_notes_and_file_name(tmp_path, capsys):
    name = tmp_path / "=cmd@+x <b>.toml"
    name.write_text(Path("studies/dosing-pump.toml").read_text(encoding="utf-8")
                    .replace('title = "Dosing pump one-shot (invented example)"',
                             f"title = '{HOSTILE}'\nnotes = '+SUM(1,2) @A1 -3'"), encoding="utf-8")
    out = tmp_path / "out"
    code, _, err = cli(["run", str(name), "--out", str(out), "-q"], capsys)
    assert code == 0, err
    files = sorted(p.name for p in out.iterdir())
    assert all("<" not in f and "@" not in f and " " not in f for f in files)   # a safe file name
    xlsx = next(out.glob("*.xlsx"))
    wb = load_workbook(xlsx)
    formulas = [(ws.title, c.coordinate) for ws in wb for row in ws.iter_rows() for c in row
                if c.data_type == "f" and ws.title != "Check"]
    assert formulas == []                                         # user text never a formula
    texts = [c.value for ws in wb for row in ws.iter_rows() for c in row if isinstance(c.value, str)]
    assert any(HOSTILE in t for t in texts) and any("+SUM(1,2)" in t for t in texts)
    html = next(out.glob("*.html")).read_text(encoding="utf-8")
    assert "<script>alert(1)" not in html and "&lt;script&gt;alert(1)" in html


@pytest.mark.parametrize("args,words", [
    (["--workers", "0"], ["--workers"]),
    (["--workers", "many"], ["--workers"]),
    (["--scheduler", "tcp://127.0.0.1:9"], ["--scheduler"]),
    (["--out", "/proc/forbidden"], ["--out"]),
    (["--bogus"], ["--bogus"]),
])
def test_bad_run_options(args, words, capsys):
    code, _, err = cli(["run", "studies/jig-latch.toml", "-q"] + args, capsys)
    assert code == 2 and "Traceback" not in err, err
    for w in words:
        assert w in err


@pytest.mark.slow
def test_a_stop_signal_that_lands_in_a_finaliser_still_stops_the_run():
    # Python cannot raise an exception out of a finaliser (__del__): it prints "Exception
    # ignored" with a traceback and goes on. A stop signal that lands there must neither print
    # a traceback nor be lost: timer-sweep sends it again so it is raised at the next step.
    script = """
import os, signal, sys, time
from sweep import cli
signal.signal(signal.SIGTERM, cli._stop)
sys.unraisablehook = cli._unraisable(sys.unraisablehook)
class Finaliser:
    def __del__(self):
        os.kill(os.getpid(), signal.SIGTERM)
        time.sleep(0.05)
x = Finaliser()
try:
    del x
    for _ in range(200):
        time.sleep(0.01)
    print("not stopped")
except KeyboardInterrupt:
    print("stopped", cli.STOPPED["signal"])
"""
    proc = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True, timeout=60)
    assert proc.stdout.strip() == f"stopped {int(signal.SIGTERM)}", (proc.stdout, proc.stderr)
    assert "Traceback" not in proc.stderr and "Exception ignored" not in proc.stderr


@pytest.mark.slow
def test_a_stop_the_run_did_not_see_still_keeps_the_previous_outputs(examples, tmp_path):
    # a library may swallow the interrupt a stop signal raises (a bare except); the commit asks
    # whether a stop arrived and, if so, puts nothing in place [the all-or-nothing contract]
    from sweep.pipeline import run_study
    from sweep.study import load_study
    st = load_study("studies/jig-latch.toml")
    assert examples["jig-latch"].code == 0
    out = examples["jig-latch"].copy_to(tmp_path / "out")     # the previous outputs
    before = {p.name: sha(p) for p in out.iterdir()}
    with pytest.raises(KeyboardInterrupt):
        run_study(st, out, stop_requested=lambda: True)
    assert {p.name: sha(p) for p in out.iterdir()} == before     # no staging folder left either
