"""Hostile and mistaken input: exit code 2, one message naming the file, key and problem,
no traceback, nothing written. Each case is a study text (or file) and words the message must hold."""
from __future__ import annotations

import zipfile
from pathlib import Path

import pytest

from sweep.cli import main

GOOD = """[study]
title = "ok"
circuit = "astable"
timer = "bipolar"
[design]
ra = "10k"
rb = "47k"
c = "100n"
[conditions]
vcc = { min = 6, max = 9, steps = 2 }
"""


def with_line(old: str, new: str) -> str:
    assert old in GOOD
    return GOOD.replace(old, new)


# (id, study text, words the message must contain)
STUDY_CASES = [
    ("malformed-toml", "[study\ncircuit = 'astable'", ["not valid TOML", "line 1"]),
    ("unquoted-string", GOOD.replace('"astable"', "astable"), ["not valid TOML"]),
    ("unknown-section", GOOD + "[desgn]\nra = 1\n", ["desgn", "did you mean [design]"]),
    ("unknown-key", GOOD + "[parts]\ncapacitor_tolerence = \"5%\"\n", ["capacitor_tolerence", "capacitor_tolerance"]),
    ("unknown-study-key", with_line('title = "ok"', 'titel = "ok"'), ["titel", "title"]),
    ("section-not-table", "study = 3\n", ["study", "table"]),
    ("missing-circuit", GOOD.replace('circuit = "astable"\n', ""), ["study.circuit", "missing"]),
    ("unknown-circuit", with_line('circuit = "astable"', 'circuit = "astabel"'), ["study.circuit", "astable"]),
    ("circuit-not-string", with_line('circuit = "astable"', 'circuit = 555'), ["study.circuit", "string"]),
    ("unknown-timer", with_line('timer = "bipolar"', 'timer = "nmos"'), ["study.timer", "unknown timer"]),
    ("timer-file-missing", with_line('timer = "bipolar"', 'timer = "nope.toml"'), ["study.timer", "not found"]),
    ("missing-rb", with_line('rb = "47k"\n', ''), ["design.rb", "missing"]),
    ("missing-c", with_line('c = "100n"\n', ''), ["design.c", "missing"]),
    ("part-not-used", with_line('circuit = "astable"', 'circuit = "monostable"').replace('c = "100n"', 'c = "100n"\nr = "1k"'), ["not used", "monostable"]),
    ("design-and-condition", GOOD + "[conditions]\n", ["not valid TOML"]),
    ("key-in-both", GOOD.replace("[conditions]", "[conditions]\nc = \"1u\""), ["both", "conditions.c"]),
    ("unit-mismatch", with_line('ra = "10k"', 'ra = "100nF"'), ["design.ra", "capacitance"]),
    ("unit-mismatch-c", with_line('c = "100n"', 'c = "10kohm"'), ["design.c"]),
    ("volt-for-temp", GOOD + "temperature = \"5V\"\n", ["conditions.temperature"]),
    ("zero-resistor", with_line('ra = "10k"', 'ra = 0'), ["design.ra", "greater than zero"]),
    ("negative-resistor", with_line('ra = "10k"', 'ra = -10'), ["design.ra"]),
    ("nan", with_line('ra = "10k"', 'ra = nan'), ["design.ra"]),
    ("inf", with_line('ra = "10k"', 'ra = inf'), ["design.ra"]),
    ("nan-string", with_line('ra = "10k"', 'ra = "NaN"'), ["design.ra"]),
    ("bool", with_line('ra = "10k"', 'ra = true'), ["design.ra"]),
    ("garbage", with_line('ra = "10k"', 'ra = "ten k"'), ["design.ra"]),
    ("double-dot", with_line('ra = "10k"', 'ra = "4.7.1k"'), ["design.ra"]),
    ("ambiguous-rkm", with_line('ra = "10k"', 'ra = "47KJ"'), ["design.ra", "ambiguous"]),
    ("capacitor-K", with_line('c = "100n"', 'c = "100K"'), ["design.c"]),
    ("min-gt-max", with_line('vcc = { min = 6, max = 9, steps = 2 }', 'vcc = { min = 9, max = 6, steps = 2 }'), ["conditions.vcc", "greater than max"]),
    ("zero-steps", with_line('steps = 2', 'steps = 0'), ["conditions.vcc.steps"]),
    ("absurd-steps", with_line('steps = 2', 'steps = 10000000'), ["conditions.vcc.steps"]),
    ("float-steps", with_line('steps = 2', 'steps = 2.5'), ["conditions.vcc.steps"]),
    ("no-step-kind", with_line('vcc = { min = 6, max = 9, steps = 2 }', 'vcc = { min = 6, max = 9 }'), ["conditions.vcc", "steps"]),
    ("two-step-kinds", with_line('steps = 2', 'steps = 2, per_decade = 3'), ["conditions.vcc", "only one"]),
    ("unknown-range-key", with_line('steps = 2', 'stpes = 2'), ["conditions.vcc.stpes", "steps"]),
    ("missing-max", with_line('vcc = { min = 6, max = 9, steps = 2 }', 'vcc = { min = 6, steps = 2 }'), ["conditions.vcc", "max"]),
    ("empty-list", with_line('ra = "10k"', 'ra = []'), ["design.ra", "empty"]),
    ("repeated-list", with_line('ra = "10k"', 'ra = ["10k", "10000"]'), ["design.ra", "repeats"]),
    ("unknown-series", with_line('ra = "10k"', 'ra = { series = "E13", min = "1k", max = "10k" }'), ["design.ra.series", "E13"]),
    ("empty-series-range", with_line('ra = "10k"', 'ra = { series = "E6", min = "1.1k", max = "1.4k" }'), ["design.ra", "no E6 value"]),
    ("series-on-vcc", with_line('vcc = { min = 6, max = 9, steps = 2 }', 'vcc = { series = "E12", min = 6, max = 9 }'), ["conditions.vcc.series"]),
    ("nominal-outside", with_line('steps = 2 }', 'steps = 2, nominal = 12 }'), ["conditions.vcc.nominal"]),
    ("nominal-in-design", with_line('ra = "10k"', 'ra = { values = ["10k"], nominal = "10k" }'), ["design.ra.nominal"]),
    ("below-absolute-zero", GOOD + "temperature = -300\n", ["conditions.temperature", "absolute zero"]),
    ("unknown-capacitor", GOOD + "[parts]\ncapacitor = \"X9Z\"\n", ["parts.capacitor", "unknown capacitor"]),
    ("tolerance-over-100", GOOD + "[parts]\nresistor_tolerance = \"150%\"\n", ["parts.resistor_tolerance"]),
    ("tempco-wrong-unit", GOOD + "[parts]\nresistor_tempco = \"100nF\"\n", ["parts.resistor_tempco"]),
    ("tempco-absurd", GOOD + "[parts]\nresistor_tempco = 0.5\n", ["parts.resistor_tempco", "ppm"]),
    ("zero-voltage-rating", GOOD + "[parts]\ncapacitor_voltage = 0\n", ["parts.capacitor_voltage"]),
    ("load-without-resistance", GOOD + "[load]\nto = \"ground\"\n", ["load.resistance", "missing"]),
    ("load-to-wrong", GOOD + "[load]\nresistance = \"1k\"\nto = \"earth\"\n", ["load.to"]),
    ("load-kind-wrong", GOOD + "[load]\nresistance = \"1k\"\nkind = \"heater\"\n", ["load.kind"]),
    ("spec-pulse-on-astable", GOOD + "[spec]\npulse_width = { max = \"1s\" }\n", ["spec.pulse_width", "does not apply"]),
    ("spec-freq-on-monostable", GOOD.replace('"astable"', '"monostable"').replace('ra = "10k"\nrb = "47k"', 'r = "10k"') + "[spec]\nfrequency = { max = \"1kHz\" }\n", ["spec.frequency", "does not apply"]),
    ("spec-not-table", GOOD + "[spec]\nfrequency = \"2Hz\"\n", ["spec.frequency"]),
    ("spec-target-no-tol", GOOD + "[spec]\nfrequency = { target = \"2Hz\" }\n", ["spec.frequency", "tolerance"]),
    ("spec-mixed", GOOD + "[spec]\nfrequency = { target = \"2Hz\", tolerance = \"5%\", max = \"3Hz\" }\n", ["spec.frequency", "not both"]),
    ("spec-min-gt-max", GOOD + "[spec]\nduty = { min = 0.8, max = 0.6 }\n", ["spec.duty"]),
    ("spec-unknown-key", GOOD + "[spec]\nfrequency = { tgt = \"2Hz\" }\n", ["spec.frequency.tgt"]),
    ("spec-tolerance-not-percent", GOOD + "[spec]\nfrequency = { target = \"2Hz\", tolerance = 15 }\n", ["spec.frequency.tolerance", "%"]),
    ("spec-unit", GOOD + "[spec]\nfrequency = { max = \"2s\" }\n", ["spec.frequency.max"]),
    ("mc-negative", GOOD + "[analysis]\nmonte_carlo = -1\n", ["analysis.monte_carlo"]),
    ("mc-float", GOOD + "[analysis]\nmonte_carlo = 10.5\n", ["analysis.monte_carlo"]),
    ("mc-absurd", GOOD + "[analysis]\nmonte_carlo = 100000000\n", ["analysis.monte_carlo"]),
    ("bad-distribution", GOOD + "[analysis]\ndistribution = \"cauchy\"\n", ["analysis.distribution"]),
    ("bad-supply", with_line('title = "ok"', 'title = "ok"\nsupply = "solar"'), ["study.supply"]),
]


def run_cli(args, capsys):
    with pytest.raises(SystemExit) as e:
        main(args)
    err = capsys.readouterr().err
    return e.value.code, err


def assert_clean_refusal(code, err, words, out_dir: Path, fname: str):
    assert code == 2, err
    assert "Traceback" not in err
    assert err.count("\n") == 1, err                       # one message
    assert fname in err, err
    for w in words:
        assert w in err, (w, err)
    assert not out_dir.exists() or not any(out_dir.iterdir())


@pytest.mark.parametrize("case_id,text,words", STUDY_CASES, ids=[c[0] for c in STUDY_CASES])
def test_bad_study_is_refused(case_id, text, words, tmp_path, capsys):
    study = tmp_path / "s.toml"
    study.write_text(text, encoding="utf-8")
    out = tmp_path / "out"
    code, err = run_cli(["run", str(study), "--out", str(out), "--quiet"], capsys)
    assert_clean_refusal(code, err, words, out, str(study))


def test_line_number_is_given_where_toml_has_one(tmp_path, capsys):
    study = tmp_path / "s.toml"
    study.write_text(with_line('ra = "10k"', 'ra = "100nF"'), encoding="utf-8")
    code, err = run_cli(["check", str(study)], capsys)
    assert code == 2 and "line 6" in err


BAD_TIMERS = [
    ("timer-malformed", "name = 'x'\n[supply\n", ["not valid TOML"]),
    ("timer-missing-key", None, ["missing key"]),
    ("timer-thresholds-out-of-order", ("threshold_fraction = 0.6666666666666666", "threshold_fraction = 1.5"), ["threshold_fraction"]),
    ("timer-negative-current", ("threshold_current_a = 0.1e-6", "threshold_current_a = -0.1e-6"), ["threshold_current_a", "negative"]),
    ("timer-supply-order", ("min_v = 4.5", "min_v = 20.0"), ["max_v"]),
]


@pytest.mark.parametrize("case_id,change,words", BAD_TIMERS, ids=[c[0] for c in BAD_TIMERS])
def test_bad_timer_model_is_refused(case_id, change, words, tmp_path, capsys):
    src = Path("sweep/models/bipolar.toml").read_text(encoding="utf-8")
    if change is None:
        text = src.replace("reset_v = 0.7", "")
    elif isinstance(change, str):
        text = change
    else:
        assert change[0] in src
        text = src.replace(change[0], change[1])
    (tmp_path / "my-timer.toml").write_text(text, encoding="utf-8")
    study = tmp_path / "s.toml"
    study.write_text(with_line('timer = "bipolar"', 'timer = "my-timer.toml"'), encoding="utf-8")
    out = tmp_path / "out"
    code, err = run_cli(["run", str(study), "--out", str(out), "--quiet"], capsys)
    assert_clean_refusal(code, err, words, out, "my-timer.toml")


def _bomb(path: Path):
    with zipfile.ZipFile(path, "w", zipfile.ZIP_DEFLATED) as z:
        z.writestr("[Content_Types].xml", "<Types/>")
        z.writestr("xl/worksheets/sheet1.xml", b"0" * (300 * 2**20))


def _sparse(path: Path, size: int):
    with open(path, "wb") as f:
        f.truncate(size)


def _plain_workbook(path: Path):
    from openpyxl import Workbook
    wb = Workbook()
    wb.active.title = "Sheet of someone else"
    wb.save(path)


FILE_CASES = [
    ("folder", lambda p: p.mkdir(), ["is a folder"]),
    ("empty", lambda p: p.write_bytes(b""), ["empty"]),
    ("binary", lambda p: p.write_bytes(b"\x00\x01\x02garbage"), ["binary"]),
    ("not-utf8", lambda p: p.write_bytes("title = 'caf\xe9'".encode("latin-1")), ["UTF-8"]),
    ("missing", lambda p: None, ["not found"]),
    ("xlsx-not-zip", lambda p: p.with_suffix(".xlsx").write_text("hello"), ["not a workbook"]),
    ("xlsx-corrupt", lambda p: p.with_suffix(".xlsx").write_bytes(b"PK\x03\x04" + b"\x00" * 100), ["workbook"]),
    ("xlsx-bomb", lambda p: _bomb(p.with_suffix(".xlsx")), ["decompression bomb"]),
    ("xlsx-oversized", lambda p: _sparse(p.with_suffix(".xlsx"), 60 * 2**20), ["60 MiB", "limit"]),
    ("xlsx-no-study-sheet", lambda p: _plain_workbook(p.with_suffix(".xlsx")), ["Study", "no Study sheet"]),
]


@pytest.mark.parametrize("case_id,make,words", FILE_CASES, ids=[c[0] for c in FILE_CASES])
def test_bad_study_file_is_refused(case_id, make, words, tmp_path, capsys):
    p = tmp_path / "s.toml"
    make(p)
    target = p.with_suffix(".xlsx") if case_id.startswith("xlsx") else p
    out = tmp_path / "out"
    code, err = run_cli(["run", str(target), "--out", str(out), "--quiet"], capsys)
    assert_clean_refusal(code, err, words, out, str(target))


OPTION_CASES = [
    (["point", "--ra", "100nF", "--rb", "1k", "--c", "1n"], ["--ra", "capacitance"]),
    (["point", "--ra", "10k", "--c", "1n"], ["--rb", "missing"]),
    (["point", "--circuit", "astabel", "--ra", "1k", "--rb", "1k", "--c", "1n"], ["--circuit"]),
    (["point", "--ra", "1k", "--rb", "1k", "--c", "1n", "--vcc", "-5"], ["--vcc"]),
    (["point", "--ra", "1k", "--rb", "1k", "--c", "1n", "--capacitor", "paper"], ["--capacitor"]),
    (["point", "--ra", "1k", "--rb", "1k", "--c", "1n", "--load", "1k", "--load-to", "sky"], ["--load-to"]),
    (["point", "--ra", "1k", "--rb", "1k", "--c", "nan"], ["--c"]),
    (["point", "--r", "1k", "--c", "1n", "--circuit", "monostable", "--temperature", "hot"], ["--temperature"]),
    (["point", "--ra", "1k", "--rb", "1k", "--c", "1n", "--timer", "missing.toml"], ["--timer", "not found"]),
    (["new", "astabel"], ["circuit"]),
]


@pytest.mark.parametrize("args,words", OPTION_CASES, ids=[" ".join(a[:3]) + str(i) for i, (a, _) in enumerate(OPTION_CASES)])
def test_bad_options_are_refused(args, words, capsys):
    code, err = run_cli(args, capsys)
    assert code == 2 and "Traceback" not in err, err
    for w in words:
        assert w in err, (w, err)


def test_unwritable_output_folder(tmp_path, capsys):
    study = tmp_path / "s.toml"
    study.write_text(GOOD, encoding="utf-8")
    blocker = tmp_path / "file"
    blocker.write_text("x")
    code, err = run_cli(["run", str(study), "--out", str(blocker / "sub"), "--quiet"], capsys)
    assert code == 2 and "--out" in err and "Traceback" not in err
