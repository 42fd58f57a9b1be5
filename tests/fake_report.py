"""A small Report built straight from the physics, for writer tests that must not depend on the
whole pipeline. Values are computed by sweep.physics, so ideal figures match the textbook."""
from __future__ import annotations

import numpy as np
import pandas as pd

from sweep.models import load_timer
from sweep.physics import Load, Parts, evaluate
from sweep.report import Report, SpecRow
from sweep.reporting import circuit_text


def make_report(title: str = "Demo flasher (invented scenario)", n_designs: int = 12) -> Report:
    timer = load_timer("bipolar")
    parts, load = Parts(), Load(330.0, "ground", 2.0)
    rng = np.random.default_rng(3)
    ra = rng.choice([1e3, 2.2e3, 4.7e3, 10e3, 22e3], n_designs)
    rb = rng.choice([10e3, 22e3, 47e3, 100e3], n_designs)
    c = rng.choice([100e-9, 220e-9, 470e-9], n_designs)
    vcc = np.array([6.0, 9.0, 12.0])
    temp = np.array([-10.0, 25.0, 40.0])
    V, T = np.meshgrid(vcc, temp, indexing="ij")
    V, T = V.ravel()[None, :], T.ravel()[None, :]
    out = evaluate("astable", timer, parts, load, vcc=V, temperature=T, ra=ra[:, None],
                   rb=rb[:, None], c=c[:, None])
    ideal = evaluate("astable", timer, parts, load, vcc=9.0, temperature=25.0, ra=ra, rb=rb, c=c,
                     ideal=True)
    real = evaluate("astable", timer, parts, load, vcc=9.0, temperature=25.0, ra=ra, rb=rb, c=c)
    nd, nc = V.shape[1] and n_designs, V.shape[1]
    pts = pd.DataFrame({
        "design": np.repeat(np.arange(1, nd + 1), nc), "condition": np.tile(np.arange(1, nc + 1), nd),
        "ra_ohm": np.repeat(ra, nc), "rb_ohm": np.repeat(rb, nc), "c_f": np.repeat(c, nc),
        "vcc_v": np.tile(V[0], nd), "temperature_c": np.tile(T[0], nd)})
    for k, v in out.items():
        if k != "flag_mask":
            pts[k] = np.asarray(v).ravel()
    pts["flags"] = np.where(pts["frequency_hz"] > 20, "spec-miss", "")
    pts["ok"] = pts["flags"] == ""
    f = out["frequency_hz"]
    designs = pd.DataFrame({"design": np.arange(1, nd + 1), "ra_ohm": ra, "rb_ohm": rb, "c_f": c,
                            "frequency_hz_nom": real["frequency_hz"], "frequency_hz_min": f.min(1),
                            "frequency_hz_max": f.max(1), "frequency_hz_wc_min": f.min(1) * 0.95,
                            "frequency_hz_wc_max": f.max(1) * 1.05,
                            "frequency_hz_mc_mean": f.mean(1), "frequency_hz_mc_std": f.std(1) + 0.01,
                            "duty_nom": real["duty"], "supply_current_a_nom": real["supply_current_a"],
                            "supply_current_a_max": out["supply_current_a"].max(1),
                            "yield": rng.uniform(0, 1, nd), "sn_db": rng.uniform(20, 40, nd),
                            "sens_ra": rng.uniform(0, 1, nd), "sens_rb": rng.uniform(0, 1, nd),
                            "sens_c": -np.ones(nd)})
    designs["feasible"] = designs["yield"] > 0.5
    designs = designs.sort_values(["feasible", "yield"], ascending=False).reset_index(drop=True)
    designs["rank"] = np.arange(1, nd + 1)
    designs["flags"] = np.where(designs["feasible"], "", "spec-miss")
    from sweep.analysis import VERDICTS, yield_bounds
    designs["yield_lo"], designs["yield_hi"] = yield_bounds(designs["yield"], 500, np.ones(nd, bool))
    designs["verdict"] = np.where(designs["feasible"],
                                  np.where(designs["yield_hi"] >= 0.95, "pass", "low yield"), "spec miss")
    designs["stalls_at"] = ""
    designs["wc_margin"] = np.linspace(0.05, -0.3, nd)
    top = designs.head(5)
    check = pd.DataFrame({"rank": top["rank"], "design": top["design"], "ra_ohm": top["ra_ohm"],
                          "rb_ohm": top["rb_ohm"], "c_f": top["c_f"], "vcc_v": 9.0,
                          "control_voltage_v": np.nan, "diode_drop_v": 0.0})
    idx = top["design"].to_numpy() - 1
    check["ideal_frequency_hz"] = ideal["frequency_hz"][idx]
    check["real_frequency_hz"] = real["frequency_hz"][idx]
    check["ideal_duty"] = ideal["duty"][idx]
    check["real_duty"] = real["duty"][idx]
    parts_rows = []
    for _, row in top.iterrows():
        for ref, col, unit in (("RA", "ra_ohm", "Ω"), ("RB", "rb_ohm", "Ω"), ("C", "c_f", "F")):
            parts_rows.append({"rank": row["rank"], "design": row["design"], "ref": ref,
                               "value": row[col], "unit": unit, "value_text": f"{row[col]:.3g} {unit}",
                               "rkm": "", "series": "E12", "tolerance": 0.05 if unit == "Ω" else 0.1,
                               "technology": "thick film" if unit == "Ω" else "X7R ceramic",
                               "rating": "0.25 W" if unit == "Ω" else "50 V"})
    temp_curves = pd.DataFrame([{"rank": r, "vcc_v": v, "temperature_c": t, "value": 2.0 + 0.01 * r + 0.001 * t}
                                for r in range(1, 6) for v in (6.0, 9.0) for t in (-10.0, 25.0, 40.0)])
    return Report(
        name="demo", title=title, circuit="astable", timer_name=timer.name, ideal=False,
        main_output="frequency_hz", part_columns=["ra_ohm", "rb_ohm", "c_f"],
        summary=[("Pick", "design 1"), ("Yield", "97 %")],
        cautions=["An LED load: check its current rating."],
        points=pts, points_total=len(pts), points_note=f"All {len(pts)} points.",
        designs=designs, parts=pd.DataFrame(parts_rows), check=check,
        spec=[SpecRow("frequency", "frequency_hz", 1.8, 2.2, 2.0), SpecRow("duty", "duty", -np.inf, 0.7)],
        circuit_text=circuit_text("astable"),
            study_rows=[("study", "title", f'"{title}"', "title"), ("study", "circuit", '"astable"', ""),
                    ("design", "ra", '["1k", "2.2k"]', "Ω a range of choices")],
        notes=[("Model", "Realistic 555 model."), ("Sources", "[book] RC law.")],
        run_info={"version": "test", "seed": 1},
        mc_samples=pd.DataFrame({"value": rng.normal(2.0, 0.05, 500)}),
        temperature_curves=temp_curves, verdicts=dict(VERDICTS))
