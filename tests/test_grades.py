"""Part grades as design axes: each grade is evaluated with its own parts, the pick is the
cheapest grade that reaches the yield target, and the outputs show yield against cost."""
from __future__ import annotations

import math

import numpy as np
import openpyxl
import pandas as pd
import pytest
from scipy.stats import norm

from sweep.grades import load_table
from sweep.pipeline import run_study
from sweep.study import parse_study

from .cli_helpers import cli

PULSE = math.log(3) * 100e3 * 1e-6      # [book] monostable t = ln3 R C, 100 kOhm and 1 uF
WINDOW = 0.04                           # the spec: +-4 % around it


def grade_study(key: str, grades: list[str], fixed: str, target: float, builds: int = 4096) -> str:
    return f"""
[study]
circuit = "monostable"
timer = "cmos"
[design]
r = ["100k"]
c = ["1u"]
{key} = {grades!r}
[parts]
capacitor = "C0G"
{fixed} = "0%"
[spec]
pulse_width = {{ target = {PULSE!r}, tolerance = "{WINDOW * 100:g}%" }}
yield = {{ min = {target} }}
[analysis]
monte_carlo = {builds}
""".replace("'", '"')


def normal_yield(tol: float) -> float:
    """[book: the normal distribution] In ideal mode the pulse is ln3 R C (1 + d) with d normal,
    sigma = tol / 3, clipped at +-tol (the only varied part); the share within +-WINDOW is
    2 Phi(3 WINDOW / tol) - 1, and 1 once the clip lies inside the window."""
    return 1.0 if tol <= WINDOW else float(2 * norm.cdf(3 * WINDOW / tol) - 1)


CASES = [  # (grade key, grades, the key fixed at 0 %, yield target)
    ("resistor_tolerance", ["1%", "5%", "10%"], "capacitor_tolerance", 0.95),
    ("resistor_tolerance", ["1%", "5%", "10%"], "capacitor_tolerance", 0.995),
    ("resistor_tolerance", ["0.1%", "1%"], "capacitor_tolerance", 0.9),
    ("capacitor_tolerance", ["1%", "5%", "20%"], "resistor_tolerance", 0.9),
    ("capacitor_tolerance", ["2%", "5%", "20%"], "resistor_tolerance", 0.995),
    ("capacitor_tolerance", ["5%", "20%"], "resistor_tolerance", 0.3),
]


@pytest.mark.slow
@pytest.mark.parametrize("key,grades,fixed,target", CASES)
def test_the_cheapest_grade_that_reaches_the_target_is_picked(key, grades, fixed, target, tmp_path):
    table = load_table()[key]
    st = parse_study(grade_study(key, grades, fixed, target), str(tmp_path / "g.toml"))
    assert st.n_designs == len(grades)
    res = run_study(st, tmp_path / "out", ideal=True)
    d = res.designs.sort_values("rank")
    # the Monte Carlo yield of each grade follows the normal distribution [book]
    for g in grades:
        tol = float(g.rstrip("%")) / 100
        row = d[d["grade_label"].str.endswith(f"{tol * 100:g} %")].iloc[0]
        assert row["yield"] == pytest.approx(normal_yield(tol), abs=0.01)
    expected = {g: normal_yield(float(g.rstrip("%")) / 100) for g in grades}
    reach = [g for g in grades if expected[g] >= target + 0.005]   # clear of Monte Carlo noise
    assert reach, "the fixture must have a grade that reaches the target"
    cheapest = min(table[g].cost for g in reach)
    pick = d.iloc[0]
    picked = next(g for g in grades if pick["grade_label"].endswith(f"{float(g.rstrip('%')):g} %"))
    assert table[picked].cost == cheapest
    # never a finer (smaller-tolerance) grade that costs more while a coarser one reaches it
    coarser = [g for g in reach if float(g.rstrip("%")) > float(picked.rstrip("%"))]
    assert all(table[g].cost >= table[picked].cost for g in coarser)
    assert pick["verdict"] == "pass"


@pytest.mark.slow
def test_each_grade_equals_its_own_plain_study(tmp_path):
    # the grade axis must route each design to its own parts: every grade's figures equal those
    # of a separate study with that grade in [parts]
    base = """
[study]
circuit = "astable"
timer = "bipolar"
[design]
ra = {{ series = "E12", min = "1k", max = "4.7k" }}
rb = {{ series = "E12", min = "4.7k", max = "10k" }}
c = ["10n", "22n"]
{grade}
[conditions]
vcc = {{ min = 4.5, max = 5.5, steps = 2 }}
temperature = {{ min = -10, max = 50, steps = 2, nominal = 25 }}
[parts]
capacitor_voltage = "16V"
{parts}
[spec]
frequency = {{ target = "5kHz", tolerance = "10%" }}
[analysis]
monte_carlo = 200
"""
    graded = parse_study(base.format(grade='capacitor = ["C0G", "Y5V"]\ncapacitor_tolerance = ["5%", "20%"]',
                                     parts=""))
    res = run_study(graded, tmp_path / "g", chunk=37)          # blocks straddle the grades
    got = pd.read_parquet(tmp_path / "g" / "designs.parquet").sort_values("design")
    assert len(got) == graded.n_designs == 4 * graded.grade_plan[0].n_designs
    assert got["design"].tolist() == list(range(1, graded.n_designs + 1))
    n = graded.grade_plan[0].n_designs
    for i, (tech, tol) in enumerate([("C0G", "5%"), ("C0G", "20%"), ("Y5V", "5%"), ("Y5V", "20%")]):
        plain = parse_study(base.format(grade="", parts=f'capacitor = "{tech}"\ncapacitor_tolerance = "{tol}"'))
        run_study(plain, tmp_path / f"p{i}")
        want = pd.read_parquet(tmp_path / f"p{i}" / "designs.parquet").sort_values("design")
        part = got.iloc[i * n:(i + 1) * n]
        assert (part["capacitor"] == tech).all() and (part["capacitor_tolerance"] == tol.replace("%", " %")).all()
        for col in ("frequency_hz_nom", "frequency_hz_wc_min", "frequency_hz_wc_max", "duty_nom",
                    "supply_current_a_max", "yield", "frequency_hz_mc_std"):
            np.testing.assert_allclose(part[col].to_numpy(float), want[col].to_numpy(float),
                                       rtol=1e-12, equal_nan=True, err_msg=col)
    # Y5V loses most of its value cold and hot (EIA-198: +22/-82 %) [std], so its grades
    # spread wider than C0G's
    spread = got["frequency_hz_max"] / got["frequency_hz_min"]
    assert spread[got["capacitor"] == "Y5V"].min() > spread[got["capacitor"] == "C0G"].max()


@pytest.mark.slow
def test_resistor_series_grade_takes_the_series_values(tmp_path):
    import eseries
    st = parse_study("""
[study]
circuit = "monostable"
[design]
r = { series = "E12", min = "10k", max = "100k" }
c = ["1u"]
resistor_series = ["E12", "E96"]
[spec]
pulse_width = { target = "30ms", tolerance = "5%" }
""")
    e12, e96 = (g.study for g in st.grade_plan)
    r12 = next(a for a in e12.design if a.key == "r").values
    r96 = next(a for a in e96.design if a.key == "r").values
    # [std IEC 60063, via the outside eseries package]
    assert list(r12) == pytest.approx(list(eseries.erange(eseries.E12, 10e3, 100e3 * 1.0001)))
    assert list(r96) == pytest.approx(list(eseries.erange(eseries.E96, 10e3, 100e3 * 1.0001)))
    # the tolerance follows the series [std IEC 60063]: E12 10 %, E96 1 %
    assert (e12.parts.resistor_tolerance, e96.parts.resistor_tolerance) == (0.10, 0.01)
    assert st.n_designs == len(r12) + len(r96)


@pytest.mark.slow
def test_outputs_show_yield_against_cost(tmp_path):
    st = parse_study(grade_study("resistor_tolerance", ["1%", "5%", "10%"], "capacitor_tolerance",
                                 0.95, 1024), str(tmp_path / "g.toml"))
    res = run_study(st, tmp_path, ideal=True)
    wb = openpyxl.load_workbook(res.files["workbook"])
    rows = [r for r in wb["Summary"].iter_rows(values_only=True)]
    labels = [r[0] for r in rows]
    assert "Cheapest grade reaching the yield target" in labels
    answer = rows[labels.index("Cheapest grade reaching the yield target")][1]
    assert answer.startswith("R 5 %") and "[cp]" in answer
    i = labels.index("Grade")
    table = rows[i + 1:i + 4]
    assert {r[0] for r in table} == {"R 1 %", "R 5 %", "R 10 %"}
    assert any("rough common-practice figures [cp]" in str(r[0]) for r in rows)
    heads = [c.value for c in wb["Designs"][1]]
    assert "Grade name" in heads and "Cost index" in heads
    page = res.files["page"].read_text()
    assert "Yield against the cost of part grades" in page
    assert "error from the target [%]" in page


@pytest.mark.parametrize("design,parts,words", [
    ('resistor_tolerance = ["1%", "1%"]', "", "repeats"),
    ('capacitor = ["X7R", "unobtainium"]', "", "unknown capacitor"),
    ('resistor_series = ["E7"]', "", "unknown series"),
    ('capacitor_tolerance = ["3%"]', "", "grade table"),
    ('capacitor = ["X7R", "C0G"]', 'capacitor = "X7R"', "both"),
])
def test_bad_grades_are_clear_errors(design, parts, words, tmp_path, capsys):
    p = tmp_path / "bad.toml"
    p.write_text(f"""
[study]
circuit = "monostable"
[design]
r = ["100k"]
c = ["1u"]
{design}
[parts]
{parts}
""")
    code, _, err = cli(["check", str(p)], capsys)
    assert code == 2 and words in err and "bad.toml" in err and "Traceback" not in err


@pytest.mark.slow
def test_grades_in_two_processes_equal_serial(tmp_path):
    from sweep.parallel import process_mapper
    text = grade_study("resistor_tolerance", ["1%", "5%", "10%"], "capacitor_tolerance", 0.95, 256)
    text = text.replace('r = ["100k"]', 'r = { series = "E24", min = "82k", max = "120k" }')
    text = text.replace('c = ["1u"]', 'c = ["1u", "1.5u"]')
    st = parse_study(text, str(tmp_path / "g.toml"))
    run_study(st, tmp_path / "serial", chunk=5)
    run_study(st, tmp_path / "two", chunk=7, mapper=process_mapper(2))
    for name in ("designs.parquet", "points.parquet"):
        pd.testing.assert_frame_equal(pd.read_parquet(tmp_path / "serial" / name),
                                      pd.read_parquet(tmp_path / "two" / name))


def test_too_many_grade_combinations_are_refused(tmp_path, capsys):
    p = tmp_path / "many.toml"
    tols = [f"{x / 10:g}%" for x in range(1, 100)]
    p.write_text(f"""
[study]
circuit = "monostable"
[design]
r = ["100k"]
c = ["1u"]
resistor_tolerance = {tols!r}
""".replace("'", '"'))
    code, _, err = cli(["check", str(p)], capsys)
    assert code == 2 and "limit is 64" in err and "design.resistor_tolerance" in err


def test_design_map_colour_is_the_percent_error_from_the_target():
    from sweep.report import SpecRow
    from sweep.writers.page import build_sections
    from tests.fake_report import make_report
    r = make_report(n_designs=40)
    r.spec = [SpecRow("frequency", "frequency_hz", 90.0, 110.0, 100.0)]     # +-10 % window
    fig = next(s.figure for s in build_sections(r) if s.key == "map")
    nom = dict(zip(r.designs["design"].astype(str), r.designs["frequency_hz_nom"]))
    coloured = [t for t in fig["data"] if t.get("customdata") is not None
                and t["marker"].get("coloraxis") == "coloraxis"]
    assert coloured
    for t in coloured:
        want = [(nom[row[0]] / 100.0 - 1.0) * 100.0 for row in t["customdata"]]
        np.testing.assert_allclose(np.asarray(t["marker"]["color"], float), want, rtol=1e-9)
    cax = fig["layout"]["coloraxis"]
    assert (cax["cmin"], cax["cmax"]) == pytest.approx((-20.0, 20.0))   # twice the window each side
    assert "error from the target" in cax["colorbar"]["title"]["text"]
