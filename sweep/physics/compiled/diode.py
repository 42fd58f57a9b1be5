"""Compiled stages of the astable with a diode across RB (numba): the per-point arithmetic of
`sweep.physics.circuits.astable_diode` and the astable cycle it shares
(`circuits._astable.cycle`), transcribed operation by operation so the results agree with the
numpy model to rounding.

As in `stages`, every exponential and logarithm is numpy's, evaluated between the stages on
rows of a scratch matrix (`d`), the Wright omega of the Shockley form included (its start and
its Newton steps, those of `parts.wright_omega`, are stages): numba's scalar `math.exp` and
`math.log` differ from numpy's vector forms by an ulp, and where the low phase heads for an
asymptote a thousand volts beyond the node (an input current against a large RB) the
cancellation after the run-on's exponential turns that ulp into 1e-10 of the low time. The
driver is `kernel._diode_tile`. The fixed-drop form (a study's `diode_drop`, and the ideal mode)
is a two-segment charge [nodes.two_segment_phase], the Shockley form a 6-point Gauss-Legendre
quadrature in a log-mapped variable [nodes.quadrature_phase]. Inputs, scalars and output rows
are those of `stages`; nothing here is new physics.
"""
from __future__ import annotations

import numpy as np
from numba import njit

from ..nodes import GL_W, GL_X
from .stages import (A, C, CTF, F_MAX, GLEAK, H, IDRAW, IREV, ISAT, NVT, OPTS, RA, RB, RF, RS, S0,
                     S1, S2, STRAY, SURGE_A, THETA, TJ_MAX, TPD, VCC, VS, VUP, cycle_sums,
                     rate_flags, surge_row, _cap_at, _cap_at_fraction, _fmax, _fmin, _linear_time)

N_GL = len(GL_X)           # Gauss-Legendre nodes of nodes.quadrature_phase
_GL_X = np.array(GL_X, dtype=np.float64)
_GL_W = np.array(GL_W, dtype=np.float64)
# rows of the scratch matrix d: the networks and the cycle's start, the exponential and
# logarithm arguments (overwritten in place by numpy), the high phase's results
(RAT, RBT, AD, BD, VINFD, GD, VBOT, E0, TIMEH, VTOP, VTH, QCH, VINFH, STL, I0, L1, L2, E1, LX, EX,
 VEND, LG, W0, W1, W2, F0, F1, F2, LAM, EM1, T, VT, SLOPE, LL, LS) = range(35)
EMK = 35                   # N_GL rows: lam x_k, then expm1 of it
EXK = EMK + N_GL           # N_GL rows: lam x_k, then exp of it
WK = EXK + N_GL            # N_GL rows: the node voltages' omega arguments, then omega
OZ = WK + N_GL             # N_GL rows each: the omega's arguments, exponentials, logarithms
OE = OZ + N_GL
OL = OE + N_GL
N_D = OL + N_GL
#: Newton steps of parts.wright_omega
OMEGA_STEPS = 4


@njit(**OPTS)
def _sign(x):
    """np.sign: -1, 0 or 1, NaN for NaN."""
    if x > 0.0:
        return 1.0
    if x < 0.0:
        return -1.0
    if x == 0.0:
        return 0.0
    return x


@njit(**OPTS)
def _charge(quad, v0, v1, scale, stray, s0, s1, s2, a, h):
    """NodeCapacitance.charge: the charge [C] the node stores going from v0 to v1 [V]."""
    if not quad:
        return (scale + stray) * (v1 - v0)
    x1 = (v1 - a) / h
    x0 = (v0 - a) / h
    anti1 = x1 * (s0 + x1 * (s1 / 2.0 + x1 * s2 / 3.0))
    anti0 = x0 * (s0 + x0 * (s1 / 2.0 + x0 * s2 / 3.0))
    return scale * h * (anti1 - anti0) + stray * (v1 - v0)



@njit(**OPTS)
def _cap(t, p, stray):
    """The node's capacitance at point p: (quad scale [F], stray [F], s0, s1, s2, a, h)."""
    return t[C, p] * t[CTF, p], stray, t[S0, p], t[S1, p], t[S2, p], t[A, p], t[H, p]


# --- the cycle's start: the low phase's run-on below Vc/2 --------------------------------------

@njit(**OPTS)
def nets(t, sc, quad, shockley, m, d):
    """RA, RB at temperature, the discharge node's line a + b V, the low phase's (V_inf, g) (the
    diode's reverse leakage helping it) [transistor_discharge] and the run-on's first
    exponential argument (into E0)."""
    tpd, stray, i_draw, rs, vs = sc[TPD], sc[STRAY], sc[IDRAW], sc[RS], sc[VS]
    for p in range(m):
        vcc = t[VCC, p]
        ra_t = t[RA, p] * t[RF, p]
        rb_t = t[RB, p] * t[RF, p]
        i_rev = t[IREV, p] if shockley else 0.0
        v_d = (vcc * rs + vs * ra_t) / (ra_t + rs)
        r_d = ra_t * rs / (ra_t + rs)
        den = rs * rb_t + ra_t * rb_t + ra_t * rs
        r_low = rb_t + r_d
        g_d = 1.0 / r_low + t[GLEAK, p]
        d[RAT, p] = ra_t
        d[RBT, p] = rb_t
        d[AD, p] = (vcc * rs * rb_t + vs * ra_t * rb_t) / den
        d[BD, p] = ra_t * rs / den
        d[VINFD, p] = (v_d / r_low - (i_draw + i_rev)) / g_d
        d[GD, p] = g_d
        scale, stray, s0, s1, s2, a, h = _cap(t, p, stray)
        c_lo = _cap_at_fraction(quad, 1.0 / 3.0, scale, stray, s0, s1, s2, h)[0]
        d[E0, p] = -tpd * g_d / c_lo


@njit(**OPTS)
def bot2(t, sc, m, d):
    """The run-on's second exponential argument, C at the middle of the run [nodes.run_on]."""
    tpd, stray = sc[TPD], sc[STRAY]
    for p in range(m):
        scale, stray, s0, s1, s2, a, h = _cap(t, p, stray)
        c_lo, dc_lo = _cap_at_fraction(True, 1.0 / 3.0, scale, stray, s0, s1, s2, h)
        v_lo = 0.5 * t[VUP, p]
        vinf_d = d[VINFD, p]
        v_est = vinf_d - (vinf_d - v_lo) * d[E0, p]
        d[E0, p] = -tpd * d[GD, p] / (c_lo + 0.5 * dc_lo * (v_est - v_lo))


@njit(**OPTS)
def bot(t, m, d):
    """v_bot, where the cycle starts."""
    for p in range(m):
        v_lo = 0.5 * t[VUP, p]
        vinf_d = d[VINFD, p]
        d[VBOT, p] = vinf_d - (vinf_d - v_lo) * d[E0, p]


# --- the fixed-drop charge [nodes.two_segment_phase] -------------------------------------------

@njit(**OPTS)
def _segments(t, sc, vd, d, p):
    """Both segments of the fixed-drop charge, v_sw, the direction, v_mid and whether v_up lies
    in segment 2 [astable_diode.charge]."""
    vcc, g_leak, i_draw = t[VCC, p], t[GLEAK, p], sc[IDRAW]
    ra_t, rb_t = d[RAT, p], d[RBT, p]
    v0, v1 = d[VBOT, p], t[VUP, p]
    g1 = 1.0 / ra_t + g_leak
    vinf1 = ((vcc - vd) / ra_t - i_draw) / g1
    g2 = 1.0 / (ra_t + rb_t) + g_leak
    vinf2 = (vcc / (ra_t + rb_t) - i_draw) / g2
    v_sw = vcc - vd * (ra_t + rb_t) / rb_t
    dn = _sign(v1 - v0)
    v_mid = _fmin(_fmax(v_sw, _fmin(v0, v1)), _fmax(v0, v1))
    in2 = (v_sw - v1) * dn < 0.0
    return vinf1, g1, vinf2, g2, v_sw, dn, v_mid, in2


@njit(**OPTS)
def fixed1(t, sc, quad, vd, m, d):
    """Both segments' logarithm arguments (L1, L2) and the run-on's first exponential argument
    on the segment that holds v_up (E1)."""
    tpd, stray = sc[TPD], sc[STRAY]
    for p in range(m):
        vinf1, g1, vinf2, g2, v_sw, dn, v_mid, in2 = _segments(t, sc, vd, d, p)
        v0, v1 = d[VBOT, p], t[VUP, p]
        d[L1, p] = (vinf1 - v0) / (vinf1 - v_mid)
        d[L2, p] = (vinf2 - v_mid) / (vinf2 - v1)
        g = g2 if in2 else g1
        scale, stray, s0, s1, s2, a, h = _cap(t, p, stray)
        d[E1, p] = -tpd * g / _cap_at(quad, v1, scale, stray, s0, s1, s2, a, h)


@njit(**OPTS)
def fixed2(t, sc, vd, m, d):
    """The run-on's second exponential argument, C at the middle of the run."""
    tpd, stray = sc[TPD], sc[STRAY]
    for p in range(m):
        vinf1, g1, vinf2, g2, v_sw, dn, v_mid, in2 = _segments(t, sc, vd, d, p)
        vinf, g = (vinf2, g2) if in2 else (vinf1, g1)
        v1 = t[VUP, p]
        v_est = vinf - (vinf - v1) * d[E1, p]
        scale, stray, s0, s1, s2, a, h = _cap(t, p, stray)
        d[E1, p] = -tpd * g / _cap_at(True, 0.5 * (v1 + v_est), scale, stray, s0, s1, s2, a, h)


@njit(**OPTS)
def fixed3(t, sc, vd, m, d):
    """The run-on's end (VEND) and, where it may cross v_sw, the logarithm argument of the
    time to get there (LX)."""
    for p in range(m):
        vinf1, g1, vinf2, g2, v_sw, dn, v_mid, in2 = _segments(t, sc, vd, d, p)
        vinf = vinf2 if in2 else vinf1
        v1 = t[VUP, p]
        v_end = vinf - (vinf - v1) * d[E1, p]
        d[VEND, p] = v_end
        cross = (not in2) and (v_end - v_sw) * dn > 0.0
        d[LX, p] = (vinf1 - v1) / ((vinf1 - v_sw) if cross else (vinf1 - v1))


@njit(**OPTS)
def fixed_cross(t, sc, quad, vd, m, d):
    """The exponential argument of the run-on's rest on segment 2 where it crosses v_sw (EX)."""
    tpd, stray = sc[TPD], sc[STRAY]
    for p in range(m):
        vinf1, g1, vinf2, g2, v_sw, dn, v_mid, in2 = _segments(t, sc, vd, d, p)
        v1 = t[VUP, p]
        scale, stray, s0, s1, s2, a, h = _cap(t, p, stray)
        c1 = _cap_at(quad, v1, scale, stray, s0, s1, s2, a, h)
        t_a = c1 / g1 * d[LX, p]
        d[EX, p] = -(tpd - t_a) * g2 / c1


@njit(**OPTS)
def fixed_end(t, sc, quad, vd, m, d):
    """The fixed-drop charge's results into the high-phase rows: time [s], v_top [V], integral
    of v dt [V s], charge [C], V_inf [V], stalls (1.0), start current [A]."""
    tpd, stray = sc[TPD], sc[STRAY]
    for p in range(m):
        vinf1, g1, vinf2, g2, v_sw, dn, v_mid, in2 = _segments(t, sc, vd, d, p)
        vcc = t[VCC, p]
        ra_t, rb_t = d[RAT, p], d[RBT, p]
        v0, v1 = d[VBOT, p], t[VUP, p]
        scale, stray, s0, s1, s2, a, h = _cap(t, p, stray)
        t1, q1 = _linear_time(quad, d[L1, p], vinf1, g1, v0, v_mid, scale, stray, s0, s1, s2, a, h)
        t2, q2 = _linear_time(quad, d[L2, p], vinf2, g2, v_mid, v1, scale, stray, s0, s1, s2, a, h)
        vt = (vinf1 * t1 - q1 / g1) + (vinf2 * t2 - q2 / g2)
        v_end = d[VEND, p]
        if (not in2) and (v_end - v_sw) * dn > 0.0:
            v_end = vinf2 - (vinf2 - v_sw) * d[EX, p]
        vt = vt + 0.5 * (v1 + v_end) * tpd
        stalls = ((in2 and (vinf2 - v1) * dn <= 0.0)
                  or ((v_mid != v0) and (vinf1 - v_mid) * dn <= 0.0))
        d[TIMEH, p] = t1 + t2 + tpd
        d[VTOP, p] = v_end
        d[VTH, p] = vt
        d[QCH, p] = q1 + q2 + _charge(quad, v1, v_end, scale, stray, s0, s1, s2, a, h)
        d[VINFH, p] = vinf2 if in2 else vinf1
        d[STL, p] = 1.0 if stalls else 0.0
        d[I0, p] = (vcc - vd - v0) / ra_t if v_sw > v0 else (vcc - v0) / (ra_t + rb_t)


# --- the Wright omega in stages: parts.wright_omega's start and Newton steps, numpy's exp and
# log between them (kernel._omega drives them) -------------------------------------------------

@njit(**OPTS)
def omega_start(d, r0, n, m):
    """Rows r0..r0+n hold omega's arguments z: copied to OZ; the start's exponential (where
    z < -2) and logarithm (of |z| where z > 4) arguments into OE and OL (0 and 1 elsewhere)."""
    for i in range(n):
        for p in range(m):
            z = d[r0 + i, p]
            d[OZ + i, p] = z
            d[OE + i, p] = z if z < -2.0 else 0.0
            d[OL + i, p] = abs(z) if z > 4.0 else 1.0


@njit(**OPTS)
def omega_first(d, r0, n, m):
    """The start (exp z below -2, z - ln z above 4, a line between), kept above 1e-300, into
    rows r0.. and OL (the first step's logarithm argument)."""
    for i in range(n):
        for p in range(m):
            z = d[OZ + i, p]
            if z < -2.0:
                w = d[OE + i, p]
            elif z > 4.0:
                w = z - d[OL + i, p]
            else:
                w = 0.12 + 0.22 * (z + 2.0)
            w = _fmax(w, 1e-300)
            d[r0 + i, p] = w
            d[OL + i, p] = w


@njit(**OPTS)
def omega_step(d, r0, n, m, last):
    """One Newton step on w + ln w - z (OL holds ln w); then, but for the last, w kept above
    1e-300 into rows r0.. and OL; after the last, exp z below z = -35."""
    for i in range(n):
        for p in range(m):
            z = d[OZ + i, p]
            w = d[r0 + i, p]
            w = w - (w + d[OL + i, p] - z) * w / (1.0 + w)
            if last:
                d[r0 + i, p] = d[OE + i, p] if z < -35.0 else w
            else:
                w = _fmax(w, 1e-300)
                d[r0 + i, p] = w
                d[OL + i, p] = w


# --- the Shockley charge [nodes.quadrature_phase, network.diode_feed_a] ------------------------

@njit(**OPTS)
def _omega_arg(vcc, v, ra_t, rb_t, i_sat, n_vt, lg):
    """The Wright omega's argument of network.diode_feed_a at node voltage v, lg the logarithm
    of Is / (G n Vt)."""
    g = 1.0 / ra_t + 1.0 / rb_t
    a = (vcc - v) / ra_t + i_sat
    return lg + a / (g * n_vt)


@njit(**OPTS)
def _feed(vcc, v, ra_t, rb_t, i_sat, n_vt, w):
    """network.diode_feed_a given its Wright omega w: the current [A] from VCC through RA into
    the node at v [V]."""
    g = 1.0 / ra_t + 1.0 / rb_t
    a = (vcc - v) / ra_t + i_sat
    u = a / g - n_vt * w
    return (vcc - v - u) / ra_t


@njit(**OPTS)
def shock_lg(t, m, d):
    """The logarithm's argument Is / (G n Vt) of the diode feed (LG)."""
    for p in range(m):
        g = 1.0 / d[RAT, p] + 1.0 / d[RBT, p]
        d[LG, p] = t[ISAT, p] / (g * t[NVT, p])


@njit(**OPTS)
def shock_ends(t, m, d):
    """The omega arguments at v_bot, v_up and v_up - dv, the short difference of the run-on's
    slope (W0, W1, W2)."""
    for p in range(m):
        vcc, ra_t, rb_t, i_sat, n_vt = t[VCC, p], d[RAT, p], d[RBT, p], t[ISAT, p], t[NVT, p]
        v0, v1 = d[VBOT, p], t[VUP, p]
        dv = 1e-4 * (v1 - v0)
        d[W0, p] = _omega_arg(vcc, v0, ra_t, rb_t, i_sat, n_vt, d[LG, p])
        d[W1, p] = _omega_arg(vcc, v1, ra_t, rb_t, i_sat, n_vt, d[LG, p])
        d[W2, p] = _omega_arg(vcc, v1 - dv, ra_t, rb_t, i_sat, n_vt, d[LG, p])


@njit(**OPTS)
def shock_currents(t, sc, m, d):
    """The net currents into the node at both ends and at v_up - dv (F0, F1, F2), the feed at
    v_bot (I0) and the logarithm's argument f1 / f0 of lambda (LAM)."""
    i_draw = sc[IDRAW]
    for p in range(m):
        vcc, ra_t, rb_t, i_sat, n_vt = t[VCC, p], d[RAT, p], d[RBT, p], t[ISAT, p], t[NVT, p]
        g_leak = t[GLEAK, p]
        v0, v1 = d[VBOT, p], t[VUP, p]
        dv = 1e-4 * (v1 - v0)
        i0 = _feed(vcc, v0, ra_t, rb_t, i_sat, n_vt, d[W0, p])
        f0 = i0 - g_leak * v0 - i_draw
        f1 = _feed(vcc, v1, ra_t, rb_t, i_sat, n_vt, d[W1, p]) - g_leak * v1 - i_draw
        f2 = _feed(vcc, v1 - dv, ra_t, rb_t, i_sat, n_vt, d[W2, p]) - g_leak * (v1 - dv) - i_draw
        d[I0, p] = i0
        d[F0, p] = f0
        d[F1, p] = f1
        d[F2, p] = f2
        d[LAM, p] = f1 / f0


@njit(**OPTS)
def shock_powers(m, d):
    """The expm1 and exp arguments of the log-mapped variable: lambda (EM1) and lambda x_k (the
    EMK and EXK rows)."""
    for p in range(m):
        lam = d[LAM, p]
        d[EM1, p] = lam
        for k in range(N_GL):
            d[EMK + k, p] = lam * _GL_X[k]
            d[EXK + k, p] = lam * _GL_X[k]


@njit(**OPTS)
def _node_v(d, p, k, v0, v1):
    """The k-th quadrature node's voltage [V]."""
    lam = d[LAM, p]
    tiny = abs(lam) < 1e-9
    em1 = 1.0 if tiny else d[EM1, p]
    frac = _GL_X[k] if tiny else d[EMK + k, p] / em1
    return v0 + (v1 - v0) * frac


@njit(**OPTS)
def shock_nodes(t, m, d):
    """The omega arguments at the quadrature nodes (the WK rows)."""
    for p in range(m):
        vcc, ra_t, rb_t, i_sat, n_vt = t[VCC, p], d[RAT, p], d[RBT, p], t[ISAT, p], t[NVT, p]
        v0, v1 = d[VBOT, p], t[VUP, p]
        for k in range(N_GL):
            v = _node_v(d, p, k, v0, v1)
            d[WK + k, p] = _omega_arg(vcc, v, ra_t, rb_t, i_sat, n_vt, d[LG, p])


@njit(**OPTS)
def shock_sum(t, sc, quad, m, d):
    """The quadrature: the time [s] (T) and the integral of v dt [V s] (VT) from v_bot to v_up,
    the current's slope at v_up (SLOPE) and the run-on's first exponential argument (E1)."""
    tpd, stray, i_draw = sc[TPD], sc[STRAY], sc[IDRAW]
    for p in range(m):
        vcc, ra_t, rb_t, i_sat, n_vt = t[VCC, p], d[RAT, p], d[RBT, p], t[ISAT, p], t[NVT, p]
        g_leak = t[GLEAK, p]
        scale, stray, s0, s1, s2, a, h = _cap(t, p, stray)
        v0, v1 = d[VBOT, p], t[VUP, p]
        f0, f1 = d[F0, p], d[F1, p]
        lam = d[LAM, p]
        tiny = abs(lam) < 1e-9
        em1 = 1.0 if tiny else d[EM1, p]
        span = (v1 - v0) / f0 * ((1.0 - 0.5 * lam) if tiny else lam / em1)
        tt = 0.0
        vt = 0.0
        for k in range(N_GL):
            v = _node_v(d, p, k, v0, v1)
            net = _feed(vcc, v, ra_t, rb_t, i_sat, n_vt, d[WK + k, p]) - g_leak * v - i_draw
            c_v = _cap_at(quad, v, scale, stray, s0, s1, s2, a, h)
            q = _GL_W[k] * c_v * f0 * d[EXK + k, p] / net
            tt = tt + q
            vt = vt + q * v
        d[T, p] = span * tt
        d[VT, p] = span * vt
        dv = 1e-4 * (v1 - v0)
        slope = (d[F2, p] - f1) / dv
        if not (slope > 0.0):
            slope = (f0 - f1) / (v1 - v0)
        d[SLOPE, p] = slope
        d[E1, p] = -tpd * slope / _cap_at(quad, v1, scale, stray, s0, s1, s2, a, h)


@njit(**OPTS)
def shock_run2(t, sc, m, d):
    """The run-on's second exponential argument, C at the middle of the run."""
    tpd, stray = sc[TPD], sc[STRAY]
    for p in range(m):
        scale, stray, s0, s1, s2, a, h = _cap(t, p, stray)
        v1 = t[VUP, p]
        slope = d[SLOPE, p]
        vinf = v1 + d[F1, p] / slope
        v_est = vinf - (vinf - v1) * d[E1, p]
        d[E1, p] = -tpd * slope / _cap_at(True, 0.5 * (v1 + v_est), scale, stray, s0, s1, s2, a, h)


@njit(**OPTS)
def shock_end(t, sc, quad, m, d):
    """The Shockley charge's results into the high-phase rows (as fixed_end)."""
    tpd, stray = sc[TPD], sc[STRAY]
    for p in range(m):
        scale, stray, s0, s1, s2, a, h = _cap(t, p, stray)
        v0, v1 = d[VBOT, p], t[VUP, p]
        f0, f1 = d[F0, p], d[F1, p]
        vinf = v1 + f1 / d[SLOPE, p]
        v_end = vinf - (vinf - v1) * d[E1, p]
        d[TIMEH, p] = d[T, p] + tpd
        d[VTOP, p] = v_end
        d[VTH, p] = d[VT, p] + 0.5 * (v1 + v_end) * tpd
        d[QCH, p] = _charge(quad, v0, v_end, scale, stray, s0, s1, s2, a, h)
        d[VINFH, p] = v0 + f0 * (v1 - v0) / (f0 - f1)
        d[STL, p] = 0.0 if f1 > 0.0 else 1.0


# --- the low phase, the sums, the surge and the flags [circuits._astable.cycle] -----------------

@njit(**OPTS)
def low_logs(t, sc, m, d):
    """The logarithm arguments of the low phase's RC law (LL) and the surge's tail (LS)."""
    rs, surge_a = sc[RS], sc[SURGE_A]
    for p in range(m):
        vinf_d = d[VINFD, p]
        v_top = d[VTOP, p]
        d[LL, p] = (vinf_d - v_top) / (vinf_d - 0.5 * t[VUP, p])
        v_knee = _fmin(v_top, surge_a * (rs + d[RBT, p]))
        d[LS, p] = _fmax(v_knee / (0.1 * v_top), 1.0)


# The outputs are written by three loops, each with few output streams, so that they vectorise
# (see stages: a loop writing more than about five arrays does not).

@njit(**OPTS)
def finish_sum(t, sc, quad, m, d, out, o):
    """The low phase from v_top to Vc/2 and on [nodes.linear_phase]; high and low time (NaN
    where the node stalls), period, supply current and the chip's mean dissipation [W] (in the
    junction-temperature row; finish_rates turns it into the temperature)
    [circuits._astable.cycle]."""
    tpd, stray, i_draw = sc[TPD], sc[STRAY], sc[IDRAW]
    for p in range(m):
        q = np.uint64(o + p)        # unsigned: no negative-index wraparound, so it vectorises
        vcc = t[VCC, p]
        ra_t, rb_t, a_d, b_d = d[RAT, p], d[RBT, p], d[AD, p], d[BD, p]
        vinf_d, g_d, v_bot, v_top = d[VINFD, p], d[GD, p], d[VBOT, p], d[VTOP, p]
        scale, stray, s0, s1, s2, a, h = _cap(t, p, stray)
        v_lo = 0.5 * t[VUP, p]
        time_h = d[TIMEH, p]
        tt, qc = _linear_time(quad, d[LL, p], vinf_d, g_d, v_top, v_lo, scale, stray, s0, s1, s2,
                              a, h)
        vt_l = vinf_d * tt - qc / g_d + 0.5 * (v_lo + v_bot) * tpd
        time_l = tt + tpd
        stalls = (d[STL, p] != 0.0) | (vinf_d >= v_lo)
        t_h = np.nan if stalls else time_h
        t_l = np.nan if stalls else time_l
        period = t_h + t_l
        q_h = d[QCH, p] + t[GLEAK, p] * d[VTH, p] + i_draw * time_h
        vm_l = vt_l / time_l
        vd_mean = a_d + b_d * vm_l
        i_ra_l = (vcc - vd_mean) / ra_t
        p_dis_l = vd_mean * (i_ra_l + (vm_l - vd_mean) / rb_t)
        cycle_sums(t, p, q, out, vcc, t_h, t_l, period, q_h / time_h, i_ra_l, p_dis_l)


@njit(**OPTS)
def finish_rates(t, sc, m, d, out, flags, o):
    """Frequency, duty, power, junction temperature and the flags of limits and timing
    [model.evaluate, model._flags]; charging=("ra",): RA alone against the largest resistance."""
    theta, tj_max, f_max = sc[THETA], sc[TJ_MAX], sc[F_MAX]
    for p in range(m):
        q = np.uint64(o + p)
        stalls = (d[STL, p] != 0.0) | (d[VINFD, p] >= 0.5 * t[VUP, p])
        flags[q] = rate_flags(t, p, q, out, theta, tj_max, f_max, stalls, t[RA, p])


@njit(**OPTS)
def finish_discharge(t, sc, quad, m, d, out, flags, o):
    """The discharge transistor's peak and steady current, RA's dissipation and the turn-on
    surge through RB, and their flags [circuits._astable.cycle, network.surge, model._flags],
    adding to flags. LS holds the surge's logarithm."""
    stray = sc[STRAY]
    for p in range(m):
        q = np.uint64(o + p)
        vcc = t[VCC, p]
        ra_t, rb_t, a_d, b_d = d[RAT, p], d[RBT, p], d[AD, p], d[BD, p]
        v_bot, v_top = d[VBOT, p], d[VTOP, p]
        scale, stray, s0, s1, s2, a, h = _cap(t, p, stray)
        v_lo = 0.5 * t[VUP, p]
        c_mean = _cap_at(quad, 0.5 * (v_lo + v_top), scale, stray, s0, s1, s2, a, h)
        surge_row(sc, vcc, ra_t, rb_t, a_d, b_d, v_bot, v_top, v_lo, d[I0, p], c_mean, d[LS, p],
                  out, flags, q)
