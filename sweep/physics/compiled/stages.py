"""Compiled stages of the realistic model (numba): the per-point arithmetic of
`sweep.physics.model`, transcribed operation by operation so the results agree with it to
rounding.

Each stage is one simple loop over a tile of points that the compiler can vectorise. The
exponentials and logarithms sit between stages, where numpy's vector `exp` and `log` evaluate a
whole tile at once. Each point's networks (several divisions) are computed once per tile into
rows of the tile buffer; cheaper quantities are recomputed where a stage needs them. A loop
writes at most about five arrays: with more, the compiler gives up on the runtime checks that
they do not overlap and the loop stays scalar.

Inputs arrive in one pool of float64 values with an index (offset and element strides along
designs, builds and conditions) per input, so every call has the same types, one compiled
specialisation serves them all and the on-disk cache holds it; an input that does not vary
along an axis has stride 0 there and is stored once. `gather` lays a tile's inputs out as
contiguous rows, so the stages read plain contiguous arrays and helpers take only scalars. A
tile is a range of rows (design, build) with every condition of each row. The equations, their sources and their
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

# positions of the inputs in the tuple of 3-D float arrays (see kernel.py, which fills it);
# ISAT, NVT, IREV: the Shockley diode of astable-diode (saturation current, n Vt, reverse leakage)
VCC, TAMB, RA, RB, R, C, VUP, RF, CTF, GLEAK, S0, S1, S2, A, H, IQH, IQL, VHIGH, VLOW, IHIGH, \
    ILOW, RMAX, TIN, MASK_C, MASK_D, ISAT, NVT, IREV = range(28)
# the builds' or corners' part multipliers and leakage factor, and the leakage's factors of the
# condition (2.5 ** ((T - 20) / 40) and (V_work / V_rated) ** (exponent - 1)), which `parts_row`
# turns into each point's RA, RB, R, C, GLEAK and MASK_D
MRA, MRB, MR, MC, LF, PT, SPOW = range(28, 35)
N_INPUTS = 35
# the leakage's kinds in parts_row: none (the ideal mode), ceramics and films, electrolytic and
# tantalum [parts.leakage_conductance_s]; and the positions of its scalars
LEAK_NONE, LEAK_INSULATION, LEAK_WET = range(3)
LK_KIND, LK_FLOOR, LK_VRATED, LK_SHARE, LK_RMIN, LK_CMIN, LK_BIT_R, LK_BIT_C, LK_RULE, LK_INS_R, \
    LK_INS_T = range(11)
N_LK = 11
# per-point networks, computed once per tile into rows after the inputs (each has several
# divisions, which would otherwise be repeated in every stage)
RAT, RBT, AD, BD, VINFD, GD, VINFH, GH = range(N_INPUTS, N_INPUTS + 8)
RT, V0, VINFC, GC = range(N_INPUTS, N_INPUTS + 4)
N_ROWS = N_INPUTS + 8
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
def gather(pool, ix, need, r0, r1, nb, nc, t):
    """The inputs listed in need, at grid rows r0..r1 (row = design x build, all conditions),
    into t[input, p]: one fill over the tile where an input is the same everywhere, one row
    copied by doubling where it is the same in every row, else a fill or a copy per row."""
    m = (r1 - r0) * nc
    for n in need:
        o0, s_i, s_j, s_k = ix[n, 0], ix[n, 1], ix[n, 2], ix[n, 3]
        if s_i == 0 and s_j == 0 and s_k == 0:
            v = pool[o0]
            for p in range(m):
                t[n, p] = v
            continue
        if s_i == 0 and s_j == 0:
            # the same conditions in every row: one row, then doubling copies (long runs)
            for k in range(nc):
                t[n, k] = pool[o0 + k]
            filled = nc
            while filled < m:
                run = min(filled, m - filled)
                for p in range(run):
                    t[n, filled + p] = t[n, p]
                filled += run
            continue
        i = r0 // nb
        j = r0 - i * nb
        base = 0
        for r in range(r0, r1):
            o = o0 + i * s_i + j * s_j
            if s_k == 0:
                v = pool[o]
                for k in range(nc):
                    t[n, base + k] = v
            else:
                for k in range(nc):
                    t[n, base + k] = pool[o + k]
            base += nc
            j += 1
            if j == nb:
                j = 0
                i += 1


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
def parts_row(t, lk, two_resistor, m):
    """Each point's parts: the design's values times the build's or corner's multipliers (the
    product engine._inputs makes for the numpy model), the timing capacitor's typical leakage
    conductance [S] from that capacitance times the leakage factor
    [parts.leakage_conductance_s, parts.leakage_max_a: the same operations in the same order],
    and the part-limit flags of the resistor and capacitor [model._flags]."""
    kind, floor, vr, share = lk[LK_KIND], lk[LK_FLOOR], lk[LK_VRATED], lk[LK_SHARE]
    r_min, c_min = lk[LK_RMIN], lk[LK_CMIN]
    rule, ins_r, ins_t = lk[LK_RULE], lk[LK_INS_R], lk[LK_INS_T]
    bit_r, bit_c = np.uint32(lk[LK_BIT_R]), np.uint32(lk[LK_BIT_C])
    for p in range(m):
        if two_resistor:
            t[RA, p] = t[RA, p] * t[MRA, p]
            t[RB, p] = t[RB, p] * t[MRB, p]
            r_in = t[RA, p]
        else:
            t[R, p] = t[R, p] * t[MR, p]
            r_in = t[R, p]
        c = t[C, p] * t[MC, p]
        t[C, p] = c
        if kind == LEAK_INSULATION:         # 10 Gohm or 500 s / C, whichever is less
            g = t[LF, p] * (1.0 / _fmin(ins_r, ins_t / c))
        elif kind == LEAK_WET:              # 0.01 C V or the floor, at temperature and voltage
            i_max = _fmax(rule * (c * 1e6) * vr, floor) * t[PT, p]
            g = t[LF, p] * (share * (i_max / vr) * t[SPOW, p])
        else:
            g = 0.0
        t[GLEAK, p] = g
        f = np.uint32(0)
        if r_in < r_min:
            f |= bit_r
        if c < c_min:
            f |= bit_c
        t[MASK_D, p] = f


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
def _astable_nets(vcc, rf, ra, rb, g_leak, i_draw, rs, vs):
    """The astable's per-point networks: RA and RB at temperature, the discharge node's
    Thevenin source and its line a + b V, and both phases' (V_inf, g) [model._discharge_network,
    model.node_source]."""
    ra_t = ra * rf
    rb_t = rb * rf
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
    return ra_t, rb_t, a_d, b_d, vinf_d, g_d, vinf_h, g_h


@njit(**OPTS)
def astable_nets(t, sc, m):
    """The networks of every point of the tile into their rows (two loops of four rows each:
    a loop writing more does not vectorise)."""
    i_draw, rs, vs = sc[IDRAW], sc[RS], sc[VS]
    for p in range(m):
        ra_t, rb_t, a_d, b_d, vinf_d, g_d, vinf_h, g_h = _astable_nets(
            t[VCC, p], t[RF, p], t[RA, p], t[RB, p], t[GLEAK, p], i_draw, rs, vs)
        t[RAT, p] = ra_t
        t[RBT, p] = rb_t
        t[AD, p] = a_d
        t[BD, p] = b_d
    for p in range(m):
        ra_t, rb_t, a_d, b_d, vinf_d, g_d, vinf_h, g_h = _astable_nets(
            t[VCC, p], t[RF, p], t[RA, p], t[RB, p], t[GLEAK, p], i_draw, rs, vs)
        t[VINFD, p] = vinf_d
        t[GD, p] = g_d
        t[VINFH, p] = vinf_h
        t[GH, p] = g_h


@njit(**OPTS)
def _nets_a(t, p):
    return t[RAT, p], t[RBT, p], t[AD, p], t[BD, p], t[VINFD, p], t[GD, p], t[VINFH, p], t[GH, p]


@njit(**OPTS)
def astable_exp1(t, sc, quad, m, e):
    """Arguments of the first exponential of both run-ons (the low phase past Vc/2, the high
    phase past Vc)."""
    tpd, stray = sc[TPD], sc[STRAY]
    for p in range(m):
        ra_t, rb_t, a_d, b_d, vinf_d, g_d, vinf_h, g_h = _nets_a(t, p)
        scale = t[C, p] * t[CTF, p]
        c_lo = _cap_at_fraction(quad, 1.0 / 3.0, scale, stray, t[S0, p], t[S1, p], t[S2, p], t[H, p])[0]
        c_up = _cap_at_fraction(quad, 1.0, scale, stray, t[S0, p], t[S1, p], t[S2, p], t[H, p])[0]
        e[0, p] = -tpd * g_d / c_lo
        e[1, p] = -tpd * g_h / c_up


@njit(**OPTS)
def astable_exp2(t, sc, m, e):
    """Second exponential of both run-ons: C taken at the middle of the run [nodes.run_on]."""
    tpd, stray = sc[TPD], sc[STRAY]
    for p in range(m):
        ra_t, rb_t, a_d, b_d, vinf_d, g_d, vinf_h, g_h = _nets_a(t, p)
        scale = t[C, p] * t[CTF, p]
        v_up = t[VUP, p]
        v_lo = 0.5 * v_up
        c_lo, dc_lo = _cap_at_fraction(True, 1.0 / 3.0, scale, stray, t[S0, p], t[S1, p], t[S2, p], t[H, p])
        c_up, dc_up = _cap_at_fraction(True, 1.0, scale, stray, t[S0, p], t[S1, p], t[S2, p], t[H, p])
        v_est = vinf_d - (vinf_d - v_lo) * e[0, p]
        e[0, p] = -tpd * g_d / (c_lo + 0.5 * dc_lo * (v_est - v_lo))
        v_est = vinf_h - (vinf_h - v_up) * e[1, p]
        e[1, p] = -tpd * g_h / (c_up + 0.5 * dc_up * (v_est - v_up))


@njit(**OPTS)
def astable_logs(t, sc, m, e, lg):
    """The node where the cycle starts (v_bot) and tops out (v_top) from the run-ons, and the
    arguments of the logarithms: both phases' RC law and the discharge surge's exponential
    tail. e[0], e[1] become v_bot and v_top."""
    rs, surge_a = sc[RS], sc[SURGE_A]
    for p in range(m):
        ra_t, rb_t, a_d, b_d, vinf_d, g_d, vinf_h, g_h = _nets_a(t, p)
        v_up = t[VUP, p]
        v_lo = 0.5 * v_up
        v_bot = vinf_d - (vinf_d - v_lo) * e[0, p]
        v_top = vinf_h - (vinf_h - v_up) * e[1, p]
        e[0, p] = v_bot
        e[1, p] = v_top
        lg[0, p] = (vinf_h - v_bot) / (vinf_h - v_up)
        lg[1, p] = (vinf_d - v_top) / (vinf_d - v_lo)
        v_knee = _fmin(v_top, surge_a * (rs + rb_t))
        lg[2, p] = _fmax(v_knee / (0.1 * v_top), 1.0)


# The outputs are written by several loops, each with few output streams: a loop that writes
# more than about five arrays does not vectorise (the compiler gives up on the runtime checks
# that the streams do not overlap). Each recomputes the cheap networks it needs.

@njit(**OPTS)
def astable_high(t, sc, quad, m, e, lg, out, o):
    """The high phase from v_bot to v_up and on to v_top [nodes.linear_phase]: its length [s]
    into the high-time row and the mean current [A] the node draws over it (charge, leakage,
    input currents) into the supply row; astable_sum finishes both."""
    tpd, i_draw, stray = sc[TPD], sc[IDRAW], sc[STRAY]
    for p in range(m):
        q = np.uint64(o + p)        # unsigned: no negative-index wraparound, so it vectorises
        g_leak = t[GLEAK, p]
        ra_t, rb_t, a_d, b_d, vinf_d, g_d, vinf_h, g_h = _nets_a(t, p)
        scale = t[C, p] * t[CTF, p]
        s0, s1, s2, a, h = t[S0, p], t[S1, p], t[S2, p], t[A, p], t[H, p]
        v_up = t[VUP, p]
        v_bot = e[0, p]
        v_top = e[1, p]
        c_up = _cap_at_fraction(quad, 1.0, scale, stray, s0, s1, s2, h)[0]
        tt, qc = _linear_time(quad, lg[0, p], vinf_h, g_h, v_bot, v_up, scale, stray, s0, s1, s2, a, h)
        vt_h = vinf_h * tt - qc / g_h + 0.5 * (v_up + v_top) * tpd
        time_h = tt + tpd
        q_h = qc + c_up * (v_top - v_up) + g_leak * vt_h + i_draw * time_h
        out[A_TH, q] = time_h
        out[A_SUPPLY, q] = q_h / time_h


@njit(**OPTS)
def astable_low(t, sc, quad, m, e, lg, out, o):
    """The low phase from v_top to Vc/2 and on to v_bot [nodes.linear_phase]: its length [s]
    into the low-time row, RA's mean current [A] into the power row and the discharge
    transistor's mean dissipation [W] into the duty row; astable_sum and astable_rates use
    them and write those rows' own figures."""
    tpd, stray = sc[TPD], sc[STRAY]
    for p in range(m):
        q = np.uint64(o + p)
        vcc = t[VCC, p]
        ra_t, rb_t, a_d, b_d, vinf_d, g_d, vinf_h, g_h = _nets_a(t, p)
        scale = t[C, p] * t[CTF, p]
        v_lo = 0.5 * t[VUP, p]
        v_bot = e[0, p]
        v_top = e[1, p]
        tt, qc = _linear_time(quad, lg[1, p], vinf_d, g_d, v_top, v_lo, scale, stray, t[S0, p],
                              t[S1, p], t[S2, p], t[A, p], t[H, p])
        vt_l = vinf_d * tt - qc / g_d + 0.5 * (v_lo + v_bot) * tpd
        time_l = tt + tpd
        vm_l = vt_l / time_l
        vd_mean = a_d + b_d * vm_l
        i_ra_l = (vcc - vd_mean) / ra_t
        out[A_TL, q] = time_l
        out[A_POWER, q] = i_ra_l
        out[A_DUTY, q] = vd_mean * (i_ra_l + (vm_l - vd_mean) / rb_t)


@njit(**OPTS)
def cycle_sums(t, p, q, out, vcc, t_h, t_l, period, i_charge, i_ra_l, p_dis_l):
    """One astable point's times, period, supply current and the chip's mean dissipation [W]
    (in the junction-temperature row) from its phases: i_charge the mean current into the node
    in the high phase, i_ra_l RA's mean current and p_dis_l the transistor's dissipation in the
    low phase [circuits._astable.cycle]."""
    iq_h = t[IQH, p]
    iq_l = t[IQL, p]
    i_high = t[IHIGH, p]
    i_low = t[ILOW, p]
    i_h = iq_h + i_charge + i_high
    i_l = iq_l + i_ra_l + i_low
    p_chip_h = vcc * iq_h + (vcc - t[VHIGH, p]) * i_high
    p_chip_l = vcc * iq_l + t[VLOW, p] * i_low + p_dis_l
    out[A_TH, q] = t_h
    out[A_TL, q] = t_l
    out[A_PER, q] = period
    out[A_SUPPLY, q] = (t_h * i_h + t_l * i_l) / period
    out[A_TJ, q] = (t_h * p_chip_h + t_l * p_chip_l) / period


@njit(**OPTS)
def rate_flags(t, p, q, out, theta, tj_max, f_max, stalls, r_charge):
    """One astable point's frequency, duty, power and junction temperature from its sums, and
    the flags of limits and timing; r_charge: the resistance the bias current flows through
    [model.evaluate, model._flags]."""
    period = out[A_PER, q]
    freq = 1.0 / period
    tj = t[TAMB, p] + theta * out[A_TJ, q]
    out[A_FREQ, q] = freq
    out[A_DUTY, q] = out[A_TH, q] / period
    out[A_POWER, q] = t[VCC, p] * out[A_SUPPLY, q]
    out[A_TJ, q] = tj
    f = np.uint32(t[MASK_C, p]) | np.uint32(t[MASK_D, p])
    f |= TOO_LARGE if r_charge > t[RMAX, p] else np.uint32(0)
    f |= HOT if tj > tj_max else np.uint32(0)
    f |= STALLS if stalls else np.uint32(0)
    f |= FAST if freq > f_max else np.uint32(0)
    return f


@njit(**OPTS)
def astable_sum(t, sc, m, out, o):
    """High and low time (NaN where the node stalls), period, the supply current, and the
    chip's mean dissipation [W] where the junction temperature goes [model._astable]."""
    for p in range(m):
        q = np.uint64(o + p)
        vcc = t[VCC, p]
        ra_t, rb_t, a_d, b_d, vinf_d, g_d, vinf_h, g_h = _nets_a(t, p)
        v_up = t[VUP, p]
        stalls = (vinf_h <= v_up) | (vinf_d >= 0.5 * v_up)
        time_h = out[A_TH, q]
        t_h = np.nan if stalls else time_h
        t_l = np.nan if stalls else out[A_TL, q]
        period = t_h + t_l
        cycle_sums(t, p, q, out, vcc, t_h, t_l, period, out[A_SUPPLY, q], out[A_POWER, q],
                   out[A_DUTY, q])


@njit(**OPTS)
def astable_rates(t, sc, m, out, flags, o):
    """Frequency, duty, power, junction temperature (from the chip's dissipation) and the
    flags of limits and timing [model.evaluate, model._flags]."""
    theta, tj_max, f_max = sc[THETA], sc[TJ_MAX], sc[F_MAX]
    for p in range(m):
        q = np.uint64(o + p)
        ra_t, rb_t, a_d, b_d, vinf_d, g_d, vinf_h, g_h = _nets_a(t, p)
        v_up = t[VUP, p]
        stalls = (vinf_h <= v_up) | (vinf_d >= 0.5 * v_up)
        flags[q] = rate_flags(t, p, q, out, theta, tj_max, f_max, stalls, t[RA, p] + t[RB, p])


@njit(**OPTS)
def _surge(c_mean, v_top, v_lo, r_sat, r_series, surge_a, log_surge):
    """The turn-on surge of the capacitor at v_top [V] dumped through r_series [ohm] into the
    discharge transistor (r_sat [ohm], current limit surge_a [A]) down to v_lo [network.surge]:
    (the energy the transistor takes [J], the dump's duration [s]); c_mean is the capacitance at
    the swing's middle, log_surge the dump's logarithm."""
    energy = 0.5 * c_mean * (v_top * v_top - v_lo * v_lo)
    r_eff = _fmax(r_sat, v_top / surge_a - r_series)
    e_tr = energy * r_eff / (r_eff + r_series)
    r_loop = r_sat + r_series
    v_knee = _fmin(v_top, surge_a * r_loop)
    t_cc = c_mean * (v_top - v_knee) / surge_a
    return e_tr, t_cc + (c_mean * r_loop) * log_surge


@njit(**OPTS)
def surge_row(sc, vcc, ra_t, rb_t, a_d, b_d, v_bot, v_top, v_lo, i_start, c_mean, log_surge,
              out, flags, q):
    """One point's discharge peak and steady current, RA's dissipation and the turn-on surge
    through RB into out and flags (the astables' shared arithmetic) [circuits._astable.cycle,
    network.surge, model._flags]: i_start is RA's current as the charge starts, c_mean the
    capacitance at the swing's middle, log_surge the surge's logarithm."""
    rs, surge_a = sc[RS], sc[SURGE_A]
    vd_top = a_d + b_d * v_top
    dis_peak = _fmin((vcc - vd_top) / ra_t + (v_top - vd_top) / rb_t, surge_a)
    vd_bot = a_d + b_d * v_bot
    steady = (vcc - vd_bot) / ra_t + (v_bot - vd_bot) / rb_t
    p_res = _fmax((vcc - vd_bot) * (vcc - vd_bot) / ra_t, i_start * i_start * ra_t)
    e_tr, dump_s = _surge(c_mean, v_top, v_lo, rs, rb_t, surge_a, log_surge)
    out[A_PEAK, q] = dis_peak
    out[A_PRES, q] = p_res
    out[A_DUMP, q] = dump_s
    f = flags[q]
    f |= DISCHARGE if (steady > sc[DIS_MAX]) | (e_tr > sc[SURGE_E_MAX]) else np.uint32(0)
    f |= OVERPOWERED if p_res > sc[P_MAX] else np.uint32(0)
    flags[q] = f


@njit(**OPTS)
def astable_discharge(t, sc, quad, m, e, lg, out, flags, o):
    """The discharge transistor's peak and steady current, RA's dissipation and the turn-on
    surge through RB, and their flags [model._astable, model._surge, model._flags], adding to
    flags. lg[2] holds the surge's logarithm."""
    stray = sc[STRAY]
    for p in range(m):
        q = np.uint64(o + p)
        vcc = t[VCC, p]
        ra_t, rb_t, a_d, b_d, vinf_d, g_d, vinf_h, g_h = _nets_a(t, p)
        scale = t[C, p] * t[CTF, p]
        v_lo = 0.5 * t[VUP, p]
        v_bot = e[0, p]
        v_top = e[1, p]
        i_start = (vcc - v_bot) / (ra_t + rb_t)
        c_mean = _cap_at(quad, 0.5 * (v_lo + v_top), scale, stray, t[S0, p], t[S1, p], t[S2, p],
                         t[A, p], t[H, p])
        surge_row(sc, vcc, ra_t, rb_t, a_d, b_d, v_bot, v_top, v_lo, i_start, c_mean, lg[2, p],
                  out, flags, q)


@njit(**OPTS)
def _mono_nets(vcc, r, rf, g_leak, i_draw, vs, r_sat):
    """The monostable's resting node v0 (R against the discharge transistor, leakage and the
    threshold input) and its timing network (V_inf, g) [model._monostable]."""
    r_t = r * rf
    if r_sat > 0:
        v0 = ((vcc / r_t + vs / r_sat - i_draw) / (1.0 / r_t + 1.0 / r_sat + g_leak))
    else:
        v0 = vs + 0.0 * vcc * r_t
    g_c = 1.0 / r_t + g_leak
    vinf_c = (vcc / r_t - i_draw) / g_c
    return r_t, v0, vinf_c, g_c


@njit(**OPTS)
def mono_nets(t, sc, m):
    """The networks of every point of the tile into their rows."""
    i_draw, vs, r_sat = sc[IDRAW], sc[VS], sc[R_SAT_MONO]
    for p in range(m):
        r_t, v0, vinf_c, g_c = _mono_nets(t[VCC, p], t[R, p], t[RF, p], t[GLEAK, p], i_draw, vs, r_sat)
        t[RT, p] = r_t
        t[V0, p] = v0
        t[VINFC, p] = vinf_c
        t[GC, p] = g_c


@njit(**OPTS)
def _nets_m(t, p):
    return t[RT, p], t[V0, p], t[VINFC, p], t[GC, p]


@njit(**OPTS)
def mono_exp1(t, sc, quad, m, e, lg):
    """The run-on's first exponential and the RC law's logarithm of the timing ramp."""
    tpd, stray = sc[TPD], sc[STRAY]
    for p in range(m):
        r_t, v0, vinf_c, g_c = _nets_m(t, p)
        scale = t[C, p] * t[CTF, p]
        c_up = _cap_at_fraction(quad, 1.0, scale, stray, t[S0, p], t[S1, p], t[S2, p], t[H, p])[0]
        e[0, p] = -tpd * g_c / c_up
        lg[0, p] = (vinf_c - v0) / (vinf_c - t[VUP, p])


@njit(**OPTS)
def mono_exp2(t, sc, m, e):
    """The run-on's second exponential, C at the middle of the run."""
    tpd, stray = sc[TPD], sc[STRAY]
    for p in range(m):
        r_t, v0, vinf_c, g_c = _nets_m(t, p)
        scale = t[C, p] * t[CTF, p]
        v_up = t[VUP, p]
        c_up, dc_up = _cap_at_fraction(True, 1.0, scale, stray, t[S0, p], t[S1, p], t[S2, p], t[H, p])
        v_est = vinf_c - (vinf_c - v_up) * e[0, p]
        e[0, p] = -tpd * g_c / (c_up + 0.5 * dc_up * (v_est - v_up))


@njit(**OPTS)
def mono_logs(t, sc, m, e, lg):
    """v_top from the run-on (into e[0]) and the surge tail's logarithm argument (lg[1])."""
    surge_a = sc[SURGE_A]
    r_loop = sc[RS] + sc[R_S]
    for p in range(m):
        r_t, v0, vinf_c, g_c = _nets_m(t, p)
        v_up = t[VUP, p]
        v_top = vinf_c - (vinf_c - v_up) * e[0, p]
        e[0, p] = v_top
        v_knee = _fmin(v_top, surge_a * r_loop)
        lg[1, p] = _fmax(v_knee / (0.1 * v_top), 1.0)


@njit(**OPTS)
def mono_pulse(t, sc, quad, m, e, lg, out, o):
    """The pulse (the detector's timeout), the supply current while timing, the idle current
    and the power [model._monostable] into out[:, o:o+m]. lg[0] holds the ramp's logarithm."""
    tpd, stray = sc[TPD], sc[STRAY]
    for p in range(m):
        q = np.uint64(o + p)        # unsigned: no negative-index wraparound, so it vectorises
        vcc = t[VCC, p]
        r_t, v0, vinf_c, g_c = _nets_m(t, p)
        scale = t[C, p] * t[CTF, p]
        v_up = t[VUP, p]
        v_top = e[0, p]
        log = lg[0, p]
        stalls = vinf_c <= v_up
        tt, qc = _linear_time(quad, log, vinf_c, g_c, v0, v_up, scale, stray, t[S0, p], t[S1, p],
                              t[S2, p], t[A, p], t[H, p])
        vt = vinf_c * tt - qc / g_c + 0.5 * (v_up + v_top) * tpd
        time = tt + tpd
        pw = np.nan if stalls else time
        vm_h = vt / time
        iq_h = t[IQH, p]
        i_high = t[IHIGH, p]
        supply = iq_h + (vcc - vm_h) / r_t + i_high
        out[M_PW, q] = pw
        out[M_SUPPLY, q] = supply
        out[M_IDLE, q] = t[IQL, p] + (vcc - v0) / r_t + t[ILOW, p]
        out[M_POWER, q] = vcc * supply


@njit(**OPTS)
def missing_supply(t, sc, m, lg, out, o):
    """The detector's supply current and power while pulses keep arriving: the node ramps for
    one input period at a time [model._missing_pulse]. Its own loop: `expm1` has no vector
    form, and a call keeps the others from vectorising."""
    for p in range(m):
        q = np.uint64(o + p)
        vcc = t[VCC, p]
        r_t, v0, vinf_c, g_c = _nets_m(t, p)
        pw = out[M_PW, q]
        t_in = t[TIN, p]
        tau = pw / lg[0, p]
        span = _fmin(t_in, pw)
        v_mean = vinf_c - (vinf_c - v0) * tau / span * -math.expm1(-span / tau)
        supply = t[IQH, p] + (vcc - v_mean) / r_t + t[IHIGH, p]
        if pw != pw:
            supply = np.nan
        out[M_SUPPLY, q] = supply
        out[M_POWER, q] = vcc * supply


@njit(**OPTS)
def mono_heat(t, sc, missing, m, out, flags, o):
    """Junction temperature, the detector's margin and the flags of limits, timing and false
    alarms [model.evaluate, model._flags]."""
    theta, tj_max = sc[THETA], sc[TJ_MAX]
    for p in range(m):
        q = np.uint64(o + p)
        vcc = t[VCC, p]
        r_t, v0, vinf_c, g_c = _nets_m(t, p)
        i_idle_r = (vcc - v0) / r_t
        iq_h = t[IQH, p]
        iq_l = t[IQL, p]
        i_high = t[IHIGH, p]
        i_low = t[ILOW, p]
        p_chip = _fmax(vcc * iq_h + (vcc - t[VHIGH, p]) * i_high,
                       vcc * iq_l + t[VLOW, p] * i_low + v0 * i_idle_r)
        tj = t[TAMB, p] + theta * p_chip
        out[M_TJ, q] = tj
        f = np.uint32(t[MASK_C, p]) | np.uint32(t[MASK_D, p])
        if missing:
            pw = out[M_PW, q]
            t_in = t[TIN, p]
            out[M_MARGIN, q] = pw - t_in
            f |= FALSE_ALARM if pw < t_in else np.uint32(0)
        f |= TOO_LARGE if t[R, p] > t[RMAX, p] else np.uint32(0)
        f |= HOT if tj > tj_max else np.uint32(0)
        f |= STALLS if vinf_c <= t[VUP, p] else np.uint32(0)
        flags[q] = f


@njit(**OPTS)
def mono_discharge(t, sc, quad, m, e, lg, out, flags, o):
    """The capacitor's dump into the discharge transistor at the pulse's end, the steady
    discharge current, R's dissipation, the surge and their flags [model._monostable,
    model._surge, model._flags], adding to flags. lg[1] holds the surge's logarithm."""
    vs, stray = sc[VS], sc[STRAY]
    surge_a, r_sat, r_s, r_div = sc[SURGE_A], sc[RS], sc[R_S], sc[R_SAT_DIV]
    dis_max, e_max, p_max = sc[DIS_MAX], sc[SURGE_E_MAX], sc[P_MAX]
    for p in range(m):
        q = np.uint64(o + p)
        vcc = t[VCC, p]
        r_t, v0, vinf_c, g_c = _nets_m(t, p)
        scale = t[C, p] * t[CTF, p]
        v_top = e[0, p]
        i_idle_r = (vcc - v0) / r_t
        dump = _fmin((v_top - vs) / r_div, surge_a)
        p_res = (vcc - v0) * (vcc - v0) / r_t
        c_mean = _cap_at(quad, 0.5 * (v0 + v_top), scale, stray, t[S0, p], t[S1, p], t[S2, p],
                         t[A, p], t[H, p])
        e_tr, dump_s = _surge(c_mean, v_top, v0, r_sat, r_s, surge_a, lg[1, p])
        out[M_PEAK, q] = dump + i_idle_r
        out[M_PRES, q] = p_res
        out[M_DUMP, q] = dump_s
        f = flags[q]
        f |= DISCHARGE if (i_idle_r > dis_max) | (e_tr > e_max) else np.uint32(0)
        f |= OVERPOWERED if p_res > p_max else np.uint32(0)
        flags[q] = f
