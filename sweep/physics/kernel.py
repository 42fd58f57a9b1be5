"""The realistic model, compiled: `evaluate` with the signature and results of
`sweep.physics.model.evaluate`, several times faster on big sweeps.

`model.evaluate` stays the reference and the fallback; this module changes no equation. What
depends only on the conditions or the builds (thresholds, the output stage against its load, the
quiescent current, the capacitance curve's shape, the limit flags of supply, temperature and
output current) is computed by the reference's own numpy functions on their small broadcast
shapes; what varies per point (the timing node's phases, currents, powers, the discharge surge,
the junction temperature and their flags) runs in compiled stages (`compiled/stages.py`) with
numpy's vector `exp` and `log` between them, tile by tile, in buffers reused between calls.

numba is imported only when a compiled evaluation first runs; `available()` asks for it without
importing it. Circuits outside `COMPILED` go to the reference.
"""
from __future__ import annotations

import importlib.util
import os
import threading

import numpy as np

from . import model
from .circuits import REGISTRY
from .model import FLAG_BITS
from .nodes import node_capacitance
from .output import output_states
from .parts import (INSULATION_MAX_OHM, INSULATION_TIME_S, LEAKAGE_A_PER_UF_V,
                    LEAKAGE_TYPICAL_SHARE, WET_LEAKAGE, Load, Parts,
                    capacitance_temperature_factor,
                    leakage_floor_a, leakage_temperature_factor, leakage_voltage_factor,
                    reverse_current_at, saturation_at, thermal_voltage_v)
from .timer import TimerModel

#: circuits with compiled stages; the others (astable-symmetric, bistable) use the reference model
COMPILED = ("astable", "astable-diode", "monostable", "missing-pulse")
#: the circuits with RA, RB and C and the astable's outputs
_TWO_RESISTOR = ("astable", "astable-diode")
#: a sweep (designs x conditions) smaller than this stays on numpy. Loading numba and the cached
#: stages costs about 0.5-0.7 s more than the numpy model's first call, and the kernel saves
#: about 0.1 us per model evaluation (both measured with tests/benchmarks/kernel.py on a shared
#: 2-core machine); a study's first pass evaluates about ten model points per swept point
#: (nominal, corners, elasticities), so it pays from about half a million swept points
MIN_POINTS = 500_000
#: points per tile: the stages' buffers stay in the core's cache
TILE_POINTS = 1 << 12
#: environment variable: "0" keeps every sweep on the numpy model
ENV = "TIMER_SWEEP_KERNEL"

_buffers = threading.local()


def available() -> bool:
    """True when numba can be imported (without importing it)."""
    return importlib.util.find_spec("numba") is not None


def supports(circuit: str, timer: TimerModel | None = None, parts: Parts | None = None,
             load: Load | None = None, ideal: bool = False) -> bool:
    """True when the compiled stages cover this configuration (every timer, capacitor, load
    and the ideal mode of the circuits in COMPILED)."""
    return circuit in COMPILED


def wanted(circuit: str, timer: TimerModel, parts: Parts, load: Load, ideal: bool,
           sweep_points: int) -> bool:
    """Whether a sweep of sweep_points points should use the compiled kernel: numba is there,
    the circuit is covered, the sweep is big enough to pay for loading it, and the environment
    does not say TIMER_SWEEP_KERNEL=0."""
    return (os.environ.get(ENV, "1") != "0" and sweep_points >= MIN_POINTS
            and supports(circuit, timer, parts, load, ideal) and available())


def _stages():
    from .compiled import diode, stages   # imports numba: only here
    stages.diode = diode
    return stages


def _buffer(name: str, rows: int, n: int) -> np.ndarray:
    """A per-thread scratch matrix of at least rows x n floats, reused between calls. Each row
    is one cache line longer than a power of two, so rows that a stage reads together do not
    fall into the same cache set."""
    buf = getattr(_buffers, name, None)
    if buf is None or buf.shape[0] < rows or buf.shape[1] < n:
        buf = np.zeros((rows, max(n, TILE_POINTS) + 8))
        setattr(_buffers, name, buf)
    return buf


def _shape3(shape: tuple) -> tuple:
    """The output shape as (designs, builds, conditions): leading axes padded or merged."""
    if len(shape) <= 3:
        return (1,) * (3 - len(shape)) + tuple(shape)
    return (int(np.prod(shape[:-2])), shape[-2], shape[-1])


def _pool(arrays: list, shape: tuple, shape3: tuple):
    """One float64 pool holding each array once (its broadcast axes stored once) and an index
    of (offset, stride along designs, builds, conditions) per array, in elements."""
    parts, index, offset = [], np.zeros((len(arrays), 4), dtype=np.int64), 0
    for n, x in enumerate(arrays):
        view = np.broadcast_to(np.asarray(x, dtype=np.float64), shape).reshape(shape3)
        compact = np.ascontiguousarray(view[tuple(slice(0, 1) if st == 0 else slice(None)
                                                  for st in view.strides)])
        index[n, 0] = offset
        for d in range(3):
            index[n, d + 1] = 0 if compact.shape[d] == 1 else compact.strides[d] // 8
        parts.append(compact.ravel())
        offset += compact.size
    return np.concatenate(parts), index


def _fingerprint(*items):
    """A key for the condition-level part of a call: the configuration records themselves (the
    key keeps them alive, and equal records give equal results) and the condition arrays by
    content; None (never cached) when an array is large."""
    key = []
    for x in items:
        if isinstance(x, (TimerModel, Parts, Load)):
            key.append(x)
            continue
        a = np.asarray(x)
        if a.size > 4096:
            return None
        key.append((a.shape, a.dtype.str, a.tobytes()))
    return tuple(key)


def _cached(key, compute):
    """The last call's condition-level results when its key matches (consecutive blocks of a
    sweep share their conditions), else computed afresh."""
    last = getattr(_buffers, "conditions", None)
    if key is not None and last is not None and last[0] == key:
        return last[1]
    value = compute()
    if key is not None:
        _buffers.conditions = (key, value)
    return value


def _conditions(st, circuit, timer, parts, load, ideal, *, vcc, temperature, control_voltage,
                load_resistance, load_factor, vf_shift, stage_factor, iq_factor, dc_bias_factor):
    """Everything that depends on the conditions and builds only, by the reference's own
    functions on their small shapes: thresholds, the output stage, the quiescent current,
    the capacitance's temperature factor and curve shape, and the limit flags of supply,
    temperature and output current [model.evaluate, model._capacitor, model._flags]."""
    vcc = np.asarray(vcc, dtype=float)
    t_amb = np.asarray(temperature, dtype=float)
    cv = np.asarray(control_voltage, dtype=float)
    rf = 1.0 + parts.resistor_tempco_per_k * (t_amb - 25.0)      # parts.resistor_at's factor
    v_up = np.where(np.isnan(cv), timer.threshold_fraction * vcc, cv)
    stage = output_states(timer, load, vcc, t_amb, load_resistance, load_factor, vf_shift,
                          1.0 if ideal else stage_factor)
    iq_h = timer.quiescent_a(vcc, output_high=True) * iq_factor
    iq_l = timer.quiescent_a(vcc, output_high=False) * iq_factor
    cap = parts.technology
    ctf = 1.0 if ideal else capacitance_temperature_factor(cap, t_amb)
    loss = 0.0 if ideal else (cap.dc_bias_loss if parts.dc_bias_loss is None else parts.dc_bias_loss)
    if loss != 0.0 and not (np.ndim(dc_bias_factor) == 0 and dc_bias_factor == 1.0):
        loss = loss * np.asarray(dc_bias_factor, dtype=float)
    timed_from_zero = REGISTRY[circuit].ramps_from_ground
    curve = node_capacitance(1.0, parts.stray_capacitance_f, loss, parts.capacitor_voltage_v,
                             v_up, 0.0 if timed_from_zero else 0.25)
    quad = curve.const is None
    shape_arrays = list(curve.shape) + [curve.a, curve.h] if quad else [0.0, 0.0, 0.0, 0.0, 1.0]
    bit = {k: np.uint32(v) for k, v in FLAG_BITS.items()}
    zero = np.uint32(0)
    mask_c = (np.where(vcc < timer.min_v, bit["supply-below-min"], zero)
              | np.where(vcc > timer.max_v, bit["supply-above-max"], zero)
              | np.where(vcc > timer.abs_max_v, bit["supply-above-abs-max"], zero)
              | np.where((t_amb < timer.ambient_min_c) | (t_amb > timer.ambient_max_c),
                         bit["temperature-out-of-range"], zero)
              | np.where((stage.i_high > timer.source_max_a) | (stage.i_low > timer.sink_max_a),
                         bit["output-current-over-limit"], zero))
    if timer.threshold_current_max_a > 0:
        r_max = timer.resistance_derating * (vcc - v_up) / timer.threshold_current_max_a
    else:
        r_max = np.inf
    # the wet capacitors' leakage factors of the condition [parts.leakage_conductance_s]
    pt = leakage_temperature_factor(t_amb)
    spow = leakage_voltage_factor(v_up, parts.capacitor_voltage_v)
    inputs = {st.VCC: vcc, st.TAMB: t_amb, st.VUP: v_up, st.RF: rf, st.CTF: ctf, st.PT: pt,
              st.SPOW: spow,
              st.IQH: iq_h, st.IQL: iq_l, st.VHIGH: stage.v_high, st.VLOW: stage.v_low,
              st.IHIGH: stage.i_high, st.ILOW: stage.i_low, st.RMAX: r_max, st.MASK_C: mask_c}
    inputs.update(zip((st.S0, st.S1, st.S2, st.A, st.H), shape_arrays))
    shape = np.broadcast_shapes(*(np.shape(x) for x in [
        vcc, t_amb, v_up, rf, ctf, iq_h, iq_l, stage.v_high, stage.v_low, stage.i_high,
        stage.i_low, pt, spow, *(shape_arrays if quad else [])]))
    segments = {k: _segment(x) for k, x in inputs.items()} if len(shape) <= 3 else {}
    return dict(t_amb=t_amb, v_up=v_up, stage=stage, quad=quad, shape=shape, inputs=inputs,
                segments=segments)


def _part_scalars(st, timer: TimerModel, parts: Parts, ideal: bool) -> np.ndarray:
    """The scalars of stages.parts_row: the leakage's kind, floor [A], rated voltage [V],
    typical share and rules [parts.leakage_conductance_s, leakage_max_a], the timer's smallest
    resistor and capacitor and their flag bits."""
    cap = parts.technology
    lk = np.zeros(st.N_LK)
    lk[st.LK_KIND] = (st.LEAK_NONE if ideal else st.LEAK_WET if cap.leakage in WET_LEAKAGE
                      else st.LEAK_INSULATION)
    lk[st.LK_FLOOR] = leakage_floor_a(cap)
    lk[st.LK_VRATED] = parts.capacitor_voltage_v
    lk[st.LK_SHARE] = LEAKAGE_TYPICAL_SHARE
    lk[st.LK_RMIN], lk[st.LK_CMIN] = timer.min_resistance_ohm, timer.min_capacitance_f
    lk[st.LK_BIT_R] = FLAG_BITS["resistor-too-small"]
    lk[st.LK_BIT_C] = FLAG_BITS["capacitor-too-small"]
    lk[st.LK_RULE], lk[st.LK_INS_R], lk[st.LK_INS_T] = (LEAKAGE_A_PER_UF_V, INSULATION_MAX_OHM,
                                                        INSULATION_TIME_S)
    return lk


def _segment(x):
    """An input of at most three axes as (its values, element strides along designs, builds,
    conditions), its axes right-aligned to the grid's; 0 where it does not vary."""
    a = np.ascontiguousarray(x, dtype=np.float64)
    a3 = a.reshape((1,) * (3 - a.ndim) + a.shape)
    return a3.ravel(), [0 if a3.shape[d] == 1 else a3.strides[d] // 8 for d in range(3)]


def operand_pool(arrays) -> tuple[np.ndarray, np.ndarray]:
    """Arrays of at most three axes (designs, builds, conditions; scalars too) as one float64
    pool and an index of (offset, strides along designs, builds, conditions) per array, the
    layout the compiled stages and folds read (an axis an array does not vary along has stride
    0)."""
    return _join([_segment(np.asarray(x, dtype=np.float64)) for x in arrays])


def _join(segments):
    """One pool of every segment's values and the index of (offset, strides) per input."""
    index = np.zeros((len(segments), 4), dtype=np.int64)
    offset = 0
    for n, (values, strides) in enumerate(segments):
        index[n, 0] = offset
        index[n, 1:] = strides
        offset += values.size
    return np.concatenate([v for v, _ in segments]), index


def evaluate(circuit: str, timer: TimerModel, parts: Parts, load: Load, *, vcc, temperature,
             c=np.nan, ra=np.nan, rb=np.nan, r=np.nan, control_voltage=np.nan,
             leak_factor=1.0, dc_bias_factor=1.0, diode_is_factor=1.0, iq_factor=1.0,
             load_factor=1.0, vf_shift=0.0, stage_factor=1.0,
             ideal: bool = False, load_resistance=np.nan, input_period=np.nan,
             fold=None, ra_factor=1.0, rb_factor=1.0, r_factor=1.0,
             c_factor=1.0) -> dict[str, np.ndarray] | None:
    """`sweep.physics.model.evaluate`, compiled: the same parameters (SI units, broadcasting
    arrays), the same keys, shapes and dtypes, the same values to rounding. Circuits outside
    COMPILED are passed to the reference.

    fold: a reduction folded in tile by tile instead of returning the grid (an object with
    `grid`, the shape it reduces, and `start(stages, rows, extra, shape3, width)`, which gets
    the output rows and condition-level outputs and returns the tile function; see
    sweep.folds). The result is then None, and the grid is never written to memory.
    ra_factor, rb_factor, r_factor, c_factor: multipliers of the parts (a build's or a corner's),
    applied per point: ra=x, ra_factor=m gives what ra=x*m gives, without the product's array."""
    if circuit not in COMPILED:
        if fold is not None:
            raise ValueError(f"the kernel has no stages for the {circuit} circuit to fold")
        return model.evaluate(circuit, timer, parts, load, vcc=vcc, temperature=temperature,
                              c=np.multiply(c, c_factor), ra=np.multiply(ra, ra_factor),
                              rb=np.multiply(rb, rb_factor), r=np.multiply(r, r_factor),
                              control_voltage=control_voltage,
                              leak_factor=leak_factor, dc_bias_factor=dc_bias_factor,
                              diode_is_factor=diode_is_factor, iq_factor=iq_factor,
                              load_factor=load_factor, vf_shift=vf_shift,
                              stage_factor=stage_factor, ideal=ideal,
                              load_resistance=load_resistance, input_period=input_period)
    st = _stages()
    key = _fingerprint(REGISTRY[circuit].ramps_from_ground, ideal, timer, parts, load, vcc,
                       temperature, control_voltage, load_resistance, load_factor, vf_shift,
                       stage_factor, iq_factor, dc_bias_factor)
    if ideal:
        timer, parts = timer.idealised(), parts.idealised()
    cond = _cached(key, lambda: _conditions(
        st, circuit, timer, parts, load, ideal, vcc=vcc, temperature=temperature,
        control_voltage=control_voltage, load_resistance=load_resistance,
        load_factor=load_factor, vf_shift=vf_shift, stage_factor=stage_factor,
        iq_factor=iq_factor, dc_bias_factor=dc_bias_factor))
    # --- what depends on the designs: the parts times their multipliers, the capacitor's
    # leakage and the part-limit flags, per point in compiled/stages.parts_row -----------------
    c_nom = np.asarray(c, dtype=float)
    lk = _part_scalars(st, timer, parts, ideal)
    t_in = np.asarray(input_period, dtype=float)
    # --- the output's shape: every array the reference's outputs broadcast ---------------------
    timing = [ra, rb, ra_factor, rb_factor] if circuit in _TWO_RESISTOR else [r, r_factor]
    timing += [c_factor, leak_factor]
    # the Shockley diode of astable-diode [circuits.astable_diode.charge, phases]: its
    # saturation current (a build's factor on it), n Vt and reverse leakage
    shockley = circuit == "astable-diode" and not ideal and parts.diode_drop_v is None
    i_sat = n_vt = i_rev = 0.0
    if shockley:
        diode = parts.diode_model
        i_sat = saturation_at(diode, cond["t_amb"]) * diode_is_factor
        n_vt = diode.ideality * thermal_voltage_v(cond["t_amb"])
        i_rev = reverse_current_at(diode, cond["t_amb"])
        timing.append(i_sat)
    v_drop = 0.0 if ideal or parts.diode_drop_v is None else float(parts.diode_drop_v)
    if circuit == "missing-pulse":
        timing.append(t_in)
    shape = np.broadcast_shapes(cond["shape"], *(np.shape(x) for x in [c_nom, *timing]))
    if fold is not None:             # the grid the fold reduces may be wider than the inputs'
        shape = np.broadcast_shapes(shape, fold.grid)
    shape3 = _shape3(shape)
    n = int(np.prod(shape3))
    quad = cond["quad"]
    i_trig = 0.0
    if REGISTRY[circuit].trigger_on_node:
        i_trig = -timer.trigger_current_a if timer.trigger_current_sources else timer.trigger_current_a
    r_sat_mono = timer.saturation_ohm + parts.discharge_resistor_ohm
    sc = np.array([timer.propagation_delay_s, parts.stray_capacitance_f,
                   timer.threshold_current_a + i_trig, timer.saturation_ohm, timer.saturation_v,
                   timer.surge_current_a, timer.discharge_max_a, timer.surge_energy_max_j,
                   parts.resistor_power_w, timer.theta_ja_c_per_w, timer.tj_max_c,
                   timer.max_frequency_hz, r_sat_mono, parts.discharge_resistor_ohm,
                   max(r_sat_mono, 1e-12)], dtype=np.float64)
    assert len(sc) == st.N_SCALARS
    design = {st.RA: ra, st.RB: rb, st.R: r, st.C: c_nom, st.TIN: t_in, st.ISAT: i_sat,
              st.NVT: n_vt, st.IREV: i_rev, st.MRA: ra_factor, st.MRB: rb_factor,
              st.MR: r_factor, st.MC: c_factor, st.LF: leak_factor,
              st.GLEAK: 0.0, st.MASK_D: 0.0}        # the last two: parts_row fills them
    if len(shape) <= 3:
        segments = dict(cond["segments"])
        segments.update((k, _segment(x)) for k, x in design.items())
        pool, ix = _join([segments[k] for k in range(st.N_INPUTS)])
    else:
        inputs = dict(cond["inputs"])
        inputs.update(design)
        pool, ix = _pool([inputs[k] for k in range(st.N_INPUTS)], shape, shape3)
    # --- the per-point stages, tile by tile ---------------------------------------------------
    n_out = st.N_ASTABLE if circuit in _TWO_RESISTOR else st.N_MONO
    nb, nc = shape3[1], shape3[2]
    rows = shape3[0] * nb
    step = max(1, TILE_POINTS // max(nc, 1))
    width = step * nc
    bufs = (_buffer("t", st.N_ROWS, width), _buffer("e", 2, width), _buffer("lg", 3, width))
    if circuit == "astable-diode":
        bufs = bufs + (_buffer("d", st.diode.N_D, width),)
    tile = None
    if fold is None:
        res = np.empty((n_out, n))
        flags = np.empty(n, dtype=np.uint32)
    else:                            # one tile's outputs at a time, folded while in the cache
        res = _buffer("res", n_out, width)
        flags = np.empty(res.shape[1], dtype=np.uint32)
        tile = fold.start(st, _rows(circuit, st), _extra(circuit, cond["stage"]), shape3, width)
    with np.errstate(all="ignore"):       # NaN where a phase never ends, as in the reference
        _run(st, circuit, quad, pool, ix, sc, lk, rows, step, nb, nc, bufs, res, flags,
             shockley, v_drop, tile)
    if fold is not None:
        return None
    return _result(circuit, st, res, flags, shape, cond["stage"])


def _run(st, circuit, quad, pool, ix, sc, lk, rows, step, nb, nc, bufs, res, flags,
         shockley=False, v_drop=0.0, tile=None):
    """The stages over every tile of rows, numpy's exp and log between them (astable-diode: its
    one stage, the exponentials inside). The scratch buffers are passed whole (the stages use
    their first m columns) so every call has the same array types. With a fold's tile function,
    each tile's outputs go to the start of res and tile(res, flags, r0, r1) folds them in."""
    t, e, lg = bufs[:3]
    astable = circuit == "astable"
    two = circuit in _TWO_RESISTOR
    need = [st.VCC, st.TAMB, st.C, st.MC, st.VUP, st.RF, st.CTF, st.IQH, st.IQL, st.VHIGH,
            st.VLOW, st.IHIGH, st.ILOW, st.RMAX, st.MASK_C]
    need += [st.RA, st.RB, st.MRA, st.MRB] if two else [st.R, st.MR]
    need += [] if lk[st.LK_KIND] == st.LEAK_NONE else [st.LF]        # what parts_row reads
    need += [st.PT, st.SPOW] if lk[st.LK_KIND] == st.LEAK_WET else []
    need += [st.ISAT, st.NVT, st.IREV] if shockley else []
    need += [st.S0, st.S1, st.S2, st.A, st.H] if quad else []
    need += [st.TIN] if circuit == "missing-pulse" else []
    # an input that does not vary along the designs, and either not along the builds or in
    # whole periods of them per tile, lays out the same in every tile: gathered once, in the
    # first tile (the longest). parts_row rewrites RA, RB, R and C in place: gathered each time.
    same = [n for n in need if ix[n, 1] == 0 and (ix[n, 2] == 0 or step % nb == 0)
            and n not in (st.RA, st.RB, st.R, st.C)]
    varying = np.array([n for n in need if n not in same], dtype=np.int64)
    need = np.array(need, dtype=np.int64)
    for r0 in range(0, rows, step):
        r1 = min(rows, r0 + step)
        m = (r1 - r0) * nc
        o = r0 * nc if tile is None else 0
        st.gather(pool, ix, need if r0 == 0 else varying, r0, r1, nb, nc, t)
        st.parts_row(t, lk, two, m)
        e_m, lg_m = e[:, :m], lg[:, :m]
        if circuit == "astable-diode":
            _diode_tile(st, quad, shockley, v_drop, t, sc, m, bufs[3], res, flags, o)
        elif astable:
            st.astable_nets(t, sc, m)
            st.astable_exp1(t, sc, quad, m, e)
            np.exp(e_m, out=e_m)
            if quad:
                st.astable_exp2(t, sc, m, e)
                np.exp(e_m, out=e_m)
            st.astable_logs(t, sc, m, e, lg)
            np.log(lg_m, out=lg_m)
            st.astable_high(t, sc, quad, m, e, lg, res, o)
            st.astable_low(t, sc, quad, m, e, lg, res, o)
            st.astable_sum(t, sc, m, res, o)
            st.astable_rates(t, sc, m, res, flags, o)
            st.astable_discharge(t, sc, quad, m, e, lg, res, flags, o)
            # the waveform's levels: copies of rows the stages already hold
            res[st.A_VBOT, o:o + m] = e[0, :m]
            res[st.A_VTOP, o:o + m] = e[1, :m]
            res[st.A_VINFH, o:o + m] = t[st.VINFH, :m]
            res[st.A_VINFL, o:o + m] = t[st.VINFD, :m]
        else:
            st.mono_nets(t, sc, m)
            st.mono_exp1(t, sc, quad, m, e, lg)
            np.exp(e_m[0], out=e_m[0])
            np.log(lg_m[0], out=lg_m[0])
            if quad:
                st.mono_exp2(t, sc, m, e)
                np.exp(e_m[0], out=e_m[0])
            st.mono_logs(t, sc, m, e, lg)
            np.log(lg_m[1], out=lg_m[1])
            missing = circuit == "missing-pulse"
            st.mono_pulse(t, sc, quad, m, e, lg, res, o)
            if missing:
                st.missing_supply(t, sc, m, lg, res, o)
            st.mono_heat(t, sc, missing, m, res, flags, o)
            st.mono_discharge(t, sc, quad, m, e, lg, res, flags, o)
            res[st.M_V0, o:o + m] = t[st.V0, :m]
            res[st.M_VTOP, o:o + m] = e[0, :m]
            res[st.M_VINF, o:o + m] = t[st.VINFC, :m]
        if tile is not None:
            tile(res, flags, r0, r1)


def _omega(dg, d, r0, n, m):
    """parts.wright_omega of rows r0..r0+n of d (their first m columns), in place: its start and
    Newton steps in compiled stages, numpy's exp and log between them."""
    dg.omega_start(d, r0, n, m)
    e, lg = d[dg.OE:dg.OE + n, :m], d[dg.OL:dg.OL + n, :m]
    np.exp(e, out=e)
    np.log(lg, out=lg)
    dg.omega_first(d, r0, n, m)
    for k in range(dg.OMEGA_STEPS):
        np.log(lg, out=lg)
        dg.omega_step(d, r0, n, m, k == dg.OMEGA_STEPS - 1)


def _diode_tile(st, quad, shockley, v_drop, t, sc, m, d, res, flags, o):
    """The astable-diode stages over one tile of m points (compiled/diode.py), numpy's exp,
    expm1 and log on rows of d between them."""
    dg = st.diode
    def apply(fn, *rows):
        for k in rows:
            fn(d[k, :m], out=d[k, :m])
    dg.nets(t, sc, quad, shockley, m, d)
    apply(np.exp, dg.E0)
    if quad:
        dg.bot2(t, sc, m, d)
        apply(np.exp, dg.E0)
    dg.bot(t, m, d)
    if shockley:
        dg.shock_lg(t, m, d)
        apply(np.log, dg.LG)
        dg.shock_ends(t, m, d)
        _omega(dg, d, dg.W0, 3, m)
        dg.shock_currents(t, sc, m, d)
        apply(np.log, dg.LAM)
        dg.shock_powers(m, d)
        apply(np.expm1, dg.EM1, *range(dg.EMK, dg.EMK + dg.N_GL))
        apply(np.exp, *range(dg.EXK, dg.EXK + dg.N_GL))
        dg.shock_nodes(t, m, d)
        _omega(dg, d, dg.WK, dg.N_GL, m)
        dg.shock_sum(t, sc, quad, m, d)
        apply(np.exp, dg.E1)
        if quad:
            dg.shock_run2(t, sc, m, d)
            apply(np.exp, dg.E1)
        dg.shock_end(t, sc, quad, m, d)
    else:
        dg.fixed1(t, sc, quad, v_drop, m, d)
        apply(np.log, dg.L1, dg.L2)
        apply(np.exp, dg.E1)
        if quad:
            dg.fixed2(t, sc, v_drop, m, d)
            apply(np.exp, dg.E1)
        dg.fixed3(t, sc, v_drop, m, d)
        apply(np.log, dg.LX)
        dg.fixed_cross(t, sc, quad, v_drop, m, d)
        apply(np.exp, dg.EX)
        dg.fixed_end(t, sc, quad, v_drop, m, d)
    dg.low_logs(t, sc, m, d)
    apply(np.log, dg.LL, dg.LS)
    dg.finish_sum(t, sc, quad, m, d, res, o)
    dg.finish_rates(t, sc, m, d, res, flags, o)
    dg.finish_discharge(t, sc, quad, m, d, res, flags, o)
    # the waveform's levels: copies of rows the stages already hold
    res[st.A_VBOT, o:o + m] = d[dg.VBOT, :m]
    res[st.A_VTOP, o:o + m] = d[dg.VTOP, :m]
    res[st.A_VINFH, o:o + m] = d[dg.VINFH, :m]
    res[st.A_VINFL, o:o + m] = d[dg.VINFD, :m]


def _rows(circuit, st) -> dict[str, int]:
    """The row of the stages' output matrix that holds each per-point output."""
    if circuit in _TWO_RESISTOR:
        return dict(high_time_s=st.A_TH, low_time_s=st.A_TL, period_s=st.A_PER,
                    frequency_hz=st.A_FREQ, duty=st.A_DUTY, supply_current_a=st.A_SUPPLY,
                    discharge_peak_a=st.A_PEAK, ra_power_w=st.A_PRES, wave_v_start_v=st.A_VBOT,
                    wave_v_top_v=st.A_VTOP, wave_vinf_high_v=st.A_VINFH,
                    wave_vinf_low_v=st.A_VINFL, discharge_dump_s=st.A_DUMP, power_w=st.A_POWER,
                    junction_temp_c=st.A_TJ)
    rows = dict(supply_current_a=st.M_SUPPLY, idle_current_a=st.M_IDLE,
                discharge_peak_a=st.M_PEAK, ra_power_w=st.M_PRES, wave_v_start_v=st.M_V0,
                wave_v_top_v=st.M_VTOP, wave_vinf_high_v=st.M_VINF, wave_vinf_low_v=st.M_V0,
                discharge_dump_s=st.M_DUMP, power_w=st.M_POWER, junction_temp_c=st.M_TJ)
    if circuit == "missing-pulse":
        rows.update(timeout_s=st.M_PW, timeout_margin_s=st.M_MARGIN)
    else:
        rows.update(high_time_s=st.M_PW, pulse_width_s=st.M_PW)
    return rows


def _extra(circuit, stage) -> dict[str, object]:
    """The outputs that are not per point: the output stage's, at the condition level, and NaN
    for what the circuit does not have (`_rows` takes precedence)."""
    out = dict(output_high_v=stage.v_high, output_low_v=stage.v_low,
               output_current_a=np.maximum(stage.i_high, stage.i_low))
    for k in ("high_time_s", "low_time_s", "period_s", "frequency_hz", "duty", "pulse_width_s",
              "idle_current_a", "timeout_s", "timeout_margin_s"):
        out.setdefault(k, np.nan)
    return out


#: the reference's result keys, in its order
_KEYS = ("high_time_s", "low_time_s", "period_s", "frequency_hz", "duty", "pulse_width_s",
         "supply_current_a", "idle_current_a", "discharge_peak_a", "ra_power_w", "wave_v_start_v",
         "wave_v_top_v", "wave_vinf_high_v", "wave_vinf_low_v", "discharge_dump_s", "timeout_s",
         "timeout_margin_s", "power_w", "output_high_v", "output_low_v", "output_current_a",
         "junction_temp_c")


def _keys(circuit) -> tuple[str, ...]:
    """The result's keys: the missing-pulse detector's timeout keys come before the dump's, as
    in the reference."""
    if circuit != "missing-pulse":
        return _KEYS
    k = list(_KEYS)
    k.remove("discharge_dump_s")
    k.insert(k.index("timeout_margin_s") + 1, "discharge_dump_s")
    return tuple(k)


def _result(circuit, st, res, flags, shape, stage) -> dict[str, np.ndarray]:
    """The reference's result dict from the stages' output rows (`_rows`) and the outputs at
    the condition level (`_extra`)."""
    rows, extra = _rows(circuit, st), _extra(circuit, stage)
    out = {k: res[rows[k]].reshape(shape) if k in rows
           else np.broadcast_to(np.asarray(extra[k], dtype=float), shape) for k in _keys(circuit)}
    out["flag_mask"] = flags.reshape(shape)
    return out
