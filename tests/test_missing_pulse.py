"""The missing-pulse detector as a study: keys, per-design margin, flags, outputs."""
from __future__ import annotations

import math

import numpy as np
import pytest
from openpyxl import load_workbook

from sweep.analysis import analyse_designs, main_outputs
from sweep.errors import InputError
from sweep.study import parse_study
from tests.cli_helpers import cli

STUDY = """
[study]
title = "Alarm (invented example)"
circuit = "missing-pulse"
[design]
r = ["330k", "680k", "1M"]
c = ["2.2u"]
[conditions]
input_period = { min = 0.8, max = 1.2, steps = 3 }
vcc = [11.0, 12.0, 13.0]
[spec]
timeout = { min = "1.3s" }
[analysis]
monte_carlo = 100
top = 3
"""


def test_margin_is_the_timeout_less_the_slowest_legal_period():
    s = parse_study(STUDY)
    assert main_outputs(s.circuit) == ["timeout_s"]
    df = analyse_designs(s, 0, s.n_designs).set_index("r_ohm")
    for r, row in df.iterrows():
        # [derived] the smallest margin over the conditions is the shortest timeout less the
        # slowest input period (1.2 s), and its worst case is at least as small
        assert row["timeout_margin_s_min"] == pytest.approx(row["timeout_s_min"] - 1.2, rel=1e-9)
        assert row["timeout_margin_s_wc_min"] <= row["timeout_margin_s_min"]
        # the ideal timeout, ln 3 R C, within the realistic model's few per cent [book]
        assert row["timeout_s_nom"] == pytest.approx(math.log(3) * r * 2.2e-6, rel=0.03)
    # 330 k x 2.2 u times out after about 0.8 s: every input slower than that is a false alarm
    assert "false-alarm" in df.loc[330e3, "flags"] and df.loc[330e3, "verdict"] == "limit"
    assert "false-alarm" not in df.loc[680e3, "flags"]


@pytest.mark.parametrize("text,key,words", [
    (STUDY.replace('input_period = { min = 0.8, max = 1.2, steps = 3 }\n', ""),
     "conditions.input_period", "missing"),
    (STUDY.replace('circuit = "missing-pulse"', 'circuit = "monostable"').replace(
        'timeout = { min = "1.3s" }', ""), "conditions.input_period", "only the missing-pulse"),
    (STUDY.replace('timeout = { min = "1.3s" }', 'pulse_width = { min = "1s" }'),
     "spec.pulse_width", "does not apply"),
    (STUDY.replace('circuit = "missing-pulse"', 'circuit = "astable"').replace(
        'r = ["330k", "680k", "1M"]', 'ra = "1k"\nrb = "1k"').replace(
        'input_period = { min = 0.8, max = 1.2, steps = 3 }\n', ""), "spec.timeout", "does not apply"),
])
def test_bad_missing_pulse_studies_name_the_key(text, key, words):
    with pytest.raises(InputError) as e:
        parse_study(text, "alarm.toml")
    assert e.value.key == key and words in e.value.problem


@pytest.mark.slow
def test_missing_pulse_runs_end_to_end(tmp_path, capsys):
    study = tmp_path / "alarm.toml"
    study.write_text(STUDY, encoding="utf-8")
    code, _, err = cli(["run", str(study), "--out", str(tmp_path / "out"), "-q"], capsys)
    assert code == 0, err
    wb = load_workbook(tmp_path / "out" / "alarm.xlsx", read_only=True)
    rows = {r[0]: r[1] for r in wb["Summary"].iter_rows(values_only=True) if r and r[0]}
    assert rows["Pick"].startswith("design 2") or rows["Pick"].startswith("design 3")
    assert "Timeout nominal" in rows and "late before the alarm" in rows["Timeout margin"]
    import pandas as pd
    bom = pd.read_csv(tmp_path / "out" / "bom.csv")
    assert "Q1" in set(bom["reference"])
    w = pd.read_csv(tmp_path / "out" / "waveform.csv")
    nominal = w[w["condition"] == "nominal"]
    # the alarm: the output falls once, a timeout after the last of three input pulses
    high = nominal["output_v"].to_numpy() > 5.0
    t_fall = nominal["time_s"].to_numpy()[np.argmax(~high & (np.arange(len(high)) > 0))]
    pts = pd.read_parquet(tmp_path / "out" / "points.parquet")
    assert {"timeout_s", "timeout_margin_s"} <= set(pts.columns)
    designs = pd.read_parquet(tmp_path / "out" / "designs.parquet")
    pick = designs[designs["rank"] == 1].iloc[0]
    # pulses at 0, 1 s and 2 s (the nominal input period), the alarm one timeout after the last
    assert t_fall == pytest.approx(2 * 1.0 + pick["timeout_s_nom"], rel=1e-9)
