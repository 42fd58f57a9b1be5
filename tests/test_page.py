"""The chart page: self-contained, escaped, complete, and drawn by a real browser.

The browser test loads the page in headless Chromium (a program timer-sweep did not write) and
checks that plotly really drew every chart with no script error.
"""
from __future__ import annotations

import dataclasses
import html
import os
import pathlib
import re

import numpy as np
import pytest

from sweep.report import SpecRow
from sweep.writers import page
from sweep.writers.page import HEADINGS, build_sections, pareto_frontier, write_page
from tests.fake_report import make_report

HOSTILE = "<script>alert(1)</script>&\"'"
CHROMIUM = "/usr/bin/chromium"
CHROMIUM_ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
                 "--disable-background-networking", "--disable-component-update",
                 "--disable-sync"]


def hostile_report():
    r = make_report(title=HOSTILE)
    r.summary.append(("<i>note</i>", "a < b & c > d"))
    r.cautions.append("<img src=x onerror=alert(2)>")
    r.designs.loc[0, "flags"] = "spec-miss <b onmouseover=alert(3)>x</b>"
    return r


def bistable_report():
    """No timing output: no main output, no Monte Carlo, no temperature curves, no spec."""
    r = make_report()
    drop = [c for c in r.designs.columns if c.startswith(("frequency", "duty", "yield"))]
    return dataclasses.replace(r, circuit="bistable", main_output=None, part_columns=[],
                               mc_samples=None, temperature_curves=None, spec=[],
                               designs=r.designs.drop(columns=drop))


def map_points(fig):
    """Design numbers drawn as data marks on the design map (legend-only entries carry none)."""
    return [row[0] for t in fig.data if t.customdata is not None for row in t.customdata]


# --- the file ----------------------------------------------------------------------------------
def test_page_is_self_contained_complete_and_escaped(tmp_path):
    out = tmp_path / "demo.html"
    write_page(out, hostile_report())
    text = out.read_text(encoding="utf-8")
    # self-contained: no script fetched from the network (offline use)
    assert '<script src="http' not in text
    assert not re.search(r"<script[^>]*\ssrc=", text)
    # plotly's library is embedded exactly once, and every chart is created
    assert len(re.findall(r"\* plotly\.js v\d+\.\d+\.\d+", text)) == 1
    assert text.count("Plotly.newPlot(") == 6
    for heading in HEADINGS.values():
        assert f"<h2>{html.escape(heading)}</h2>" in text
    # user text appears only escaped: a page that pasted it raw would run it
    assert "<script>alert(1)" not in text
    assert html.escape(HOSTILE) in text
    assert "<img src=x" not in text and "&lt;img src=x onerror=alert(2)&gt;" in text
    assert "<i>note</i>" not in text and "a &lt; b &amp; c &gt; d" in text
    assert "<b onmouseover" not in text
    assert "Cautions" in text
    assert not list(tmp_path.glob("*.tmp")), "temporary file left behind"


def test_sections_missing_data_are_skipped_with_a_sentence(tmp_path):
    out = tmp_path / "latch.html"
    write_page(out, bistable_report())
    text = out.read_text(encoding="utf-8")
    for heading in HEADINGS.values():
        assert f"<h2>{html.escape(heading)}</h2>" in text
    # every section of this report lacks its data: none may draw an empty chart
    assert text.count("Not shown:") == 6
    assert "Plotly.newPlot(" not in text
    assert "only a free-running (astable) circuit has a duty cycle" in text


def test_failed_write_keeps_the_old_file_and_leaves_no_temporary(tmp_path, monkeypatch):
    out = tmp_path / "demo.html"
    out.write_text("old page", encoding="utf-8")

    def broken_replace(src, dst):
        raise OSError("disk full")

    import sweep.writers.atomic as atomic
    monkeypatch.setattr(atomic.os, "replace", broken_replace)
    with pytest.raises(OSError):
        write_page(out, make_report())
    assert out.read_text(encoding="utf-8") == "old page"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["demo.html"]


# --- what the charts hold ----------------------------------------------------------------------
def test_hover_and_ticks_use_engineering_notation():
    r = make_report(n_designs=40)
    fig = next(s.figure for s in build_sections(r) if s.key == "map")
    row = next(t.customdata[0] for t in fig.data if t.customdata is not None)
    design = r.designs.set_index("design").loc[int(row[0])]
    # common practice: 4700 ohm is written 4.7 kΩ, 1e-7 F is 100 nF
    expected = {4.7e3: "4.7 kΩ", 1e3: "1 kΩ", 2.2e3: "2.2 kΩ", 10e3: "10 kΩ", 22e3: "22 kΩ",
                47e3: "47 kΩ", 100e3: "100 kΩ", 100e-9: "100 nF", 220e-9: "220 nF",
                470e-9: "470 nF"}
    assert list(row[2:5]) == [expected[design["ra_ohm"]], expected[design["rb_ohm"]],
                              expected[design["c_f"]]]
    assert fig.layout.xaxis.type == "log" and fig.layout.yaxis.type == "log"
    assert "4.7 kΩ" in fig.layout.xaxis.ticktext or "4.7 kΩ" in fig.layout.yaxis.ticktext
    duty = next(s.figure for s in build_sections(r) if s.key == "duty")
    assert duty.layout.xaxis.type == "log"


def test_map_rings_exactly_the_designs_whose_nominal_is_in_spec():
    r = make_report(n_designs=60)
    r.spec = [SpecRow("frequency", "frequency_hz", 50.0, 150.0, 100.0)]
    fig = next(s.figure for s in build_sections(r) if s.key == "map")
    rings = [t for t in fig.data if t.legendgroup == "spec" and t.x is not None and len(t.x)
             and t.x[0] is not None]
    got = sorted(zip(np.concatenate([t.x for t in rings]), np.concatenate([t.y for t in rings])))
    d = r.designs
    inside = d[(d["frequency_hz_nom"] >= 50.0) & (d["frequency_hz_nom"] <= 150.0)]
    assert 0 < len(inside) < len(d)
    assert got == sorted(zip(inside["ra_ohm"], inside["rb_ohm"]))


def test_many_values_of_the_third_part_give_a_dropdown():
    r = make_report(n_designs=200)
    values = np.array([1e-9, 2.2e-9, 4.7e-9, 10e-9, 22e-9, 47e-9, 100e-9, 220e-9])
    r.designs["c_f"] = values[np.arange(len(r.designs)) % len(values)]
    fig = next(s.figure for s in build_sections(r) if s.key == "map")
    buttons = fig.layout.updatemenus[0].buttons
    assert [b.label for b in buttons] == ["C = 1 nF", "C = 2.2 nF", "C = 4.7 nF", "C = 10 nF",
                                          "C = 22 nF", "C = 47 nF", "C = 100 nF", "C = 220 nF"]
    c_of = r.designs.set_index("design")["c_f"]
    for b, value in zip(buttons, values):
        shown = [t for t, vis in zip(fig.data, b.args[0]["visible"])
                 if vis and t.customdata is not None]
        designs = [int(row[0]) for t in shown for row in t.customdata]
        assert designs and all(c_of[n] == value for n in designs)


def test_cap_keeps_the_best_ranked_and_says_so(monkeypatch):
    monkeypatch.setattr(page, "MAX_DESIGNS", 5)
    r = make_report(n_designs=30)
    sections = {s.key: s for s in build_sections(r)}
    best = set(r.designs.loc[r.designs["rank"] <= 5, "design"].astype(str))
    assert set(map_points(sections["map"].figure)) == best
    assert "30 designs" in sections["map"].note and "5 best-ranked" in sections["map"].note
    assert len(sections["parallel"].figure.data[0].dimensions[0].values) == 5


def brute_force_frontier(current, yld):
    """Definition, written plainly: no other design has current <= and yield >=, one strictly."""
    n = len(current)
    return np.array([not any((current[j] <= current[i]) and (yld[j] >= yld[i])
                             and ((current[j] < current[i]) or (yld[j] > yld[i]))
                             for j in range(n) if j != i) for i in range(n)])


def test_frontier_matches_the_definition():
    rng = np.random.default_rng(11)
    for _ in range(20):
        current, yld = rng.uniform(1e-3, 5e-3, 40), rng.uniform(0, 1, 40)
        assert (pareto_frontier(current, yld) == brute_force_frontier(current, yld)).all()
    # a hand example: (1 mA, 50 %), (2 mA, 90 %) on it; (3 mA, 80 %) beaten by (2 mA, 90 %)
    got = pareto_frontier(np.array([1e-3, 2e-3, 3e-3, np.nan]), np.array([0.5, 0.9, 0.8, 1.0]))
    assert got.tolist() == [True, True, False, False]


# --- a real browser --------------------------------------------------------------------------
def _require_browser():
    missing = []
    try:
        import playwright.sync_api  # noqa: F401
    except ImportError:
        missing.append("the Python package playwright")
    if not os.path.exists(CHROMIUM):
        missing.append(f"Chromium at {CHROMIUM}")
    if missing:
        why = "the headless browser test needs " + " and ".join(missing)
        if os.environ.get("CI", "").strip().lower() not in ("", "0", "false"):
            pytest.fail(why + "; CI is set, so this is an error, not a skip")
        pytest.skip(why)


def test_page_draws_every_chart_in_headless_chromium(tmp_path):
    _require_browser()
    from playwright.sync_api import sync_playwright

    report = hostile_report()
    out = tmp_path / "demo.html"
    write_page(out, report)
    figures = sum(s.figure is not None for s in build_sections(report))
    assert figures == 6
    problems, dialogs, requests = [], [], []
    with sync_playwright() as pw:
        browser = pw.chromium.launch(executable_path=CHROMIUM, args=CHROMIUM_ARGS)
        try:
            tab = browser.new_page(viewport={"width": 1280, "height": 900})
            tab.on("console", lambda m: problems.append(m.text) if m.type == "error" else None)
            tab.on("pageerror", lambda e: problems.append(str(e)))
            tab.on("dialog", lambda d: (dialogs.append(d.message), d.dismiss()))
            tab.on("request", lambda q: requests.append(q.url))
            tab.goto(pathlib.Path(out).resolve().as_uri())
            tab.wait_for_function(
                """n => {
                    const plots = document.querySelectorAll('.chart .js-plotly-plot');
                    return plots.length === n && [...plots].every(
                        p => p.querySelector('svg.main-svg') && p._fullData && p._fullData.length);
                }""", arg=figures, timeout=120_000)
            counts = tab.evaluate("""() => ({
                plots: document.querySelectorAll('.js-plotly-plot').length,
                charts: document.querySelectorAll('.chart').length,
                drawn: [...document.querySelectorAll('.js-plotly-plot')]
                         .filter(p => p.querySelector('svg.main-svg')).length,
                title: document.querySelector('h1').textContent})""")
            shot = tmp_path / "page.png"
            tab.screenshot(path=str(shot), full_page=True)
        finally:
            browser.close()
    assert problems == []
    assert dialogs == [], "user text ran as script"
    assert counts["plots"] == counts["charts"] == counts["drawn"] == figures
    assert counts["title"] == HOSTILE
    assert all(u.startswith(("file:", "data:", "blob:", "about:")) for u in requests), requests
    assert shot.stat().st_size > 50_000
