"""Per-design figures: nominal, range over conditions, worst case, Monte Carlo yield, Taguchi
signal-to-noise ratio, elasticities; then ranking.

`analyse_block` is pure: (study, design range, options) -> one DataFrame row per design and,
if asked, the block's points. Blocks are independent, so a serial run, local processes and a
Dask cluster give identical results; the Monte Carlo uses common random numbers drawn from the
study's seed (the same build deviations for every design), so no result depends on how the
designs were split into blocks.
"""
from __future__ import annotations

import itertools
import math
from dataclasses import dataclass

import numpy as np
import pandas as pd

from .engine import (TIMING, Variation, axis_values, evaluate_block, nominal_conditions,
                     spec_fail)
from .physics import ASTABLES, CIRCUIT_PARTS, FLAG_BITS
from .physics.model import flag_names
from .study import Study
from .variables import AXES

SPEC_BIT = np.uint32(FLAG_BITS["spec-miss"])
LIMIT_BITS = np.uint32(sum(b for k, b in FLAG_BITS.items() if k != "spec-miss"))
SENS_STEP = 1e-4          # relative step of the central difference for elasticities [derived]


def main_outputs(circuit: str) -> list[str]:
    if circuit in ASTABLES:
        return ["frequency_hz", "duty"]
    if circuit == "monostable":
        return ["pulse_width_s"]
    return []


def summary_outputs(study: Study) -> list[str]:
    cols = main_outputs(study.circuit) + [s.column for s in study.spec] + ["supply_current_a"]
    if study.circuit in ("monostable", "bistable"):
        cols.append("idle_current_a")
    cols += ["output_current_a", "junction_temp_c"]
    return list(dict.fromkeys(cols))


def varied_parts(study: Study) -> list[str]:
    """Parts that carry a tolerance in this circuit."""
    return list(CIRCUIT_PARTS[study.circuit])


def tolerance_of(study: Study, part: str) -> float:
    return study.parts.capacitor_tolerance if part == "c" else study.parts.resistor_tolerance


def timer_bands(study: Study) -> tuple[float, float, float]:
    """(initial accuracy, drift per K, supply sensitivity per V) of the main timing [ds-bip]."""
    t = study.timer
    if study.circuit == "monostable":
        return (t.accuracy_monostable, t.drift_monostable_ppm_per_k * 1e-6,
                t.supply_sensitivity_monostable_per_v)
    return t.accuracy_astable, t.drift_astable_ppm_per_k * 1e-6, t.supply_sensitivity_astable_per_v


def mc_draws(study: Study, n: int) -> dict[str, np.ndarray]:
    """Common random numbers for n builds, standardised: each part and the timer's three error
    terms. Normal with the tolerance as 3 sigma, or uniform over the tolerance (the caller
    scales). Drawn only from the study's seed, so independent of how designs are split."""
    rng = np.random.default_rng(study.seed)
    names = varied_parts(study) + ["accuracy", "drift", "supply"]
    if study.distribution == "uniform":
        z = rng.uniform(-1.0, 1.0, size=(len(names), n))
    else:
        z = rng.standard_normal(size=(len(names), n)) / 3.0
    return dict(zip(names, z))


@dataclass(frozen=True)
class Options:
    ideal: bool = False
    monte_carlo: int | None = None       # None: the study's figure
    keep_points: bool = False            # return the block's points table
    mc_chunk: int = 1 << 15              # evaluations per Monte Carlo block (cache-sized: fastest)


def analyse_block(study: Study, start: int, stop: int, opt: Options = Options()
                  ) -> tuple[pd.DataFrame, pd.DataFrame | None]:
    """Figures for designs [start, stop): one row each, and the points if opt.keep_points."""
    ideal = opt.ideal
    d_idx = np.arange(start, stop)
    design = axis_values(study.design, d_idx)
    c_idx = np.arange(study.n_conditions)
    cond = axis_values(study.conditions, c_idx)
    outs = summary_outputs(study)
    nd = len(d_idx)
    row: dict[str, np.ndarray] = {"design": d_idx + 1}
    for a in study.design:
        row[a.column] = design[a.key]

    # 1. nominal parts over every condition
    sweep = evaluate_block(study, design, cond, ideal=ideal)
    mask = np.bitwise_or.reduce(sweep["flag_mask"][:, 0, :], axis=1)
    # 2. nominal parts at the nominal condition
    nom = evaluate_block(study, design, {k: np.array([v]) for k, v in nominal_conditions(study).items()},
                         ideal=ideal)
    for o in outs:
        v = sweep[o][:, 0, :]
        row[f"{o}_nom"] = nom[o][:, 0, 0]
        with np.errstate(all="ignore"):
            row[f"{o}_min"] = np.where(np.isnan(v).any(1), np.nan, np.nanmin(np.where(np.isnan(v), np.inf, v), 1))
            row[f"{o}_max"] = np.where(np.isnan(v).any(1), np.nan, np.nanmax(np.where(np.isnan(v), -np.inf, v), 1))
    # 3. worst case: every tolerance corner x every condition, plus the timer's drift band
    parts = varied_parts(study)
    corners = np.array(list(itertools.product((-1.0, 1.0), repeat=len(parts)))).T if parts else np.zeros((0, 1))
    var = Variation({p: (1.0 + tolerance_of(study, p) * corners[i])[None, :, None]
                     for i, p in enumerate(parts)})
    wc = evaluate_block(study, design, cond, ideal=ideal, variation=var, with_spec=False)
    band = _band(study, cond, ideal)
    for o in outs:
        v = wc[o]
        lo, hi = v, v
        if o in TIMING:
            lo, hi = v * (1 - band), v * (1 + band)
        elif o == "frequency_hz":
            lo, hi = v / (1 + band), v / (1 - band)
        row[f"{o}_wc_min"] = _reduce(lo, np.min)
        row[f"{o}_wc_max"] = _reduce(hi, np.max)
    # 4. elasticities of the main output at the nominal condition [derived: central difference]
    main = main_outputs(study.circuit)[:1]
    if main and parts:
        m = main[0]
        steps = []
        for p in parts:
            for s in (1 + SENS_STEP, 1 - SENS_STEP):
                steps.append({q: (s if q == p else 1.0) for q in parts})
        var = Variation({p: np.array([st[p] for st in steps])[None, :, None] for p in parts})
        ev = evaluate_block(study, design, {k: np.array([v]) for k, v in nominal_conditions(study).items()},
                            ideal=ideal, variation=var, with_spec=False)[m][:, :, 0]
        with np.errstate(all="ignore"):
            for i, p in enumerate(parts):
                row[f"sens_{p}"] = ((np.log(ev[:, 2 * i]) - np.log(ev[:, 2 * i + 1]))
                                    / (math.log1p(SENS_STEP) - math.log1p(-SENS_STEP)))
    # 5. screening for the Monte Carlo: a design whose worst case lies wholly outside a spec
    # limit cannot yield a build that meets it [derived]
    reach = np.ones(nd, dtype=bool)
    for s in study.spec:
        reach &= ~((row[f"{s.column}_wc_max"] < s.lo) | (row[f"{s.column}_wc_min"] > s.hi))
    row["reach"] = reach
    row["screened"] = np.where(reach, "", "worst case entirely outside the spec")
    row["yield"] = np.where(reach, np.nan, 0.0)
    nom_fail = spec_fail(study, nom)[:, 0, 0] if study.spec else np.zeros(nd, dtype=bool)
    limits = (mask & LIMIT_BITS) != 0
    row["feasible"] = ~limits & ~nom_fail
    row["flag_mask"] = mask
    row["wc_margin"] = _wc_margin(study, row)
    df = pd.DataFrame(row)
    df["series_need"], df["distinct_values"] = plainness(study, df)
    df["flags"] = flag_text(mask)
    points = points_frame(study, d_idx, c_idx, design, cond, sweep) if opt.keep_points else None
    return df, points


def mc_columns(study: Study) -> list[str]:
    cols = ["design", "yield"]
    for o in summary_outputs(study):
        cols += [f"{o}_mc_mean", f"{o}_mc_std"]
    return cols + ["sn_db"]


def monte_carlo_block(study: Study, designs: np.ndarray, opt: Options = Options()) -> pd.DataFrame:
    """Monte Carlo figures of the given designs (1-based numbers): yield, mean and standard
    deviation of each summary output over builds x conditions, Taguchi S/N of the main output."""
    n_mc = study.monte_carlo if opt.monte_carlo is None else opt.monte_carlo
    outs = summary_outputs(study)
    design = axis_values(study.design, np.asarray(designs) - 1)
    cond = axis_values(study.conditions, np.arange(study.n_conditions))
    y, mean, std = _monte_carlo(study, design, cond, outs, n_mc, opt.ideal, opt.mc_chunk)
    row: dict[str, np.ndarray] = {"design": np.asarray(designs), "yield": y}
    for o in outs:
        row[f"{o}_mc_mean"], row[f"{o}_mc_std"] = mean[o], std[o]
    main = main_outputs(study.circuit)
    with np.errstate(all="ignore"):     # Taguchi nominal-the-best [book: Taguchi methods]
        row["sn_db"] = (10 * np.log10(mean[main[0]] ** 2 / std[main[0]] ** 2) if main
                        else np.full(len(designs), np.nan))
    return pd.DataFrame(row)


def _reduce(v: np.ndarray, fn) -> np.ndarray:
    """Reduce (designs, builds, conditions) over the last two axes; NaN anywhere gives NaN."""
    flat = v.reshape(v.shape[0], -1)
    return fn(flat, axis=1)


def _band(study: Study, cond: dict[str, np.ndarray], ideal: bool) -> np.ndarray | float:
    """Relative timing band at each condition: accuracy + drift |dT| + sensitivity |dV| [ds-bip]."""
    if ideal:
        return 0.0
    acc, drift, sens = timer_bands(study)
    vnom = next((a.nominal for a in study.conditions if a.key == "vcc"), study.timer.typical_v)
    t = cond.get("temperature", np.array([25.0]))
    v = cond.get("vcc", np.array([vnom]))
    return (acc + drift * np.abs(t - 25.0) + sens * np.abs(v - vnom))[None, None, :]


def mc_variation(study: Study, z: dict[str, np.ndarray], builds: slice) -> Variation:
    """The part multipliers and timer error terms of a slice of Monte Carlo builds, shaped to
    broadcast against (designs, builds, conditions)."""
    acc, drift, sens = timer_bands(study)
    b = {k: v[builds][None, :, None] for k, v in z.items()}
    return Variation({p: 1.0 + tolerance_of(study, p) * b[p] for p in varied_parts(study)},
                     accuracy=acc * b["accuracy"], drift_per_k=drift * b["drift"],
                     supply_per_v=sens * b["supply"])


def _monte_carlo(study, design, cond, outs, n_mc, ideal, chunk):
    """Yield, mean and standard deviation over builds x conditions for each design."""
    z = mc_draws(study, n_mc)
    nd = len(next(iter(design.values()))) if design else 1   # no timing parts: one design
    nc = len(next(iter(cond.values())))
    b_step = max(1, chunk // max(1, nd * nc))
    ok = np.zeros(nd)
    s1 = {o: np.zeros(nd) for o in outs}
    s2 = {o: np.zeros(nd) for o in outs}
    shift = {o: None for o in outs}
    for b0 in range(0, n_mc, b_step):
        sl = slice(b0, min(n_mc, b0 + b_step))
        out = evaluate_block(study, design, cond, ideal=ideal, variation=mc_variation(study, z, sl),
                             with_spec=False)
        full = (nd, sl.stop - sl.start, nc)       # an output may not vary along every axis
        out = {k: np.broadcast_to(v, full) for k, v in out.items()}
        if study.spec:
            good = ~spec_fail(study, out).any(axis=2)
        else:
            main = main_outputs(study.circuit)
            good = np.isfinite(out[main[0]]).all(axis=2) if main else np.ones(out["flag_mask"].shape[:2], bool)
        ok += good.sum(axis=1)
        for o in outs:
            v = out[o]
            if shift[o] is None:          # shifted sums keep the variance accurate [derived]
                shift[o] = v[:, :1, :1].copy()
            d = v - shift[o]
            s1[o] += d.sum(axis=(1, 2))
            s2[o] += (d * d).sum(axis=(1, 2))
    n = n_mc * nc
    mean = {o: s1[o] / n + shift[o][:, 0, 0] for o in outs}
    std = {o: np.sqrt(np.maximum(s2[o] / n - (s1[o] / n) ** 2, 0.0) * n / max(n - 1, 1)) for o in outs}
    return ok / n_mc, mean, std


def _wc_margin(study: Study, row: dict) -> np.ndarray:
    """Smallest relative distance from the worst case to a spec limit (negative: outside)."""
    nd = len(row["design"])
    margin = np.full(nd, np.inf)
    for s in study.spec:
        with np.errstate(all="ignore"):
            if np.isfinite(s.lo):
                margin = np.minimum(margin, (row[f"{s.column}_wc_min"] - s.lo) / max(abs(s.lo), 1e-300))
            if np.isfinite(s.hi):
                margin = np.minimum(margin, (s.hi - row[f"{s.column}_wc_max"]) / max(abs(s.hi), 1e-300))
    return np.where(np.isnan(margin), -np.inf, margin)


def points_frame(study: Study, d_idx, c_idx, design, cond, out) -> pd.DataFrame:
    """Rows of design x condition points (machine columns) from a block's arrays."""
    nd, nc = len(d_idx), len(c_idx)
    cols: dict[str, np.ndarray] = {"design": np.repeat(d_idx + 1, nc), "condition": np.tile(c_idx + 1, nd)}
    for a in study.design:
        cols[a.column] = np.repeat(design[a.key], nc)
    for a in study.conditions:
        cols[a.column] = np.tile(cond[a.key], nd)
    from .variables import OUTPUTS
    for o in OUTPUTS:
        cols[o] = np.broadcast_to(out[o][:, 0, :], (nd, nc)).ravel()
    mask = np.broadcast_to(out["flag_mask"][:, 0, :], (nd, nc)).ravel()
    cols["flags"] = flag_text(mask)
    cols["ok"] = mask == 0
    return pd.DataFrame(cols)


def flag_text(mask: np.ndarray) -> np.ndarray:
    """Space-separated flag codes for each mask value (vectorised over unique masks)."""
    uniq, inv = np.unique(mask, return_inverse=True)
    labels = np.array([" ".join(flag_names(int(u))) for u in uniq], dtype=object)
    return labels[inv.ravel()]


# ------------------------------------------------------------------ ranking

def plainness(study: Study, designs: pd.DataFrame) -> tuple[np.ndarray, np.ndarray]:
    """(coarsest series index needed, distinct resistor values) per design: lower is plainer."""
    nd = len(designs)
    worst = np.zeros(nd, dtype=int)
    r_cols = [AXES[k][0] for k in ("ra", "rb", "r") if AXES[k][0] in designs]
    for a in study.design:
        if a.key not in ("ra", "rb", "r", "c"):
            continue
        order = np.argsort(a.values, kind="stable")
        pos = order[np.clip(np.searchsorted(a.values[order], designs[a.column].to_numpy()),
                            0, len(a.values) - 1)]
        worst = np.maximum(worst, a.series_rank[pos])
    if len(r_cols) > 1:
        vals = designs[r_cols].to_numpy()
        distinct = 1 + (np.diff(np.sort(vals, axis=1), axis=1) != 0).sum(axis=1)
    else:
        distinct = np.full(nd, len(r_cols))
    return worst, distinct


RANK_KEYS = ["design", "feasible", "yield", "wc_margin", "supply_current_a_max", "series_need",
             "distinct_values"]


def rank_designs(designs: pd.DataFrame) -> np.ndarray:
    """Rank of each row (1 = the pick): feasible first, then yield, worst-case margin, supply
    current, plainer parts (coarser series, fewer distinct values), design number."""
    order = np.lexsort((designs["design"].to_numpy(),
                        designs["distinct_values"].to_numpy(),
                        designs["series_need"].to_numpy(),
                        designs["supply_current_a_max"].fillna(np.inf).to_numpy(),
                        -designs["wc_margin"].to_numpy(),
                        -designs["yield"].fillna(-1.0).to_numpy(),
                        ~designs["feasible"].to_numpy(dtype=bool)))
    rank = np.empty(len(designs), dtype=np.int64)
    rank[order] = np.arange(1, len(designs) + 1)
    return rank


def analyse_designs(study: Study, start: int, stop: int, opt: Options = Options()) -> pd.DataFrame:
    """Every figure of designs [start, stop) in one table, Monte Carlo included for the designs
    the screening keeps (for small sweeps and tests; the pipeline runs the two passes apart)."""
    df, _ = analyse_block(study, start, stop, opt)
    n_mc = study.monte_carlo if opt.monte_carlo is None else opt.monte_carlo
    keep = df.loc[df["reach"], "design"].to_numpy()
    if n_mc > 0 and len(keep):
        mc = monte_carlo_block(study, keep, opt)
        df = df.drop(columns=["yield"]).merge(mc, on="design", how="left")
        df["yield"] = df["yield"].where(df["reach"], 0.0)
    else:
        for c in mc_columns(study)[2:]:
            df[c] = np.nan
    tail = mc_columns(study)[1:]
    return df[[c for c in df.columns if c not in tail] + tail]
