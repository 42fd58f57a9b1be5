"""The chart page: self-contained, escaped, complete, and drawn by a real browser.

The browser test loads the page in headless Chromium (a program timer-sweep did not write) and
checks that plotly really drew every chart with no script error.
"""
from __future__ import annotations

import base64
import copy
import dataclasses
import html
import json
import os
import pathlib
import re
import subprocess
import sys

import numpy as np
import pandas as pd
import pytest

from sweep.reporting import circuit_text
from sweep.report import SpecRow
from sweep.writers import page
from sweep.writers.page import (HEADINGS, build_sections, map_states, pareto_frontier,
                                parallel_order, write_page)
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
    return dataclasses.replace(r, circuit="bistable", circuit_text=circuit_text("bistable"), main_output=None, part_columns=[],
                               mc_samples=None, temperature_curves=None, spec=[],
                               designs=r.designs.drop(columns=drop))


def latch_report():
    """A bistable study as the pipeline reports it: no parts chosen, one design, the supply
    current as the output followed, Monte Carlo builds at every condition (100 x 9)."""
    r = make_report()
    keep = ["design", "supply_current_a_nom", "supply_current_a_max", "yield", "feasible", "rank",
            "flags"]
    designs = r.designs[keep].head(1).assign(rank=1, feasible=True, **{"yield": 1.0})
    rng = np.random.default_rng(5)
    vcc = np.repeat([4.75, 5.0, 5.25], 3)
    mc = pd.DataFrame({"value": np.tile(vcc * 2.6e-3, 100) + rng.normal(0, 1e-5, 900)})
    tc = pd.DataFrame([{"rank": 1, "vcc_v": v, "temperature_c": t, "value": v * 2.6e-3 + 1e-6 * t}
                       for v in (4.75, 5.0, 5.25) for t in (15.0, 25.0, 35.0)])
    return dataclasses.replace(
        r, circuit="bistable", circuit_text=circuit_text("bistable"), main_output="supply_current_a", part_columns=[], designs=designs,
        mc_samples=mc, temperature_curves=tc,
        spec=[SpecRow("supply_current", "supply_current_a", -np.inf, 0.04)],
        run_info={"version": "test", "seed": 1, "monte_carlo": 100, "conditions": 9})


def luminance(hex_colour: str) -> float:
    """Relative luminance of an sRGB colour, 0 black to 1 white (WCAG 2.x definition)."""
    rgb = [int(hex_colour[i:i + 2], 16) / 255 for i in (1, 3, 5)]
    lin = [c / 12.92 if c <= 0.04045 else ((c + 0.055) / 1.055) ** 2.4 for c in rgb]
    return 0.2126 * lin[0] + 0.7152 * lin[1] + 0.0722 * lin[2]


def shown(fig):
    """The traces of a figure (plotly's figure JSON) that draw designs: legend-only entries
    carry no hover data."""
    return [t for t in fig["data"] if t.get("customdata") is not None]


def map_points(fig):
    """Design numbers drawn as data marks on the design map."""
    return [row[0] for t in shown(fig) for row in t["customdata"]]


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
    assert text.count("Not shown:") == len(HEADINGS)
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
    row = shown(fig)[0]["customdata"][0]
    design = r.designs.set_index("design").loc[int(row[0])]
    # common practice: 4700 ohm is written 4.7 kΩ, 1e-7 F is 100 nF
    expected = {4.7e3: "4.7 kΩ", 1e3: "1 kΩ", 2.2e3: "2.2 kΩ", 10e3: "10 kΩ", 22e3: "22 kΩ",
                47e3: "47 kΩ", 100e3: "100 kΩ", 100e-9: "100 nF", 220e-9: "220 nF",
                470e-9: "470 nF"}
    assert list(row[2:5]) == [expected[design["ra_ohm"]], expected[design["rb_ohm"]],
                              expected[design["c_f"]]]
    xaxis, yaxis = fig["layout"]["xaxis"], fig["layout"]["yaxis"]
    assert xaxis["type"] == "log" and yaxis["type"] == "log"
    assert "4.7 kΩ" in xaxis["ticktext"] or "4.7 kΩ" in yaxis["ticktext"]
    duty = next(s.figure for s in build_sections(r) if s.key == "duty")
    assert duty["layout"]["xaxis"]["type"] == "log"


def test_map_draws_each_design_in_its_state_and_the_states_apart_without_colour():
    r = make_report(n_designs=60)
    r.spec = [SpecRow("frequency", "frequency_hz", 50.0, 150.0, 100.0)]
    fig = next(s.figure for s in build_sections(r) if s.key == "map")
    d = r.designs
    inside = (d["frequency_hz_nom"] >= 50.0) & (d["frequency_hz_nom"] <= 150.0)
    # the three states, written plainly from their definitions
    passes = d["verdict"] == "pass"          # the analysis's verdict, not the page's own reading
    want = {"meets": set(d.loc[passes, "design"].astype(str)),
            "near": set(d.loc[inside & ~passes, "design"].astype(str)),
            "breaks": set(d.loc[~inside & ~passes, "design"].astype(str))}
    assert all(want.values()), "the example must have designs in every state"
    drawn = [t for t in shown(fig) if t["legendgroup"] in want]
    got = {k: {row[0] for t in drawn if t["legendgroup"] == k for row in t["customdata"]}
           for k in want}
    assert got == want
    style = {t["legendgroup"]: t["marker"] for t in drawn}
    # told apart by size, fill and edge, not by colour alone (colour-blind readers)
    assert style["breaks"]["size"] < style["near"]["size"] <= style["meets"]["size"]
    assert style["breaks"]["opacity"] < 1 and not style["breaks"]["line"]["width"]
    assert style["near"]["symbol"] == "circle-open" and style["meets"]["symbol"] == "circle"
    assert style["meets"]["line"]["width"] >= 1 and style["meets"]["line"]["color"] == "#000000"
    # in every panel the good designs are drawn after (on top of) the faded ones
    for panel in {t["xaxis"] for t in drawn}:
        order = [t["legendgroup"] for t in drawn if t["xaxis"] == panel]
        later = [k for k in ("near", "meets") if k in order]
        if "breaks" in order and later:
            assert order.index("breaks") < min(order.index(k) for k in later)
    # the text describes what is drawn, and never the rings that used to hide the marks
    explain = next(s.explain for s in build_sections(r) if s.key == "map")
    assert "filled" in explain and "ring" in explain and "faded" in explain
    assert "round marks" not in explain.lower()


def test_map_states_at_realistic_density():
    r = make_report(n_designs=3000)
    ds = page._designs(r)
    states = map_states(r, ds)
    assert set(states) <= {"meets", "near", "breaks", "blank"}
    assert (states[ds.passes] == "meets").all()
    lo, hi = 1.8, 2.2                       # the fake report's frequency spec
    nominal = ds.table["frequency_hz_nom"].to_numpy()
    outside = (nominal < lo) | (nominal > hi)
    assert (states[outside & ~ds.passes] == "breaks").all()
    # the marks shrink with the grid but stay visible
    fig = next(s.figure for s in build_sections(r) if s.key == "map")
    sizes = [t["marker"]["size"] for t in shown(fig)]
    assert min(sizes) >= 3


def test_map_axis_titles_sit_on_the_axes_held_off_the_ticks():
    fig = next(s.figure for s in build_sections(make_report(n_designs=60)) if s.key == "map")
    # titles placed as free annotations at a fixed distance ran into long tick labels
    layout = fig["layout"]
    assert not any(a["text"] in ("RA [Ω]", "RB [Ω]") for a in layout.get("annotations", []))
    ytitle = layout["yaxis"]["title"]
    assert ytitle["text"] == "RB [Ω]" and ytitle["standoff"] >= 8
    bottom = [layout[k]["title"] for k in layout if k.startswith("xaxis") and "title" in layout[k]]
    assert any(t["text"] == "RA [Ω]" and t["standoff"] >= 8 for t in bottom)
    assert layout["template"]["layout"]["yaxis"]["automargin"]    # the margin grows to hold them


def test_parallel_lines_put_the_good_designs_on_top_in_dark_colours():
    r = make_report(n_designs=200)
    pc = next(s.figure for s in build_sections(r) if s.key == "parallel")["data"][0]
    colours = np.asarray(pc["line"]["color"], dtype=float)
    # drawn in rising yield, so the best lines come last and lie on top
    assert (np.diff(colours) >= 0).all()
    assert colours[-1] == pytest.approx(r.designs["yield"].max())
    # no yield is pale, full yield dark: a yield of 0 must not be the loudest colour
    scale = pc["line"]["colorscale"]
    assert scale[0][0] == 0 and scale[-1][0] == 1
    assert luminance(scale[0][1]) > 0.7 and luminance(scale[-1][1]) < 0.1
    lum = [luminance(c) for _, c in scale]
    assert lum == sorted(lum, reverse=True)
    # ties: the better rank is drawn later
    assert parallel_order(np.array([0.0, 0.0, 0.9, np.nan]), np.array([1, 2, 3, 4])).tolist() \
        == [3, 1, 0, 2]


def test_page_counts_use_one_thousands_separator(tmp_path):
    r = make_report(n_designs=1200)
    r.summary.append(("Designs evaluated", f"{len(r.designs):,} x 9 conditions"))
    out = tmp_path / "big.html"
    write_page(out, r)
    text = out.read_text(encoding="utf-8")
    assert "<dd>1,200</dd>" in text and "<dd>10,800</dd>" in text
    body = re.sub(r"<script.*?</script>", "", text, flags=re.S)
    assert not re.search(r"\d \d{3}\b", body), "a count written with a space between thousands"


def test_latch_charts_follow_the_supply_current_with_units_and_its_builds():
    r = latch_report()
    sections = {s.key: s for s in build_sections(r)}
    mc = sections["mc"]
    assert mc.figure is not None, mc.note
    # the section says what it shows for a latch, and that the builds are there
    assert "supply current" in mc.explain and "latch" in mc.explain
    assert "no monte carlo" not in (mc.explain + mc.note).lower()
    assert mc.note.startswith("100 builds × 9 conditions = 900 results")
    assert "dashed" not in mc.explain, "the latch spec has no target line to describe"
    # SI quantities carry their unit on every tick (common practice: 40 mA, not 40m)
    ticks = list(mc.figure["layout"]["xaxis"]["ticktext"])
    assert ticks and all(t.endswith(" mA") for t in ticks), ticks
    temp = sections["temperature"].figure
    ticks = list(temp["layout"]["yaxis"]["ticktext"])
    assert ticks and all(t.endswith(" mA") for t in ticks), ticks
    assert "five best-ranked" not in sections["temperature"].explain
    # with Monte Carlo turned off the section says so, and does not blame the circuit
    off = dataclasses.replace(r, mc_samples=None, run_info={"monte_carlo": 0})
    note = next(s.note for s in build_sections(off) if s.key == "mc")
    assert "turned off" in note and "timing" not in note


def test_timer_histogram_and_drift_ticks_carry_hertz():
    sections = {s.key: s for s in build_sections(make_report())}
    for fig, axis in ((sections["mc"].figure, "xaxis"), (sections["temperature"].figure, "yaxis")):
        ticks = list(fig["layout"][axis]["ticktext"])
        assert len(ticks) >= 3 and all(t.endswith("Hz") for t in ticks), ticks


def test_many_values_of_the_third_part_give_a_dropdown():
    r = make_report(n_designs=200)
    values = np.array([1e-9, 2.2e-9, 4.7e-9, 10e-9, 22e-9, 47e-9, 100e-9, 220e-9])
    r.designs["c_f"] = values[np.arange(len(r.designs)) % len(values)]
    fig = next(s.figure for s in build_sections(r) if s.key == "map")
    buttons = fig["layout"]["updatemenus"][0]["buttons"]
    assert [b["label"] for b in buttons] == ["C = 1 nF", "C = 2.2 nF", "C = 4.7 nF", "C = 10 nF",
                                             "C = 22 nF", "C = 47 nF", "C = 100 nF", "C = 220 nF"]
    c_of = r.designs.set_index("design")["c_f"]
    for b, value in zip(buttons, values):
        visible = [t for t, vis in zip(fig["data"], b["args"][0]["visible"])
                   if vis and t.get("customdata") is not None]
        designs = [int(row[0]) for t in visible for row in t["customdata"]]
        assert designs and all(c_of[n] == value for n in designs)


def test_cap_keeps_the_best_ranked_and_says_so(monkeypatch):
    monkeypatch.setattr(page, "MAX_DESIGNS", 5)
    r = make_report(n_designs=30)
    sections = {s.key: s for s in build_sections(r)}
    best = set(r.designs.loc[r.designs["rank"] <= 5, "design"].astype(str))
    assert set(map_points(sections["map"].figure)) == best
    assert "30 designs" in sections["map"].note and "5 best-ranked" in sections["map"].note
    assert len(sections["parallel"].figure["data"][0]["dimensions"][0]["values"]) == 5


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


# --- the charts as the page writes them -------------------------------------------------------
def page_charts(text: str) -> dict[str, tuple[list, dict]]:
    """Chart id -> (data, layout): the figure JSON each ``Plotly.newPlot`` call of a page draws."""
    charts, decoder = {}, json.JSONDecoder()
    for m in re.finditer(r'Plotly\.newPlot\("([^"]+)", ', text):
        data, end = decoder.raw_decode(text, m.end())
        layout, _ = decoder.raw_decode(text, end + 2)
        charts[m.group(1)] = (data, layout)
    return charts


def values(v) -> list:
    """An array of a chart: a list, or plotly.js's typed array (its bytes in base64)."""
    if isinstance(v, dict):
        dtype = {"f8": "<f8", "f4": "<f4", "i1": "i1", "i2": "<i2", "i4": "<i4", "u1": "u1",
                 "u2": "<u2", "u4": "<u4"}[v["dtype"]]
        return np.frombuffer(base64.b64decode(v["bdata"]), dtype=dtype).tolist()
    return list(v)


def test_page_charts_hold_what_the_page_promises(tmp_path):
    r = make_report(n_designs=60)
    out = tmp_path / "demo.html"
    write_page(out, r)
    charts = page_charts(out.read_text(encoding="utf-8"))
    assert list(charts) == ["chart-map", "chart-duty", "chart-yield", "chart-mc",
                            "chart-temperature", "chart-parallel"]
    d = r.designs.set_index("design")
    pick = int(r.designs.loc[r.designs["rank"] == 1, "design"].iloc[0])
    for key, (xcol, ycol) in {"map": ("ra_ohm", "rb_ohm"),
                              "duty": ("frequency_hz_nom", "duty_nom"),
                              "yield": ("supply_current_a_max", "yield")}.items():
        data, layout = charts[f"chart-{key}"]
        # the star is the rank-1 design, drawn where its values are
        stars = [t for t in data if t.get("marker", {}).get("symbol") == "star"
                 and t.get("customdata")]
        assert len(stars) == 1 and stars[0]["name"] == "The pick (rank 1)", key
        assert [int(row[0]) for row in stars[0]["customdata"]] == [pick]
        assert values(stars[0]["x"]) == pytest.approx([d.loc[pick, xcol]], rel=1e-12)
        assert values(stars[0]["y"]) == pytest.approx([d.loc[pick, ycol]], rel=1e-12)
        # every design's hover text: the fields the template names, the design's own verdict
        for t in data:
            if not t.get("customdata"):
                continue
            fields = [int(k) for k in re.findall(r"customdata\[(\d+)\]", t["hovertemplate"])]
            verdict = int(re.search(r"Verdict: %\{customdata\[(\d+)\]\}",
                                    t["hovertemplate"]).group(1))
            assert "RA: %{customdata[" in t["hovertemplate"]
            for row in t["customdata"]:
                assert len(row) == max(fields) + 1
                assert row[verdict] == d.loc[int(row[0]), "verdict"]
    # axis titles carry their units (common practice: quantity [unit])
    def title(key: str, axis: str) -> str:
        return charts[f"chart-{key}"][1][axis]["title"]["text"]

    assert (title("map", "xaxis"), title("map", "yaxis")) == ("RA [Ω]", "RB [Ω]")
    assert title("duty", "xaxis").endswith("[Hz]") and title("yield", "xaxis").endswith("[A]")
    assert title("mc", "xaxis").endswith("[Hz]") and title("temperature", "yaxis").endswith("[Hz]")
    assert title("temperature", "xaxis").endswith("[°C]")
    # the spec (1.8 to 2.2 Hz, target 2 Hz): lines across the histogram and the drift chart
    for key, across in (("mc", "x"), ("temperature", "y")):
        data, layout = charts[f"chart-{key}"]
        other = "y" if across == "x" else "x"
        lines = {(sh[f"{across}0"], sh["line"].get("dash", "solid")) for sh in layout["shapes"]
                 if sh[f"{other}ref"] == f"{other} domain" and sh[f"{other}0"] == 0
                 and sh[f"{other}1"] == 1 and sh[f"{across}0"] == sh[f"{across}1"]}
        assert lines == {(1.8, "solid"), (2.2, "solid"), (2.0, "dash")}, key
        names = [t["name"] for t in data if t.get("legendgroup") == "spec"]
        assert names == ["Spec limits: 1.8 Hz and 2.2 Hz", "Target: 2 Hz"], key


def test_chart_json_is_plotly_figure_json_as_plotly_writes_it():
    """plotly's own figure objects accept every chart (they refuse an unknown property or a
    value of the wrong kind) and write the same JSON the page does."""
    go = pytest.importorskip("plotly.graph_objects")
    import plotly.io as pio
    r = make_report(n_designs=80)
    r.designs.loc[3, "frequency_hz_nom"] = np.nan        # a design whose timing stalls
    sections = [s for s in build_sections(r) if s.figure is not None]
    assert len(sections) == 6
    for s in sections:
        theirs = json.loads(pio.to_json(go.Figure(s.figure), validate=True))
        assert json.loads(page._to_json(s.figure["data"])) == theirs["data"], s.key
        assert json.loads(page._to_json(s.figure["layout"])) == theirs["layout"], s.key


def test_json_writer_encodes_arrays_and_non_numbers_as_plotly_does():
    pytest.importorskip("plotly")
    from _plotly_utils.utils import convert_to_base64
    from plotly.io.json import to_json_plotly
    obj = {"floats": [1.5, float("nan"), float("inf"), -float("inf")],
           "array": np.array([0.1, np.nan, np.inf, -2.0]), "small": np.array([1, -5, 120]),
           "wide": np.array([0, 70_000]), "huge": np.array([0, 2 ** 40]),
           "unsigned": np.array([1, 300], dtype=np.uint64), "grid": np.arange(6.0).reshape(2, 3),
           "text": np.array(["a", "</script><b>"], dtype=object), "empty": np.array([]),
           "scalars": [np.float64(2.5), np.int64(3), np.bool_(True)],
           "label": "</script><script>alert(1)</script>"}
    ours = page._to_json(obj)
    theirs = copy.deepcopy(obj)
    convert_to_base64(theirs)
    assert json.loads(ours) == json.loads(to_json_plotly(theirs))
    assert "</" not in ours and "<script" not in ours      # nothing can close the page's script


@pytest.mark.parametrize("n", [1, 2, 3, 4, 5, 6])
def test_design_map_panels_are_laid_out_as_plotly_lays_out_subplots(n):
    subplots = pytest.importorskip("plotly.subplots")
    ncols = 2 if n == 4 else min(n, 3)
    nrows = -(-n // ncols)
    titles = [f"C = {k} nF" for k in range(n)]
    theirs = subplots.make_subplots(rows=nrows, cols=ncols, shared_xaxes="all",
                                    shared_yaxes="all", subplot_titles=titles,
                                    horizontal_spacing=0.06,
                                    vertical_spacing=0.16 if nrows > 1 else 0.1).to_dict()["layout"]
    theirs.pop("template")
    ours = json.loads(json.dumps(page.map_grid(nrows, ncols, titles)))
    assert _close(ours, theirs), (ours, theirs)


def _close(a, b) -> bool:
    """Equal structures, numbers equal to a relative 1e-12."""
    if isinstance(a, dict) and isinstance(b, dict):
        return a.keys() == b.keys() and all(_close(a[k], b[k]) for k in a)
    if isinstance(a, list) and isinstance(b, list):
        return len(a) == len(b) and all(_close(x, y) for x, y in zip(a, b))
    if isinstance(a, float) or isinstance(b, float):
        return a == pytest.approx(b, rel=1e-12, abs=1e-15)
    return a == b


def test_writing_the_page_loads_no_plotly_python_and_embeds_plotlys_own_script(tmp_path):
    out = tmp_path / "demo.html"
    probe = f"""
import sys
from tests.fake_report import make_report
from sweep.writers.page import write_page
write_page({str(out)!r}, make_report())
print(sorted(m for m in sys.modules if m.split(".")[0] in ("plotly", "_plotly_utils")))
"""
    r = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True, timeout=300,
                       cwd=pathlib.Path(__file__).resolve().parents[2])
    assert r.returncode == 0, r.stderr
    assert r.stdout.strip() == "[]"
    plotly_offline = pytest.importorskip("plotly.offline")
    text = out.read_text(encoding="utf-8")
    assert text.count(plotly_offline.get_plotlyjs()) == 1


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


@pytest.mark.slow
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


# Measured in the browser: every text of a chart lies inside the chart (nothing cut off at the
# edge) and no axis title overlaps a tick label or the legend.
LAYOUT_PROBLEMS = """() => {
    const hit = (a, b) => a.left < b.right - 1 && b.left < a.right - 1 &&
                          a.top < b.bottom - 1 && b.top < a.bottom - 1;
    const shown = e => { const r = e.getBoundingClientRect();
                         return e.textContent.trim() && r.width > 0 && r.height > 0 ? r : null; };
    const out = [];
    for (const plot of document.querySelectorAll('.chart .js-plotly-plot')) {
        const svg = plot.querySelector('svg.main-svg').getBoundingClientRect();
        const texts = [...plot.querySelectorAll('svg text')].filter(shown);
        for (const t of texts) {
            const r = t.getBoundingClientRect();
            if (r.left < svg.left - 1 || r.right > svg.right + 1)
                out.push(`${plot.id}: "${t.textContent}" runs past the chart's edge`);
        }
        const titles = [...plot.querySelectorAll(
            '.g-xtitle text, .g-ytitle text, .annotation-text')].filter(shown);
        const ticks = [...plot.querySelectorAll('.xtick text, .ytick text')].filter(shown);
        const legends = [...plot.querySelectorAll('.legend .bg')].filter(
            e => e.getBoundingClientRect().width > 0);
        for (const t of titles) {
            for (const k of ticks.concat(legends))
                if (hit(t.getBoundingClientRect(), k.getBoundingClientRect()))
                    out.push(`${plot.id}: title "${t.textContent}" overlaps ` +
                             `"${k.textContent || 'the legend'}"`);
        }
    }
    return out;
}"""


@pytest.mark.slow
def test_chart_labels_are_neither_cut_off_nor_overlapping_in_chromium(tmp_path):
    _require_browser()
    from playwright.sync_api import sync_playwright

    dense = make_report(n_designs=600)
    # RB over 17 values from 100 kΩ to 2.2 MΩ: round ticks, one ("500 kΩ") beside the middle of
    # the axis, where a title set at a fixed distance from the plot used to cover it
    dense.designs["rb_ohm"] = np.geomspace(100e3, 2.2e6, 17)[np.arange(600) % 17]
    pages = {"dense": dense, "latch": latch_report()}
    with sync_playwright() as pw:
        browser = pw.chromium.launch(executable_path=CHROMIUM, args=CHROMIUM_ARGS)
        try:
            tab = browser.new_page(viewport={"width": 1280, "height": 900})
            for name, report in pages.items():
                out = tmp_path / f"{name}.html"
                write_page(out, report)
                figures = sum(s.figure is not None for s in build_sections(report))
                tab.goto(out.resolve().as_uri())
                tab.wait_for_function(
                    """n => [...document.querySelectorAll('.chart .js-plotly-plot')].filter(
                           p => p.querySelector('svg.main-svg') && p._fullData).length === n""",
                    arg=figures, timeout=120_000)
                assert tab.evaluate(LAYOUT_PROBLEMS) == [], name
        finally:
            browser.close()


def test_the_embedded_plotly_js_reads_the_arrays_the_page_writes():
    # the page writes numeric arrays as plotly.js's base64 typed arrays ({"dtype", "bdata"});
    # the plotly package 5.19 (pyproject's floor) bundles plotly.js 2.29.1, which decodes them;
    # 5.18's bundle (plotly.js 2.27.0) has no decoder and would draw empty charts [checked by
    # reading both bundles]
    head = page._plotly_js()[:200]
    version = tuple(int(x) for x in re.search(r"plotly\.js v(\d+)\.(\d+)\.(\d+)", head).groups())
    assert version >= (2, 29, 1), version
