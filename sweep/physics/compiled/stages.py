"""Compiled stages of the realistic model (numba): the per-point arithmetic of
`sweep.physics.model`, transcribed operation by operation so the results agree with it to
rounding.

Each stage is one simple loop over a tile of points that the compiler can vectorise. The
exponentials and logarithms sit between stages, where numpy's vector `exp` and `log` evaluate a
whole tile at once; a stage recomputes cheap per-point quantities rather than storing them.

Inputs arrive in one pool of float64 values with an index (offset and element strides along
designs, builds and conditions) per input, so every call has the same types, one compiled
specialisation serves them all and the on-disk cache holds it; an input that does not vary
along an axis has stride 0 there and is stored once. A tile is a range
of rows (design, build) with every condition of each row. The equations, their sources and their
units are documented in `sweep.physics.model` and `sweep.physics.nodes`; nothing here is new
physics.
"""
from __future__ import annotations

import math

import numpy as np
from numba import njit

from ..model import FLAG_BITS

OPTS = dict(cache=True, error_model="numpy", fastmath=False, nogil=True)

# flag bits computed per point (the others come from the condition and design arrays)
TOO_LARGE = np.uint32(FLAG_BITS["resistance-too-large"])
DISCHARGE = np.uint32(FLAG_BITS["discharge-current-over-limit"])
OVERPOWERED = np.uint32(FLAG_BITS["resistor-overpowered"])
HOT = np.uint32(FLAG_BITS["junction-too-hot"])
STALLS = np.uint32(FLAG_BITS["timing-stalls"])
FAST = np.uint32(FLAG_BITS["frequency-too-high"])
FALSE_ALARM = np.uint32(FLAG_BITS["false-alarm"])

# positions of the inputs in the tuple of 3-D float arrays (see kernel.py, which fills it)
VCC, TAMB, RA, RB, R, C, VUP, RF, CTF, GLEAK, S0, S1, S2, A, H, IQH, IQL, VHIGH, VLOW, IHIGH, \
    ILOW, RMAX, TIN, MASK_C, MASK_D = range(25)
N_INPUTS = 25
# positions of the scalars in the float vector
TPD, STRAY, IDRAW, RS, VS, SURGE_A, DIS_MAX, SURGE_E_MAX, P_MAX, THETA, TJ_MAX, F_MAX, \
    R_SAT_MONO, R_S, R_SAT_DIV = range(15)
N_SCALARS = 15
# astable outputs, in the rows of the output matrix
A_TH, A_TL, A_PER, A_FREQ, A_DUTY, A_SUPPLY, A_PEAK, A_PRES, A_VBOT, A_VTOP, A_VINFH, A_VINFL, \
    A_DUMP, A_POWER, A_TJ = range(15)
N_ASTABLE = 15
# monostable and missing-pulse outputs
M_PW, M_SUPPLY, M_IDLE, M_PEAK, M_PRES, M_V0, M_VTOP, M_VINF, M_DUMP, M_POWER, M_TJ, M_MARGIN \
    = range(12)
N_MONO = 12


@njit(**OPTS)
def _g(pool, ix, n, i, j, k):
    """Input n at point (i, j, k) of the 3-D grid."""
    return pool[ix[n, 0] + i * ix[n, 1] + j * ix[n, 2] + k * ix[n, 3]]


@njit(**OPTS)
def _fmin(a, b):
    """np.minimum: NaN if either is NaN."""
    if a != a or b != b:
        return a + b
    return a if a <= b else b


@njit(**OPTS)
def _fmax(a, b):
    """np.maximum: NaN if either is NaN."""
    if a != a or b != b:
        return a + b
    return a if a >= b else b


@njit(**OPTS)
def _cap_at_fraction(quad, x, scale, stray, s0, s1, s2, h):
    """NodeCapacitance.at_fraction: (C [F], dC/dv [F/V]) at fraction x of the fit range."""
    if not quad:
        return scale + stray, 0.0
    return scale * (s0 + x * (s1 + x * s2)) + stray, scale * (s1 + 2.0 * s2 * x) / h


@njit(**OPTS)
def _cap_at(quad, v, scale, stray, s0, s1, s2, a, h):
    """NodeCapacitance.at: C [F] at node voltage v [V]."""
    if not quad:
        return scale + stray
    x = (v - a) / h
    return scale * (s0 + x * (s1 + x * s2)) + stray


@njit(**OPTS)
def _linear_time(quad, log, vinf, g, v0, v1, scale, stray, s0, s1, s2, a, h):
    """NodeCapacitance.linear_time with its logarithm given: (time [s], charge [C])."""
    if not quad:
        cst = scale + stray
        return cst / g * log, cst * (v1 - v0)
    big_x = (vinf - a) / h
    p1 = s1 + 2.0 * s2 * big_x
    p0 = s0 + big_x * (s1 + big_x * s2)
    u0 = (vinf - v0) / h
    u1 = (vinf - v1) / h
    d1 = u0 - u1
    d2 = d1 * (u0 + u1)
    d3 = d1 * (u0 * u0 + u0 * u1 + u1 * u1)
    t = (scale * (p0 * log - p1 * d1 + s2 * 0.5 * d2) + stray * log) / g
    q = scale * h * (p0 * d1 - p1 * 0.5 * d2 + s2 * d3 / 3.0) + stray * (v1 - v0)
    return t, q


# --- astable (RA, RB, C) ----------------------------------------------------------------------

@njit(**OPTS)
def _astable_point(pool, ix, sc, i, j, k):
    """The astable's per-point networks: RA and RB at temperature, the discharge node's
    Thevenin source and its line a + b V, both phases' (V_inf, g), and C and dC/dv at the two
    thresholds."""
    vcc = _g(pool, ix, VCC, i, j, k)
    rf = _g(pool, ix, RF, i, j, k)
    ra_t = _g(pool, ix, RA, i, j, k) * rf
    rb_t = _g(pool, ix, RB, i, j, k) * rf
    g_leak = _g(pool, ix, GLEAK, i, j, k)
    i_draw = sc[IDRAW]
    rs = sc[RS]
    vs = sc[VS]
    v_d = (vcc * rs + vs * ra_t) / (ra_t + rs)
    r_d = ra_t * rs / (ra_t + rs)
    den = rs * rb_t + ra_t * rb_t + ra_t * rs
    a_d = (vcc * rs * rb_t + vs * ra_t * rb_t) / den
    b_d = ra_t * rs / den
    r_low = rb_t + r_d
    g_d = 1.0 / r_low + g_leak
    vinf_d = (v_d / r_low - i_draw) / g_d
    r_high = ra_t + rb_t
    g_h = 1.0 / r_high + g_leak
    vinf_h = (vcc / r_high - i_draw) / g_h
    return vcc, ra_t, rb_t, g_leak, a_d, b_d, vinf_d, g_d, vinf_h, g_h


@njit(**OPTS)
def _curve(pool, ix, sc, i, j, k):
    scale = _g(pool, ix, C, i, j, k) * _g(pool, ix, CTF, i, j, k)
    return (scale, sc[STRAY], _g(pool, ix, S0, i, j, k), _g(pool, ix, S1, i, j, k), _g(pool, ix, S2, i, j, k),
            _g(pool, ix, A, i, j, k), _g(pool, ix, H, i, j, k))


@njit(**OPTS)
def astable_exp1(pool, ix, sc, quad, r0, r1, nb, nc, e):
    """Arguments of the first exponential of both run-ons (the low phase past Vc/2, the high
    phase past Vc)."""
    tpd = sc[TPD]
    for r in range(r0, r1):
        i = r // nb
        j = r - i * nb
        base = (r - r0) * nc
        for k in range(nc):
            vcc, ra_t, rb_t, g_leak, a_d, b_d, vinf_d, g_d, vinf_h, g_h = _astable_point(pool, ix, sc, i, j, k)
            scale, stray, s0, s1, s2, a, h = _curve(pool, ix, sc, i, j, k)
            c_lo, dc_lo = _cap_at_fraction(quad, 1.0 / 3.0, scale, stray, s0, s1, s2, h)
            c_up, dc_up = _cap_at_fraction(quad, 1.0, scale, stray, s0, s1, s2, h)
            e[0, base + k] = -tpd * g_d / c_lo
            e[1, base + k] = -tpd * g_h / c_up


@njit(**OPTS)
def astable_exp2(pool, ix, sc, r0, r1, nb, nc, e):
    """Second exponential of both run-ons: C taken at the middle of the run [see nodes.run_on]."""
    tpd = sc[TPD]
    for r in range(r0, r1):
        i = r // nb
        j = r - i * nb
        base = (r - r0) * nc
        for k in range(nc):
            vcc, ra_t, rb_t, g_leak, a_d, b_d, vinf_d, g_d, vinf_h, g_h = _astable_point(pool, ix, sc, i, j, k)
            scale, stray, s0, s1, s2, a, h = _curve(pool, ix, sc, i, j, k)
            v_up = _g(pool, ix, VUP, i, j, k)
            v_lo = 0.5 * v_up
            c_lo, dc_lo = _cap_at_fraction(True, 1.0 / 3.0, scale, stray, s0, s1, s2, h)
            c_up, dc_up = _cap_at_fraction(True, 1.0, scale, stray, s0, s1, s2, h)
            v_est = vinf_d - (vinf_d - v_lo) * e[0, base + k]
            e[0, base + k] = -tpd * g_d / (c_lo + 0.5 * dc_lo * (v_est - v_lo))
            v_est = vinf_h - (vinf_h - v_up) * e[1, base + k]
            e[1, base + k] = -tpd * g_h / (c_up + 0.5 * dc_up * (v_est - v_up))


@njit(**OPTS)
def astable_logs(pool, ix, sc, r0, r1, nb, nc, e, lg):
    """The node where the cycle starts (v_bot) and tops out (v_top) from the run-ons, and the
    arguments of the logarithms: both phases' RC law and the discharge surge's exponential
    tail. e[0], e[1] become v_bot and v_top."""
    surge_a = sc[SURGE_A]
    rs = sc[RS]
    for r in range(r0, r1):
        i = r // nb
        j = r - i * nb
        base = (r - r0) * nc
        for k in range(nc):
            vcc, ra_t, rb_t, g_leak, a_d, b_d, vinf_d, g_d, vinf_h, g_h = _astable_point(pool, ix, sc, i, j, k)
            v_up = _g(pool, ix, VUP, i, j, k)
            v_lo = 0.5 * v_up
            v_bot = vinf_d - (vinf_d - v_lo) * e[0, base + k]
            v_top = vinf_h - (vinf_h - v_up) * e[1, base + k]
            e[0, base + k] = v_bot
            e[1, base + k] = v_top
            lg[0, base + k] = (vinf_h - v_bot) / (vinf_h - v_up)
            lg[1, base + k] = (vinf_d - v_top) / (vinf_d - v_lo)
            v_knee = _fmin(v_top, surge_a * (rs + rb_t))
            lg[2, base + k] = _fmax(v_knee / (0.1 * v_top), 1.0)


@njit(**OPTS)
def astable_finish(pool, ix, sc, quad, r0, r1, nb, nc, e, lg, out, flags):
    """Both phases, currents, powers, the discharge surge, junction temperature and the
    per-point flags [model._astable, model._surge, model._flags]."""
    tpd = sc[TPD]
    i_draw = sc[IDRAW]
    surge_a = sc[SURGE_A]
    r_sat = sc[RS]
    for r in range(r0, r1):
        i = r // nb
        j = r - i * nb
        base = (r - r0) * nc
        for k in range(nc):
            p = base + k
            vcc, ra_t, rb_t, g_leak, a_d, b_d, vinf_d, g_d, vinf_h, g_h = _astable_point(pool, ix, sc, i, j, k)
            scale, stray, s0, s1, s2, a, h = _curve(pool, ix, sc, i, j, k)
            v_up = _g(pool, ix, VUP, i, j, k)
            v_lo = 0.5 * v_up
            v_bot = e[0, p]
            v_top = e[1, p]
            c_up = _cap_at_fraction(quad, 1.0, scale, stray, s0, s1, s2, h)[0]
            c_lo = _cap_at_fraction(quad, 1.0 / 3.0, scale, stray, s0, s1, s2, h)[0]
            # high phase: linear_phase from v_bot to v_up and on to v_top
            t, q = _linear_time(quad, lg[0, p], vinf_h, g_h, v_bot, v_up, scale, stray, s0, s1, s2, a, h)
            vt_h = vinf_h * t - q / g_h + 0.5 * (v_up + v_top) * tpd
            time_h = t + tpd
            charge_h = q + c_up * (v_top - v_up)
            # low phase: from v_top to v_lo and on to v_bot
            t, q = _linear_time(quad, lg[1, p], vinf_d, g_d, v_top, v_lo, scale, stray, s0, s1, s2, a, h)
            vt_l = vinf_d * t - q / g_d + 0.5 * (v_lo + v_bot) * tpd
            time_l = t + tpd
            stalls = (vinf_h <= v_up) | (vinf_d >= v_lo)
            t_h = np.nan if stalls else time_h
            t_l = np.nan if stalls else time_l
            period = t_h + t_l
            q_h = charge_h + g_leak * vt_h + i_draw * time_h
            vm_l = vt_l / time_l
            vd_mean = a_d + b_d * vm_l
            i_ra_l = (vcc - vd_mean) / ra_t
            vd_top = a_d + b_d * v_top
            dis_peak = _fmin((vcc - vd_top) / ra_t + (v_top - vd_top) / rb_t, surge_a)
            vd_bot = a_d + b_d * v_bot
            steady = (vcc - vd_bot) / ra_t + (v_bot - vd_bot) / rb_t
            i_start = (vcc - v_bot) / (ra_t + rb_t)
            p_res = _fmax((vcc - vd_bot) * (vcc - vd_bot) / ra_t, i_start * i_start * ra_t)
            p_dis_l = vd_mean * (i_ra_l + (vm_l - vd_mean) / rb_t)
            iq_h = _g(pool, ix, IQH, i, j, k)
            iq_l = _g(pool, ix, IQL, i, j, k)
            v_high = _g(pool, ix, VHIGH, i, j, k)
            v_low = _g(pool, ix, VLOW, i, j, k)
            i_high = _g(pool, ix, IHIGH, i, j, k)
            i_low = _g(pool, ix, ILOW, i, j, k)
            i_h = iq_h + q_h / time_h + i_high
            i_l = iq_l + i_ra_l + i_low
            supply = (t_h * i_h + t_l * i_l) / period
            p_chip_h = vcc * iq_h + (vcc - v_high) * i_high
            p_chip_l = vcc * iq_l + v_low * i_low + p_dis_l
            p_chip = (t_h * p_chip_h + t_l * p_chip_l) / period
            # the discharge transistor's turn-on surge through RB [model._surge]
            c_mean = _cap_at(quad, 0.5 * (v_lo + v_top), scale, stray, s0, s1, s2, a, h)
            energy = 0.5 * c_mean * (v_top * v_top - v_lo * v_lo)
            r_eff = _fmax(r_sat, v_top / surge_a - rb_t)
            e_tr = energy * r_eff / (r_eff + rb_t)
            r_loop = r_sat + rb_t
            v_knee = _fmin(v_top, surge_a * r_loop)
            t_cc = c_mean * (v_top - v_knee) / surge_a
            duration = t_cc + (c_mean * r_loop) * lg[2, p]      # lg holds the logarithm now
            t_amb = _g(pool, ix, TAMB, i, j, k)
            tj = t_amb + sc[THETA] * p_chip
            freq = 1.0 / period
            out[A_TH, p] = t_h
            out[A_TL, p] = t_l
            out[A_PER, p] = period
            out[A_FREQ, p] = freq
            out[A_DUTY, p] = t_h / period
            out[A_SUPPLY, p] = supply
            out[A_PEAK, p] = dis_peak
            out[A_PRES, p] = p_res
            out[A_VBOT, p] = v_bot
            out[A_VTOP, p] = v_top
            out[A_VINFH, p] = vinf_h
            out[A_VINFL, p] = vinf_d
            out[A_DUMP, p] = duration
            out[A_POWER, p] = vcc * supply
            out[A_TJ, p] = tj
            m = np.uint32(_g(pool, ix, MASK_C, i, j, k)) | np.uint32(_g(pool, ix, MASK_D, i, j, k))
            if _g(pool, ix, RA, i, j, k) + _g(pool, ix, RB, i, j, k) > _g(pool, ix, RMAX, i, j, k):
                m |= TOO_LARGE
            if (steady > sc[DIS_MAX]) | (e_tr > sc[SURGE_E_MAX]):
                m |= DISCHARGE
            if p_res > sc[P_MAX]:
                m |= OVERPOWERED
            if tj > sc[TJ_MAX]:
                m |= HOT
            if stalls:
                m |= STALLS
            if freq > sc[F_MAX]:
                m |= FAST
            flags[p] = m


# --- monostable (R, C) and the missing-pulse detector -----------------------------------------

@njit(**OPTS)
def _mono_point(pool, ix, sc, i, j, k):
    """The monostable's resting node v0 (R against the discharge transistor, leakage and the
    threshold input) and its timing network (V_inf, g) [model._monostable]."""
    vcc = _g(pool, ix, VCC, i, j, k)
    r_t = _g(pool, ix, R, i, j, k) * _g(pool, ix, RF, i, j, k)
    g_leak = _g(pool, ix, GLEAK, i, j, k)
    i_draw = sc[IDRAW]
    r_sat = sc[R_SAT_MONO]
    if r_sat > 0:
        v0 = ((vcc / r_t + sc[VS] / r_sat - i_draw) / (1.0 / r_t + 1.0 / r_sat + g_leak))
    else:
        v0 = sc[VS] + 0.0 * vcc * r_t
    g_c = 1.0 / r_t + g_leak
    vinf_c = (vcc / r_t - i_draw) / g_c
    return vcc, r_t, g_leak, v0, vinf_c, g_c


@njit(**OPTS)
def mono_exp1(pool, ix, sc, quad, r0, r1, nb, nc, e, lg):
    """The run-on's first exponential and the RC law's logarithm of the timing ramp."""
    tpd = sc[TPD]
    for r in range(r0, r1):
        i = r // nb
        j = r - i * nb
        base = (r - r0) * nc
        for k in range(nc):
            vcc, r_t, g_leak, v0, vinf_c, g_c = _mono_point(pool, ix, sc, i, j, k)
            scale, stray, s0, s1, s2, a, h = _curve(pool, ix, sc, i, j, k)
            c_up = _cap_at_fraction(quad, 1.0, scale, stray, s0, s1, s2, h)[0]
            e[0, base + k] = -tpd * g_c / c_up
            lg[0, base + k] = (vinf_c - v0) / (vinf_c - _g(pool, ix, VUP, i, j, k))


@njit(**OPTS)
def mono_exp2(pool, ix, sc, r0, r1, nb, nc, e):
    """The run-on's second exponential, C at the middle of the run."""
    tpd = sc[TPD]
    for r in range(r0, r1):
        i = r // nb
        j = r - i * nb
        base = (r - r0) * nc
        for k in range(nc):
            vcc, r_t, g_leak, v0, vinf_c, g_c = _mono_point(pool, ix, sc, i, j, k)
            scale, stray, s0, s1, s2, a, h = _curve(pool, ix, sc, i, j, k)
            v_up = _g(pool, ix, VUP, i, j, k)
            c_up, dc_up = _cap_at_fraction(True, 1.0, scale, stray, s0, s1, s2, h)
            v_est = vinf_c - (vinf_c - v_up) * e[0, base + k]
            e[0, base + k] = -tpd * g_c / (c_up + 0.5 * dc_up * (v_est - v_up))


@njit(**OPTS)
def mono_logs(pool, ix, sc, r0, r1, nb, nc, e, lg):
    """v_top from the run-on (into e[0]) and the surge tail's logarithm argument (lg[1])."""
    surge_a = sc[SURGE_A]
    r_loop = sc[RS] + sc[R_S]
    for r in range(r0, r1):
        i = r // nb
        j = r - i * nb
        base = (r - r0) * nc
        for k in range(nc):
            vcc, r_t, g_leak, v0, vinf_c, g_c = _mono_point(pool, ix, sc, i, j, k)
            v_up = _g(pool, ix, VUP, i, j, k)
            v_top = vinf_c - (vinf_c - v_up) * e[0, base + k]
            e[0, base + k] = v_top
            v_knee = _fmin(v_top, surge_a * r_loop)
            lg[1, base + k] = _fmax(v_knee / (0.1 * v_top), 1.0)


@njit(**OPTS)
def mono_finish(pool, ix, sc, quad, missing, r0, r1, nb, nc, e, lg, out, flags):
    """The pulse (or the detector's timeout), currents, powers, the capacitor dump, junction
    temperature and the per-point flags [model._monostable, model._missing_pulse, model._surge,
    model._flags]."""
    tpd = sc[TPD]
    surge_a = sc[SURGE_A]
    r_sat = sc[RS]
    r_s = sc[R_S]
    for r in range(r0, r1):
        i = r // nb
        j = r - i * nb
        base = (r - r0) * nc
        for k in range(nc):
            p = base + k
            vcc, r_t, g_leak, v0, vinf_c, g_c = _mono_point(pool, ix, sc, i, j, k)
            scale, stray, s0, s1, s2, a, h = _curve(pool, ix, sc, i, j, k)
            v_up = _g(pool, ix, VUP, i, j, k)
            v_top = e[0, p]
            log = lg[0, p]
            stalls = vinf_c <= v_up
            t, q = _linear_time(quad, log, vinf_c, g_c, v0, v_up, scale, stray, s0, s1, s2, a, h)
            vt = vinf_c * t - q / g_c + 0.5 * (v_up + v_top) * tpd
            time = t + tpd
            pw = np.nan if stalls else time
            vm_h = vt / time
            i_idle_r = (vcc - v0) / r_t
            iq_h = _g(pool, ix, IQH, i, j, k)
            iq_l = _g(pool, ix, IQL, i, j, k)
            v_high = _g(pool, ix, VHIGH, i, j, k)
            v_low = _g(pool, ix, VLOW, i, j, k)
            i_high = _g(pool, ix, IHIGH, i, j, k)
            i_low = _g(pool, ix, ILOW, i, j, k)
            supply = iq_h + (vcc - vm_h) / r_t + i_high
            idle = iq_l + i_idle_r + i_low
            p_chip = _fmax(vcc * iq_h + (vcc - v_high) * i_high,
                           vcc * iq_l + v_low * i_low + v0 * i_idle_r)
            dump = _fmin((v_top - sc[VS]) / sc[R_SAT_DIV], surge_a)
            p_res = (vcc - v0) * (vcc - v0) / r_t
            c_mean = _cap_at(quad, 0.5 * (v0 + v_top), scale, stray, s0, s1, s2, a, h)
            energy = 0.5 * c_mean * (v_top * v_top - v0 * v0)
            r_eff = _fmax(r_sat, v_top / surge_a - r_s)
            e_tr = energy * r_eff / (r_eff + r_s)
            r_loop = r_sat + r_s
            v_knee = _fmin(v_top, surge_a * r_loop)
            t_cc = c_mean * (v_top - v_knee) / surge_a
            duration = t_cc + (c_mean * r_loop) * lg[1, p]
            tj = _g(pool, ix, TAMB, i, j, k) + sc[THETA] * p_chip
            m = np.uint32(_g(pool, ix, MASK_C, i, j, k)) | np.uint32(_g(pool, ix, MASK_D, i, j, k))
            if missing:
                # the detector's timeout, and the mean current while pulses keep arriving
                t_in = _g(pool, ix, TIN, i, j, k)
                tau = pw / log
                span = _fmin(t_in, pw)
                v_mean = vinf_c - (vinf_c - v0) * tau / span * -math.expm1(-span / tau)
                supply = iq_h + (vcc - v_mean) / r_t + i_high
                if pw != pw:
                    supply = np.nan
                out[M_MARGIN, p] = pw - t_in
                if pw < t_in:
                    m |= FALSE_ALARM
            out[M_PW, p] = pw
            out[M_SUPPLY, p] = supply
            out[M_IDLE, p] = idle
            out[M_PEAK, p] = dump + i_idle_r
            out[M_PRES, p] = p_res
            out[M_V0, p] = v0
            out[M_VTOP, p] = v_top
            out[M_VINF, p] = vinf_c
            out[M_DUMP, p] = duration
            out[M_POWER, p] = vcc * supply
            out[M_TJ, p] = tj
            if _g(pool, ix, R, i, j, k) > _g(pool, ix, RMAX, i, j, k):
                m |= TOO_LARGE
            if (i_idle_r > sc[DIS_MAX]) | (e_tr > sc[SURGE_E_MAX]):
                m |= DISCHARGE
            if p_res > sc[P_MAX]:
                m |= OVERPOWERED
            if tj > sc[TJ_MAX]:
                m |= HOT
            if stalls:
                m |= STALLS
            flags[p] = m
