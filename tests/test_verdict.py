"""One verdict per design: the workbook, the chart page's data, designs.parquet and run.json
agree design by design, and a pick with a low yield is never called a pass."""
from __future__ import annotations

import json
import re
from pathlib import Path

import pandas as pd
import pytest
from openpyxl import load_workbook

from sweep.analysis import VERDICTS
from tests.cli_helpers import cli


def _page_verdicts(html_text: str) -> tuple[dict[str, str], dict[str, set[str]]]:
    """(design -> verdict from the hover data, map state -> designs) of the page's design map,
    read from the JSON the page hands to plotly."""
    start = html_text.index('Plotly.newPlot(', html_text.index('id="sec-map"'))
    start = html_text.index("[", start)
    data, _ = json.JSONDecoder().raw_decode(html_text[start:])
    verdict, states = {}, {}
    for trace in data:
        if not trace.get("customdata"):
            continue
        k = int(re.search(r"Verdict: %\{customdata\[(\d+)\]\}", trace["hovertemplate"]).group(1))
        for row in trace["customdata"]:
            verdict[str(row[0])] = row[k]
            if trace.get("legendgroup") in ("meets", "near", "breaks", "blank"):
                states.setdefault(trace["legendgroup"], set()).add(str(row[0]))
    return verdict, states


@pytest.mark.slow
@pytest.mark.parametrize("extra", ["", '\n[spec]\nyield = { min = 0.9999 }\n'])
def test_workbook_page_and_run_record_agree_design_by_design(extra, examples, tmp_path, capsys):
    if not extra:                 # the example study as it ships, from the session's shared run
        run = examples["bike-light"]
        assert run.code == 0, run.stderr
        out, stem = run.out, "bike-light"
    else:
        text = Path("studies/bike-light.toml").read_text(encoding="utf-8")
        text = text.replace("monte_carlo = 500", "monte_carlo = 200")
        # below 100 % of 200 builds, no Wilson interval reaches 99.99 % [derived]: every
        # design is at best a low yield
        text = text.replace("[spec]\n", "[spec]\nyield = { min = 0.9999 }\n")
        # and the typical spreads read as half a sigma: twice as wide, no build set is perfect
        text = text.replace("[analysis]\n", "[analysis]\ntypical_sigma = 0.5\n")
        study = tmp_path / "bike.toml"
        study.write_text(text, encoding="utf-8")
        out, stem = tmp_path / "o", "bike"
        code, _, err = cli(["run", str(study), "--out", str(out), "-q"], capsys)
        assert code == 0, err
    table = pd.read_parquet(out / "designs.parquet")
    assert set(table["verdict"]) <= set(VERDICTS)
    want = dict(zip(table["design"].astype(str), table["verdict"]))
    # the workbook's Designs sheet
    ws = load_workbook(out / f"{stem}.xlsx", read_only=True)["Designs"]
    rows = ws.iter_rows(values_only=True)
    head = list(next(rows))
    d, v = head.index("Design"), head.index("Verdict")
    sheet = {str(r[d]): r[v] for r in rows if r[d] is not None}
    assert sheet == want
    # every other sheet that lists designs: Points (header in row 2), Parts, Check (row 5)
    book = load_workbook(out / f"{stem}.xlsx", read_only=True)
    for name, header_row in (("Points", 2), ("Parts", 1), ("Check", 5)):
        rows = list(book[name].iter_rows(min_row=header_row, values_only=True))
        head = list(rows[0])
        d, v = head.index("Design"), head.index("Verdict")
        seen = {str(r[d]): r[v] for r in rows[1:] if r[d] is not None}
        assert seen and all(want[k] == w for k, w in seen.items()), name
    # the chart page: hover text and how each design is drawn
    page, states = _page_verdicts((out / f"{stem}.html").read_text(encoding="utf-8"))
    assert page and all(want[k] == w for k, w in page.items())
    assert states.get("meets", set()) == {k for k in page if want[k] == "pass"}
    # run.json: the pick's verdict, and meets_spec only for a pass
    info = json.loads((out / "run.json").read_text(encoding="utf-8"))
    pick = table.loc[table["rank"] == 1].iloc[0]
    assert info["verdict"] == pick["verdict"]
    assert info["meets_spec"] is (pick["verdict"] == "pass")
    assert info["yield_lo"] <= info["yield"] <= info["yield_hi"]
    if extra:
        assert info["yield_target"] == 0.9999
        assert (table["yield"] < 1).all()              # the premise of the check
        assert pick["verdict"] == "low yield" and info["meets_spec"] is False
        assert pick["yield_hi"] < 0.9999
    reading = "0.5 sigma" if extra else "one sigma"
    assert info["typical_sigma"] == (0.5 if extra else 1.0) and reading in info["spreads"]
    # the Summary sheet says the same word and the reading of the spreads
    summary = load_workbook(out / f"{stem}.xlsx", read_only=True)["Summary"]
    lines = {r[0]: r[1] for r in summary.iter_rows(values_only=True) if r and r[0]}
    assert lines["Verdict"].split(":")[0].endswith(pick["verdict"]) or \
        f"verdict is {pick['verdict']}" in lines["Verdict"]
    assert reading in lines["Timer spreads"]
    notes = load_workbook(out / f"{stem}.xlsx", read_only=True)["Notes"]
    topics = {r[0]: r[1] for r in notes.iter_rows(values_only=True) if r and r[0]}
    assert reading in topics["Timer spreads"]
