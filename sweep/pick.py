"""Figures of the top designs beyond the sweep, for the report: the Check sheet's ideal and
realistic figures, the pick's Monte Carlo builds, temperature curves, waveform and the worst
figures its bill of materials rates parts by. Everything here evaluates the model; the
reporting module only shapes what it returns.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from .analysis import chart_output, main_outputs, mc_draws, mc_variation, timer_bands
from .case import axis_values
from .engine import evaluate_block
from .grades import study_for
from .study import Study
from .variables import AXES
from .waveform import Trace, pick_waveform


@dataclass(frozen=True)
class PickFigures:
    """What the report shows of the top designs beyond their rows (see pick_figures)."""
    check: pd.DataFrame                       # top designs: ideal_<main>, real_<main>, inputs
    mc_samples: pd.DataFrame | None           # the pick's Monte Carlo builds ('value')
    temperature_curves: pd.DataFrame          # top five: rank, vcc_v, temperature_c, value, drift
    waveform: Trace | None                    # the pick's traces, None for a latch
    worst: dict[str, np.ndarray]              # top designs: worst ra_power_w, output_current_a


def pick_figures(study: Study, designs: pd.DataFrame, ideal: bool) -> PickFigures:
    """Every figure of the ranked designs' top the report needs beyond their rows."""
    top = designs.head(study.top)
    return PickFigures(check=check_table(study, designs),
                       mc_samples=pick_mc_samples(study, designs, ideal),
                       temperature_curves=temperature_curves(study, designs, ideal),
                       waveform=pick_waveform(study, designs, ideal),
                       worst=worst_figures(study, top))


def worst_figures(study: Study, designs: pd.DataFrame) -> dict[str, np.ndarray]:
    """Per design (rows of `designs`): the largest timing-resistor dissipation [W] and load
    current [A] over every condition, with nominal parts."""
    if designs.empty:
        return {"ra_power_w": np.zeros(0), "output_current_a": np.zeros(0)}
    design = {a.key: designs[a.column].to_numpy(float) for a in study.design}
    cond = axis_values(study.conditions, np.arange(study.n_conditions))
    out = evaluate_block(study.case, design, cond, with_spec=False)
    n = len(designs)

    def worst(k):
        return np.nanmax(np.broadcast_to(out[k], (n,) + out[k].shape[1:]).reshape(n, -1), axis=1)
    return {"ra_power_w": worst("ra_power_w"), "output_current_a": worst("output_current_a")}


def check_table(study: Study, designs: pd.DataFrame) -> pd.DataFrame:
    """Top designs with the engine's ideal and realistic figures at the nominal condition."""
    top = designs.head(study.top)
    design = {a.key: top[a.column].to_numpy() for a in study.design}
    nomc = {k: np.array([v]) for k, v in study.case.nominal.items()}
    ideal = evaluate_block(study.case, design, nomc, ideal=True, with_spec=False)
    real = evaluate_block(study.case, design, nomc, ideal=False, with_spec=False)
    df = pd.DataFrame({"rank": top["rank"].to_numpy(), "design": top["design"].to_numpy()})
    if "verdict" in top:
        df["verdict"] = top["verdict"].to_numpy()
    for a in study.design:
        df[a.column] = top[a.column].to_numpy()
    for k in ("vcc", "control_voltage"):
        col = AXES[k][0]
        if col not in df:
            df[col] = study.case.nominal.get(k, study.timer.typical_v if k == "vcc" else np.nan)
    df["diode_drop_v"] = 0.0   # ideal mode: the textbook form without the diode drop [book]
    for m in main_outputs(study.circuit):
        df[f"ideal_{m}"] = ideal[m][:, 0, 0]
        df[f"real_{m}"] = real[m][:, 0, 0]
    return df


def pick_mc_samples(study: Study, designs: pd.DataFrame, ideal: bool, cap: int = 20000) -> pd.DataFrame | None:
    main = [chart_output(study.circuit)]
    if study.monte_carlo == 0:
        return None
    best = designs.iloc[0]
    study = study_for(study, int(best["design"]))       # its grade's parts and tolerances
    design = {a.key: np.array([best[a.column]]) for a in study.design}
    cond = axis_values(study.conditions, np.arange(study.n_conditions))
    n = study.monte_carlo
    nc = study.n_conditions
    if n * nc > 4_000_000:       # keep memory small: a subset of conditions is enough for a picture
        cond = {k: v[:: max(1, nc * n // 4_000_000)] for k, v in cond.items()}
    var = mc_variation(study, mc_draws(study, n), slice(None), cond, ideal)
    v = evaluate_block(study.case, design, cond, ideal=ideal, variation=var, with_spec=False)[main[0]]
    v = np.broadcast_to(v, (1, n, len(next(iter(cond.values()))))).ravel()
    if len(v) > cap:
        v = v[np.linspace(0, len(v) - 1, cap).astype(int)]
    return pd.DataFrame({"value": v})


def temperature_curves(study: Study, designs: pd.DataFrame, ideal: bool) -> pd.DataFrame:
    main = [chart_output(study.circuit)]
    top = designs.head(5)
    t_axis = next((a for a in study.conditions + study.design if a.key == "temperature"), None)
    lo, hi = (float(t_axis.values.min()), float(t_axis.values.max())) if t_axis is not None else (25.0, 25.0)
    if hi - lo < 1:
        lo, hi = lo - 20, hi + 20
    temps = np.linspace(lo, hi, 27)
    v_axis = next(a for a in study.conditions + study.design if a.key == "vcc")
    vccs = np.unique([v_axis.values.min(), v_axis.nominal or np.median(v_axis.values), v_axis.values.max()])
    design = {a.key: top[a.column].to_numpy() for a in study.design}
    v_nom = float(v_axis.nominal) if v_axis.nominal is not None else float(np.median(v_axis.values))
    rows = []
    for v in vccs:
        cond = {"vcc": np.full(len(temps), v), "temperature": temps}
        for k, val in study.case.nominal.items():
            cond.setdefault(k, np.full(len(temps), val))
        out = evaluate_block(study.case, design, cond, ideal=ideal, with_spec=False)[main[0]][:, 0, :]
        # the chip's own drift and supply sensitivity, of unknown sign: a band around each line,
        # typical (one sigma as read) and maximum [ds-bip], [ds-cmos]
        bands = {}
        for which in ("typ", "max"):
            _acc, drift, sens = (0.0, 0.0, 0.0) if ideal else timer_bands(study, which)
            scale = 1.0 / study.typical_sigma if which == "typ" else 1.0
            bands[which] = scale * (drift * np.abs(temps - 25.0) + sens * abs(v - v_nom))
        for i, r in enumerate(top["rank"].to_numpy()):
            rows.append(pd.DataFrame({"rank": int(r), "vcc_v": v, "temperature_c": temps, "value": out[i],
                                      "drift_typ": bands["typ"], "drift_max": bands["max"]}))
    return pd.concat(rows, ignore_index=True)
