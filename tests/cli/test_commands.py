"""The command line end to end: every example study, point, check, new, workbook round trip."""
from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from openpyxl import load_workbook

from tests.cli_helpers import cli
from tests.conftest import EXAMPLES
MACHINE = ["design", "condition", "vcc_v", "temperature_c", "high_time_s", "low_time_s", "period_s",
           "frequency_hz", "duty", "pulse_width_s", "supply_current_a", "power_w", "output_high_v",
           "output_current_a", "discharge_peak_a", "ra_power_w", "junction_temp_c", "flags", "ok"]




@pytest.mark.slow
@pytest.mark.parametrize("name", [p.stem for p in EXAMPLES])
def test_every_example_runs_end_to_end(name, examples):
    run = examples[name]
    assert run.code == 0, run.stderr
    out = run.out
    files = {p.name for p in out.iterdir()}
    assert files == {f"{name}.xlsx", f"{name}.html", "points.parquet", "designs.parquet", "bom.csv",
                     "waveform.csv", "run.json"}
    wb = load_workbook(out / f"{name}.xlsx", read_only=True)
    assert wb.sheetnames == ["Summary", "Designs", "Points", "Parts", "Check", "Study", "Notes"]
    pts = pd.read_parquet(out / "points.parquet")
    assert set(MACHINE) <= set(pts.columns)
    rec = run.record
    assert rec["points"] == len(pts) == rec["points_in_parquet"]
    assert len(rec["study_sha256"]) == 64 and rec["seed"] >= 0
    designs = pd.read_parquet(out / "designs.parquet")       # every design, design order
    assert list(designs["design"]) == list(range(1, len(designs) + 1))
    assert sorted(designs["rank"]) == list(range(1, len(designs) + 1))
    assert rec["designs"] == len(designs)
    assert "rank" in run.stdout and "wrote" in run.stdout     # the terminal table
    page = (out / f"{name}.html").read_text(encoding="utf-8")
    assert "Plotly.newPlot" in page and '<script src="http' not in page
    assert not list(out.glob(".*"))                            # no temporary left behind


@pytest.mark.slow
def test_points_rows_agree_with_the_flags_and_ok_columns(examples):
    run = examples["bike-light"]
    assert run.code == 0, run.stderr
    pts = pd.read_parquet(run.out / "points.parquet")
    assert (pts["ok"] == (pts["flags"] == "")).all()
    # frequency = 1 / period and duty = high / period at every point [book: definitions]
    good = pts["period_s"].notna()
    assert np.allclose(pts.loc[good, "frequency_hz"] * pts.loc[good, "period_s"], 1.0)
    assert np.allclose(pts.loc[good, "duty"], pts.loc[good, "high_time_s"] / pts.loc[good, "period_s"])
    # the diode circuit exists to give duty below 50 % [book]
    assert (pts.loc[good, "duty"] < 0.5).any()


@pytest.mark.slow
def test_workbook_study_sheet_round_trip(examples, tmp_path, capsys):
    a, b = examples["dosing-pump"].out, tmp_path / "b"
    assert examples["dosing-pump"].code == 0
    assert cli(["run", str(a / "dosing-pump.xlsx"), "--out", str(b), "-q"], capsys)[0] == 0
    da, db = pd.read_parquet(a / "designs.parquet"), pd.read_parquet(b / "designs.parquet")
    pd.testing.assert_frame_equal(da, db)
    ra, rb = json.loads((a / "run.json").read_text()), json.loads((b / "run.json").read_text())
    assert ra["study_sha256"] == rb["study_sha256"]
    for name in ("points.parquet", "designs.parquet", "dosing-pump.html"):
        assert ra["sha256"][name] == rb["sha256"][name]


@pytest.mark.slow
def test_edited_workbook_changes_the_run(examples, tmp_path, capsys):
    a = examples["dosing-pump"].out
    assert examples["dosing-pump"].code == 0
    wb = load_workbook(a / "dosing-pump.xlsx")
    ws = wb["Study"]
    for row in ws.iter_rows(min_row=3):
        if row[0].value == "spec" and row[1].value == "pulse_width":
            row[2].value = '{ target = "6s", tolerance = "10%" }'
    wb.save(tmp_path / "edited.xlsx")
    b = tmp_path / "b"
    assert cli(["run", str(tmp_path / "edited.xlsx"), "--out", str(b), "-q"], capsys)[0] == 0
    best = pd.read_parquet(b / "designs.parquet").set_index("rank").loc[1]
    assert 5.4 <= best["pulse_width_s_nom"] <= 6.6


def test_point_json_equals_the_textbook_in_ideal_mode(capsys):
    code, out, _ = cli(["point", "--circuit", "astable", "--timer", "bipolar", "--ra", "10k",
                        "--rb", "47k", "--c", "100n", "--vcc", "9", "--ideal", "--json"], capsys)
    assert code == 0
    row = json.loads(out)
    # f = 1 / (ln2 (RA + 2 RB) C) [book]
    assert row["frequency_hz"] == pytest.approx(1 / (math.log(2) * 104e3 * 100e-9), rel=1e-12)
    assert row["ra_ohm"] == 10e3 and row["flags"] == "" and row["ok"] is True
    assert row["pulse_width_s"] is None


def test_point_takes_part_and_load_options(capsys):
    code, out, _ = cli(["point", "--circuit", "monostable", "--r", "1M", "--c", "1000u",
                        "--capacitor", "electrolytic", "--capacitor-voltage", "16V", "--load", "1k",
                        "--load-to", "supply", "--json"], capsys)
    assert code == 0
    row = json.loads(out)
    assert "timing-stalls" in row["flags"]      # leakage 0.01 C V = 160 uA [cp]
    assert row["output_current_a"] > 0


@pytest.mark.parametrize("circuit", ["astable", "astable-diode", "astable-symmetric", "monostable", "bistable"])
def test_new_writes_a_valid_commented_starter(circuit, tmp_path, capsys):
    path = tmp_path / f"{circuit}.toml"
    assert cli(["new", circuit, "--out", str(path)], capsys)[0] == 0
    text = path.read_text(encoding="utf-8")
    assert text.count("#") > 10 and f'circuit = "{circuit}"' in text
    code, out, err = cli(["check", str(path)], capsys)
    assert code == 0, err
    assert "points" in out and "time" in out
    assert cli(["new", circuit, "--out", str(path)], capsys)[0] == 2     # no silent overwrite


def test_check_counts_points(capsys):
    code, out, _ = cli(["check", "studies/buzzer.toml"], capsys)
    assert code == 0
    # E24 1k..10k = 25 values, E24 1k..47k = 41, three capacitors, 3 x 3 conditions [std IEC 60063]
    assert f"{25 * 41 * 3 * 9:,}" in out


def test_version_and_help(capsys):
    code, out, _ = cli(["--version"], capsys)
    assert code == 0 and out.startswith("timer-sweep ")
    for cmd in (["--help"], ["run", "--help"], ["point", "--help"], ["check", "--help"], ["new", "--help"]):
        code, out, _ = cli(cmd, capsys)
        assert code == 0 and "Usage" in out


@pytest.mark.slow
def test_a_spec_no_design_can_meet_is_said_plainly_everywhere(tmp_path, capsys):
    study = tmp_path / "impossible.toml"
    study.write_text(Path("studies/buzzer.toml").read_text(encoding="utf-8")
                     .replace('frequency = { target = "2.7kHz", tolerance = "8%" }',
                              'frequency = { target = "2.7MHz", tolerance = "1%" }'), encoding="utf-8")
    code, out, err = cli(["run", str(study), "--out", str(tmp_path / "o")], capsys)
    assert code == 0, err
    assert "No design meets the spec" in out                                   # terminal
    wb = load_workbook(tmp_path / "o" / "impossible.xlsx", read_only=True)
    summary = " ".join(str(c) for row in wb["Summary"].iter_rows(values_only=True) for c in row if c)
    assert "NO DESIGN MEETS THE SPEC" in summary                               # Summary sheet
    page = (tmp_path / "o" / "impossible.html").read_text(encoding="utf-8")
    assert "NO DESIGN MEETS THE SPEC" in page                                  # chart page
    assert json.loads((tmp_path / "o" / "run.json").read_text())["meets_spec"] is False


@pytest.mark.slow
def test_examples_show_a_pick_with_its_yield(examples):
    for study in EXAMPLES:
        out = examples[study.stem].out
        assert examples[study.stem].code == 0
        best = pd.read_parquet(out / "designs.parquet").set_index("rank").loc[1]
        assert 0.0 <= best["yield"] <= 1.0                                     # a sampled yield
        assert "spec" in Path(study).read_text(encoding="utf-8")


@pytest.mark.slow
def test_a_mistake_in_an_edited_workbook_names_its_sheet_row(examples, tmp_path, capsys):
    a = examples["dosing-pump"].out
    assert examples["dosing-pump"].code == 0
    wb = load_workbook(a / "dosing-pump.xlsx")
    ws = wb["Study"]
    row = next(r[0].row for r in ws.iter_rows(min_row=3) if r[1].value == "capacitor")
    ws.cell(row=row, column=3).value = '"tantalium"'
    wb.save(tmp_path / "edited.xlsx")
    code, _, err = cli(["run", str(tmp_path / "edited.xlsx"), "--out", str(tmp_path / "b"), "-q"], capsys)
    assert code == 2 and f"sheet Study, row {row}" in err and "parts.capacitor" in err, err
    assert "tantalum" in err                                   # the suggestion


@pytest.mark.slow
def test_a_workbook_run_never_overwrites_its_own_input(examples, tmp_path, capsys):
    assert examples["dosing-pump"].code == 0
    a = examples["dosing-pump"].copy_to(tmp_path / "a")       # this run aims at the folder itself
    before = (a / "dosing-pump.xlsx").read_bytes()
    code, _, err = cli(["run", str(a / "dosing-pump.xlsx"), "--out", str(a), "-q"], capsys)
    assert code == 2 and "--out" in err and "overwrite" in err
    assert (a / "dosing-pump.xlsx").read_bytes() == before


@pytest.mark.slow
def test_summary_says_when_the_picks_worst_case_misses_the_spec(examples):
    run = examples["bike-light"]
    assert run.code == 0, run.stderr
    rec = run.record
    best = pd.read_parquet(run.out / "designs.parquet").set_index("rank").loc[1]
    wb = load_workbook(run.out / "bike-light.xlsx", read_only=True)
    text = " ".join(str(c) for row in wb["Summary"].iter_rows(values_only=True) for c in row if c)
    inside = best["frequency_hz_wc_min"] >= 1.7 and best["frequency_hz_wc_max"] <= 2.3
    assert rec["worst_case_in_spec"] == inside
    assert ("worst case misses the spec" in text) == (not inside)
    assert "Tolerances assumed" in text and "E12" in text


def test_the_help_patch_leaves_a_typer_without_its_hook_alone(monkeypatch):
    # typer releases before 0.29 have no TyperOption.display_type_rich (seen here: with 0.28.0
    # every command raised AttributeError at import); the patch must skip, not break them
    import typer.core
    from sweep.cli import commands

    class OlderOption:            # an option class without the hook
        pass
    monkeypatch.setattr(typer.core, "TyperOption", OlderOption)
    commands._no_type_on_flags()
    assert not hasattr(OlderOption, "display_type_rich")


def test_help_shows_no_type_after_flags_and_new_uses_the_right_article(tmp_path, capsys):
    code, out, _ = cli(["run", "--help"], capsys)
    assert code == 0 and "--ideal" in out and "<bool>" not in out
    assert "<path>" in out or "PATH" in out.upper()           # options with a value keep it
    code, out, _ = cli(["new", "astable-diode", "-o", str(tmp_path / "a.toml")], capsys)
    assert code == 0
    text = (tmp_path / "a.toml").read_text(encoding="utf-8")
    assert "an astable-diode starter" in text and "a astable" not in text
    cli(["new", "monostable", "-o", str(tmp_path / "m.toml")], capsys)
    assert "a monostable starter" in (tmp_path / "m.toml").read_text(encoding="utf-8")


def test_check_estimate_counts_writing_the_outputs(capsys):
    from dataclasses import replace
    from sweep.estimate import estimate, write_seconds
    from sweep.study import load_study
    s = load_study("studies/buzzer.toml")
    est = estimate(s)
    assert 0 < est.write_seconds < est.seconds
    # the workbook's rows dominate: a sweep with a tenth of the designs writes less
    small = replace(s, design=tuple(replace(a, values=a.values[:3]) if a.key == "ra" else a
                                    for a in s.design))
    assert write_seconds(small, 10) < write_seconds(s, 10)
    code, out, _ = cli(["check", "studies/buzzer.toml"], capsys)
    assert code == 0 and "writing the outputs included" in out
