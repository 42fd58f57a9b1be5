"""Turn ranked designs into the Report the writers lay out: summary text, cautions, notes,
parts list, check rows, the pick's Monte Carlo samples and temperature curves."""
from __future__ import annotations

import numpy as np
import pandas as pd

from . import values as qv
from .analysis import (SENS_STEP, VERDICTS, chart_output, main_outputs, spread_reading,
                       yield_target)
from .physics import FLAGS, REGISTRY
from .bom import bill_of_materials
from .pick import PickFigures
from .report import CircuitText, Report, SpecRow
from .study import Study, study_rows
from .grades import TABLE as GRADE_TABLE, grade_values, study_for
from .variables import AXES, FLAG_TEXT, REFS, STATS as STAT_SUFFIXES, VARIABLES, eng



def design_text(study: Study, row) -> str:
    return ", ".join(f"grade {study.grade_plan[int(row['grade']) - 1].label}" if a.key == "grade"
                     else f"{REFS.get(a.key, a.key)} = {eng(row[a.column], a.column)}"
                     for a in study.design)


def summary_lines(study: Study, designs: pd.DataFrame, screened: dict[str, int]) -> tuple[list[tuple[str, str]], bool]:
    """Lines for the Summary sheet and the page, and whether any design meets the spec."""
    lines: list[tuple[str, str]] = []
    best = designs.iloc[0]
    main = main_outputs(study.circuit)
    verdict = str(best.get("verdict", ""))
    meets = verdict == "pass"
    stalls = str(best.get("stalls_at", "") or "")
    lines.append(("Designs evaluated", f"{study.n_designs:,} x {study.n_conditions:,} conditions"
                  f" = {study.n_points:,} points"))
    v_text = f"{verdict}: {VERDICTS.get(verdict, '')}."
    if not meets and not (designs["verdict"] == "pass").any():
        v_text = (f"NO DESIGN MEETS THE SPEC. The best candidate's verdict is {v_text} Widen the "
                  "ranges or relax the spec.")
    if verdict == "low yield":
        v_text += (f" Target {yield_target(study) * 100:g} %"
                   + ("" if study.yield_min is not None else " (the default; set [spec] yield)") + ".")
    misses = worst_case_misses(study, best)
    if misses and verdict in ("pass", "low yield", "not sampled"):
        v_text += " Its worst case misses the spec: " + "; ".join(misses) + "."
    lines.append(("Verdict", v_text))
    lines.append(("Pick", f"design {int(best['design'])}: {design_text(study, best) or 'no timing parts'}"))
    for m in main:
        lines.append((f"{VARIABLES[m].label} nominal", eng(best[f"{m}_nom"], m) if np.isfinite(best[f"{m}_nom"])
                      else f"none: {stalls or 'no figure'}"))
        lo, hi = best[f"{m}_wc_min"], best[f"{m}_wc_max"]
        lines.append((f"{VARIABLES[m].label} worst case",
                      f"{eng(lo, m)} to {eng(hi, m)}" if np.isfinite(lo) and np.isfinite(hi)
                      else f"none: {stalls or 'no figure'}"))
    if study.spec:
        y = best["yield"]
        if np.isfinite(y):
            y_text = (f"{y * 100:.1f} % of {study.monte_carlo:,} Monte Carlo builds meet every spec "
                      f"limit at every condition (95 % interval {best['yield_lo'] * 100:.1f} to "
                      f"{best['yield_hi'] * 100:.1f} %; target {yield_target(study) * 100:g} %)")
        else:
            y_text = ("not sampled ([analysis] monte_carlo = 0)" if study.monte_carlo == 0
                      else f"not sampled: {best.get('screened', '') or 'no Monte Carlo ran'}")
        lines.append(("Yield", y_text))
        margin = best["wc_margin"]
        lines.append(("Worst-case margin", f"{margin * 100:+.1f} % to the nearest spec limit"
                      if np.isfinite(margin) else
                      f"none: the worst case {stalls}" if stalls else "none: no worst-case figure"))
    if str(best.get("uncommon", "") or ""):
        lines.append(("Uncommon part", f"{best['uncommon']}; check availability and price, or "
                                       "widen the ranges for a plainer part"))
    lines.append(("Timer spreads", spread_reading(study)))
    pick_study = study_for(study, int(best["design"]))
    p, given = pick_study.parts, study.raw.get("parts", {})

    def source(key: str, parts: tuple[str, ...]) -> str:
        series = sorted({a.series for a in pick_study.design if a.key in parts and a.series})
        if key in dict(grade_values(study, int(best["design"]))):
            return "the pick's grade"
        if key in given:
            return "from [parts]"
        return f"implied by {', '.join(series)}" if series else "default"
    tol = []
    if any(a.key in ("ra", "rb", "r") for a in study.design):
        tol.append(f"resistors ±{p.resistor_tolerance * 100:g} % "
                   f"({source('resistor_tolerance', ('ra', 'rb', 'r'))})")
    if any(a.key == "c" for a in study.design):
        tol.append(f"capacitor ±{p.capacitor_tolerance * 100:g} % "
                   f"({source('capacitor_tolerance', ('c',))}; {p.technology.label})")
    if tol:
        lines.append(("Tolerances assumed", ", ".join(tol)))
    stalls = str(best.get("stalls_at", "") or "")

    def figure(col: str) -> str:
        v = best[col]
        return eng(v, "supply_current_a") if np.isfinite(v) else f"none ({stalls or 'no figure'})"
    lines.append(("Supply current", f"{figure('supply_current_a_nom')} nominal, "
                                    f"{figure('supply_current_a_max')} at most"))
    if "idle_current_a_nom" in best:
        lines.append(("Idle current", eng(best["idle_current_a_nom"], "idle_current_a")))
    if study.battery_capacity_ah is not None:
        lines.append(("Battery life", battery_text(study, best)))
    if "timeout_margin_s_wc_min" in best:
        m = best["timeout_margin_s_wc_min"]
        lines.append(("Timeout margin", f"{eng(m, 'timeout_margin_s')} in the worst case beyond the "
                      "slowest input period: a pulse may come that much late before the alarm"
                      if np.isfinite(m) else "none: no worst-case figure"))
    lines.append(("Flags of the pick", best["flags"] or "none"))
    for why, n in screened.items():
        lines.append(("No Monte Carlo", f"{n:,} designs: {why}"))
    return lines, meets


def circuit_text(circuit: str, diode_drop_v: float | None = None) -> CircuitText:
    """What the writers say about a circuit, from its registry record; diode_drop_v: the study's
    fixed diode drop [V], if it gives one."""
    c = REGISTRY[circuit]
    hint = ""
    if "diode_drop_v" in c.check_inputs:
        if diode_drop_v is not None:
            drop = f"the study's fixed drop, {qv.format_eng(diode_drop_v, 'V')}"
        else:
            drop = ("the diode's drop at the timing current: the engine treats it as a Shockley "
                    "device, and a small-signal silicon diode drops about 0.35-0.5 V at microamps, "
                    "0.6-0.7 V at milliamps; a Schottky about half of that")
        hint = ("Textbook formulas. Diode drop Vd (blue) is 0, the ideal case the engine's ideal "
                "figure uses, so 'formula vs ideal' stays exact. Type a drop into Vd "
                f"({drop}) to see how much of the gap to the realistic figures the diode explains "
                "(for the duty, most of it); the rest comes from the other non-idealities (see "
                "Notes).")
    return CircuitText(title=c.title, timed=c.timed, free_running=c.free_running,
                       main_outputs=c.main_outputs, textbook=c.textbook, check=dict(c.check),
                       check_inputs=c.check_inputs, check_hint=hint, waveform_text=c.waveform_text)


def life_text(hours: float) -> str:
    """Hours and days, e.g. '794 h (33.1 days)'."""
    if not np.isfinite(hours):
        return "-"
    return f"{hours:,.0f} h ({hours / 24:,.1f} days)" if hours >= 10 else f"{hours:.3g} h"


def battery_text(study: Study, best) -> str:
    """The pick's battery life at the nominal condition and in the worst case, and how."""
    cap = study.battery_capacity_ah
    drain = ("the idle current while it waits for triggers (pulses add their share)"
             if REGISTRY[study.circuit].waits else "the mean supply current")
    return (f"{life_text(best.get('battery_life_h_nom', np.nan))} nominal, "
            f"{life_text(best.get('battery_life_h_wc_min', np.nan))} worst case: "
            f"{qv.format_eng(cap, 'Ah')} x {study.battery_usable * 100:g} % usable / {drain}. "
            "Real cells give less in the cold, under pulse loads and with age.")


def worst_case_misses(study: Study, best) -> list[str]:
    """Plain words for every spec limit the pick's worst case crosses."""
    out = []
    for s in study.spec:
        label = VARIABLES[s.column].label.lower()
        lo, hi = best[f"{s.column}_wc_min"], best[f"{s.column}_wc_max"]
        if np.isfinite(s.lo) and not lo >= s.lo:
            out.append(f"{label} down to {eng(lo, s.column)} against a minimum of {eng(s.lo, s.column)}"
                       + (f" ({(lo - s.lo) / abs(s.lo) * 100:+.1f} %)" if s.lo else ""))
        if np.isfinite(s.hi) and not hi <= s.hi:
            out.append(f"{label} up to {eng(hi, s.column)} against a maximum of {eng(s.hi, s.column)}"
                       + (f" ({(hi - s.hi) / abs(s.hi) * 100:+.1f} %)" if s.hi else ""))
    return out


def cautions(study: Study, designs: pd.DataFrame) -> list[str]:
    out = ["Figures come from a model built on typical datasheet values and common practice; "
           "build and measure the chosen design before it goes into a product."]
    kind = study.load.kind
    if kind in ("relay", "inductive", "mains-switching"):
        out.append("Relay coil or inductive load: fit a flyback diode across the coil; the switch-off "
                   "spike can destroy the timer's output stage.")
    if kind == "mains-switching":
        out.append("The load switches mains (through a relay or similar): mains wiring can kill. Keep creepage and clearance, "
                   "isolate the low-voltage side, and follow local electrical codes and licensed "
                   "practice; have the installation done or checked by a qualified person.")
    if study.supply == "battery":
        out.append("Battery supply: respect the chemistry's limits (charge, discharge current, "
                   "temperature); the idle and supply currents set battery life.")
    if study.battery_capacity_ah is not None:
        out.append("Battery life is an estimate from the rated capacity: cold, pulse currents "
                   "(coin cells above a few milliamps especially), age and self-discharge all "
                   "shorten it; measure on the bench. Never recharge a primary cell, keep coin and "
                   "button cells away from children (a swallowed cell burns internally within "
                   "hours), and dispose of cells as local rules require.")
    if study.supply == "mains-derived":
        out.append("Mains-derived supply: use a certified, isolated power supply; never derive the "
                   "timer's supply from mains without isolation.")
    if any(g.study.parts.technology.polarised for g in study.grade_plan) or \
            study_for(study, int(designs.iloc[0]["design"])).parts.technology.polarised:
        out.append("Polarised timing capacitor: observe polarity; its leakage drifts with age and "
                   "temperature, so check the timing on the bench.")
    hot = designs.head(study.top)
    surge = discharge_surge_caution(study, hot)
    if surge:
        out.append(surge)
    if (hot.get("junction_temp_c_max", pd.Series([0.0])) > 85).any():
        out.append("Hot parts: a top design runs the chip above 85 °C junction; keep fingers and "
                   "heat-sensitive parts away and check the package's rating.")
    return out


def discharge_surge_caution(study: Study, top: pd.DataFrame) -> str:
    """When a top design's capacitor dumps more into the discharge transistor than it takes, the
    series resistor between the discharge pin and the capacitor that brings the dump's peak down
    to the transistor's steady limit: R = V_threshold / I_limit - R_sat, next E12 value up
    [derived; E12 from IEC 60063]."""
    if not REGISTRY[study.circuit].discharge_resistor or "flags" not in top or not top["flags"].astype(str).str.contains(
            "discharge-current-over-limit").any():
        return ""
    timer = study.timer
    vcc = max(float(np.max(a.values)) for a in study.axes if a.key == "vcc") \
        if any(a.key == "vcc" for a in study.axes) else timer.typical_v
    cv = [float(np.max(a.values)) for a in study.axes if a.key == "control_voltage"]
    v_top = cv[0] if cv else timer.threshold_fraction * vcc
    need = max(v_top / timer.discharge_max_a - timer.saturation_ohm, 1.0)
    r = float(qv.series_values("E12", need, 10.0 * need)[0])
    return (f"Discharge surge: when the pulse ends, the timing capacitor (at {v_top:.2g} V) dumps "
            "straight into the discharge transistor, more energy than it is taken to survive "
            f"(flag discharge-current-over-limit). Put about {eng(r, 'ra_ohm')} in series between "
            "the discharge pin and the capacitor (the threshold pin stays on the capacitor; "
            f"study key [parts] discharge_resistor = \"{eng(r, 'ra_ohm').replace(' ', '').rstrip('Ω')}\"): "
            f"that keeps the peak near {timer.discharge_max_a * 1e3:.0f} mA and leaves the pulse "
            "width as it is.")


NOTES = [
    ("Model", "Each phase of the timing capacitor is a charge or discharge between the thresholds "
              "through Thevenin sources (RC law [book]), integrated over the voltages the node "
              "crosses where the network or the capacitor is not linear; thresholds at 2/3 and 1/3 "
              "of the supply from the internal divider [book], or at the control-pin voltage and "
              "half of it."),
    ("Non-idealities", "Threshold and (astables) trigger input currents at the timing node, "
                       "discharge saturation (V0 + R I), propagation delay per transition, stray "
                       "capacitance, capacitor temperature curves, resistor tempco [ds-bip], "
                       "[ds-cmos], [cp], [mem]."),
    ("Capacitor", "Class II ceramics lose capacitance with DC bias as 1 - k (V/V_rated)^1.3 [mem], "
                  "applied to the node voltage as it moves (a quadratic fit over the swing, integrated "
                  "exactly). Electrolytic and tantalum leakage: the nominal figure is typical, a "
                  "fifth of the 0.01 C V (or 3 uA) maximum at rated voltage, falling with the "
                  "square of the working voltage's share of the rating [cp, mem]; the maximum is "
                  "the worst-case bound, and the Monte Carlo draws between them."),
    ("Diode (astable-diode)", "A Shockley device, I = Is (exp(V / n Vt) - 1), Vt = kT/q, its "
                              "saturation current rising with temperature by the SPICE diode "
                              "rule [book]; small-signal silicon Is 2.5 nA, n 1.75, Schottky "
                              "Is 15 nA, n 1.05 [mem]. At the microamps of megohm resistors it "
                              "drops 0.3-0.5 V, not 0.7 V. Reverse biased it leaks (Schottky "
                              "far more), which shortens the low time. A study may give a fixed "
                              "drop (diode_drop) instead."),
    ("Output stage", "Drop against current from the timer file's curves, met with the load line; "
                     "a bipolar high stage sources but cannot sink, so a load to the supply lifts "
                     "the output; its drop falls about 4 mV/K [book]."),
    ("Discharge surge", "When the discharge transistor turns on, the capacitor dumps into it "
                        "(through RB in an astable, straight in a monostable), limited by the "
                        "transistor's surge current; the dump's energy in the transistor is "
                        "checked against the timer file's limit [mem], and the Dump time column "
                        "says how long it lasts."),
    ("Worst case", "Every corner of every spread at every condition point: each timing part at "
                   "its tolerance together with the resistor tempco of either sign or the "
                   "capacitor at the edge of its temperature envelope (zero at 25 °C, widening "
                   "linearly to the EIA-198 band at the code's limits, never inside the typical "
                   "curve [std; derived]) and a class II DC-bias loss 1/1.6 to 1.6 x typical "
                   "[cp]; electrolytic leakage from typical to the specification maximum [cp]; "
                   "the diode's saturation current /3 to x3 [mem]; quiescent current to its "
                   "maximum [ds-bip]; the load's resistor tolerance, an LED's forward voltage "
                   "+-0.15 V and the output stage's drop 1/1.2 to 1.2 x [mem], together towards "
                   "the stronger or weaker load. The timer's initial accuracy, drift (ppm/K) and supply "
                   "sensitivity (%/V) at their maximum figures (3 x typical where the data gives "
                   "none) are a band on the timing [ds-bip]."),
    ("Monte Carlo", "Builds are scrambled Sobol points (direction numbers of S. Joe and F. Y. "
                    "Kuo, SIAM J. Sci. Comput. 30, 2008; linear matrix scramble and digital "
                    "shift seeded by the study's seed), mapped through the normal or uniform "
                    "inverse distribution; the same builds for every design, whatever the block "
                    "split. Each part is normal with "
                    "its tolerance as 3 sigma, clipped at the tolerance (or uniform over it); the "
                    "timer's accuracy, drift and supply sensitivity are normal with sigma = the "
                    "typical figure / [analysis] typical_sigma, clipped at the maximum; the other "
                    "spreads of the worst case are drawn with their bound as 3 sigma, clipped at "
                    "it, one draw per build across every condition. Each build "
                    "is evaluated at every condition point. Yield = share of builds meeting every "
                    "spec limit at every condition, with its 95 % Wilson score interval [book: "
                    "E. B. Wilson, 1927]."),
    ("Signal-to-noise", "Taguchi nominal-the-best: 10 log10(mean^2 / variance) of the main output "
                        "over the Monte Carlo builds and conditions [book: Taguchi methods]."),
    ("Sensitivity", "Elasticity d ln y / d ln x of the main output to each part at the "
                    f"nominal condition, by forward difference (a step of {SENS_STEP:g}) from the "
                    "nominal point."),
    ("Ranking", "Feasible designs first (no limit flag at any condition, nominal in spec). Yields "
                "whose 95 % intervals overlap the best yield's are a tie (when any design passes, only "
                "passing designs lead): those designs go by "
                "lower supply current in a battery study or one with a supply-current spec, else "
                "by wider worst-case margin, then plainer parts (no uncommon part, coarser "
                "series, fewer distinct values). With [spec] yield = { min = ... } the leaders "
                "are the designs whose interval reaches the target, lowest supply current first. "
                "The rest go by yield, worst-case margin, supply current, plainer parts."),
    ("Verdict", "One word per design, the same in every output: "
                + "; ".join(f"{k} = {v}" for k, v in VERDICTS.items())
                + ". Without [spec] yield the yield target is 95 %."),
    ("Uncommon parts", "C0G/NP0 above 100 nF, film below 1 nF or above 10 µF, electrolytic or "
                       "tantalum below 1 µF, class II ceramics above 100 µF and timing resistors "
                       "outside 1 Ω to 10 MΩ are uncommon or costly [cp]; such designs carry a "
                       "note and rank after plainer ties."),
    ("Source tags", "[std] published standard (IEC 60063, IEC 60062, EIA-198); [book] textbook; "
                    "[ds-bip]/[ds-cmos] typical datasheet figure, no maker named; [cp] common "
                    "practice; [mem] from memory, uncertain; [derived] worked out from the RC law."),
    ("Codes and practice", "timer-sweep is a design aid. For mains, relays and inductive loads, "
                           "batteries and hot parts, local codes and licensed practice take "
                           "precedence over anything in this workbook."),
]


def _part_note(study: Study, key: str, value: float) -> str:
    """The uncommon-part note of one part value, or ""."""
    from .analysis import uncommon_parts
    col = AXES[key][0]
    return str(uncommon_parts(study, pd.DataFrame({col: [value]}))[0])


STATS = tuple(suffix[1:] for suffix, _word in STAT_SUFFIXES)
#: the Notes sheet's meaning of every flag code, in the stable order (sweep.physics.FLAGS)
FLAG_NOTES = [(f"Flag {code}", FLAG_TEXT[code]) for code in FLAGS]


def designs_for_people(study: Study, designs: pd.DataFrame) -> pd.DataFrame:
    """The ranked designs with the columns a reviewer reads first on the left: rank, parts,
    verdict, yield and margins, then the main outputs, the spec outputs, the rest."""
    from .analysis import summary_outputs
    first = (["rank", "design"] + [a.column for a in study.design]
             + (["grade_label", "cost_index"] if study.grade_plan else [])
             + ["verdict", "yield", "yield_lo", "yield_hi", "wc_margin", "stalls_at", "feasible", "sn_db"])
    outs = []
    for o in summary_outputs(study):
        outs += [f"{o}_{k}" for k in STATS]
    sens = [c for c in designs.columns if c.startswith("sens_")]
    tail = ["series_need", "distinct_values", "uncommon", "screened", "flags"]
    cols = [c for c in first + outs + sens + tail if c in designs.columns]
    return designs[cols]


GRADE_NOTE = ("Each combination of the part grades listed in [design] is swept with its own parts "
              "(tolerances, technology, resistor series). Cost index: the timing parts' grade "
              "costs added up, each against the commonest grade (1.0): a timing resistor costs "
              "the larger of its tolerance's and its series' figures, the capacitor its "
              "technology's figure times its tolerance's. The figures and the availability notes "
              "are rough common-practice figures [cp] from the editable table "
              "sweep/models/grades.toml, not quotes. With [spec] yield the pick is the cheapest "
              "grade whose design's 95 % yield interval reaches the target, then the lowest "
              "supply current.")


def grade_table(study: Study, designs: pd.DataFrame) -> pd.DataFrame | None:
    """For a study with part grades: the best design of each grade (its lowest rank) with the
    grade's cost index, its yield and interval, whether it reaches the yield target, and the
    grade table's availability notes; cheapest first. None without grades."""
    if not study.grade_plan or "grade" not in designs:
        return None
    best = designs.sort_values("rank", kind="stable").groupby("grade", sort=False).head(1)
    target = yield_target(study)
    rows = []
    for _, d in best.iterrows():
        g = study.grade_plan[int(d["grade"]) - 1]
        hi = float(d.get("yield_hi", np.nan))
        rows.append({"grade": g.index + 1, "grade_label": g.label, "cost_index": g.cost,
                     "design": int(d["design"]), "rank": int(d["rank"]),
                     "verdict": str(d.get("verdict", "")), "yield": float(d.get("yield", np.nan)),
                     "yield_lo": float(d.get("yield_lo", np.nan)), "yield_hi": hi,
                     "reaches": bool(str(d.get("verdict", "")) == "pass" and np.isfinite(hi)
                                     and hi >= target),
                     "notes": g.notes})
    out = pd.DataFrame(rows).sort_values(["cost_index", "rank"], kind="stable")
    return out.reset_index(drop=True)


def grade_lines(study: Study, grades: pd.DataFrame) -> list[tuple[str, str]]:
    """The Summary's answer: the cheapest grade whose best design reaches the yield target."""
    target = yield_target(study)
    ok = grades[grades["reaches"]]
    where = f"the grade table {GRADE_TABLE.name}, rough common-practice figures [cp], not quotes"
    if len(ok):
        g = ok.iloc[0]
        text = (f"{g['grade_label']} (cost index {g['cost_index']:.2f}, from {where}): design "
                f"{g['design']} reaches {target * 100:g} % (yield {g['yield'] * 100:.1f} %, 95 % "
                f"interval {g['yield_lo'] * 100:.1f} to {g['yield_hi'] * 100:.1f} %)")
    else:
        text = (f"none of the {len(grades)} grades has a design whose yield interval reaches "
                f"{target * 100:g} %; widen the ranges, relax the spec or add a finer grade")
    return [("Cheapest grade reaching the yield target", text)]


def build_report(study: Study, designs: pd.DataFrame, points: pd.DataFrame, points_note: str,
                 ideal: bool, run_info: dict, figures: PickFigures) -> Report:
    """The Report of a finished analysis: ranked designs, the points of the top ones and the
    figures of the pick (sweep.pick), shaped into tables and text; nothing is evaluated here."""
    lines, meets = summary_lines(study, designs, run_info.get("screened", {}))
    grades = grade_table(study, designs)
    if grades is not None:
        lines[2:2] = grade_lines(study, grades)
    best = designs.iloc[0]

    def num(x):
        return round(float(x), 6) if np.isfinite(x) else None
    run_info = dict(run_info, verdict=str(best["verdict"]), meets_spec=meets,
                    worst_case_in_spec=meets and not worst_case_misses(study, best),
                    **{"yield": num(best["yield"]), "yield_lo": num(best["yield_lo"]),
                       "yield_hi": num(best["yield_hi"])},
                    yield_target=yield_target(study), typical_sigma=study.typical_sigma,
                    spreads=spread_reading(study))
    return Report(
        name=study.name, title=study.title, circuit=study.circuit,
        circuit_text=circuit_text(study.circuit, study.parts.diode_drop_v), timer_name=study.timer.name,
        ideal=ideal, main_output=chart_output(study.circuit),
        part_columns=[a.column for a in study.design],
        summary=lines, cautions=cautions(study, designs), points=points,
        points_total=study.n_points, points_note=points_note,
        designs=designs_for_people(study, designs),
        parts=bill_of_materials(study, designs, figures.worst), check=figures.check,
        spec=[SpecRow(s.key, s.column, s.lo, s.hi, s.target) for s in study.spec],
        study_rows=study_rows(study),
        notes=NOTES + [("Timer spreads", spread_reading(study))] + FLAG_NOTES
        + ([("Part grades", GRADE_NOTE)] if study.grade_plan else [])
        + ([("Notes from the study", study.notes)] if study.notes else []),
        run_info=run_info, mc_samples=figures.mc_samples,
        temperature_curves=figures.temperature_curves, verdicts=dict(VERDICTS),
        waveform=figures.waveform, grades=grades)
