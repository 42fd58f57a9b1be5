"""The timing node: its capacitance against voltage, and how long it takes to move.

A phase of the timer moves the capacitor between two voltages while a network drives a current
into it. With C constant and the network linear (Thevenin sources, saturation as V0 + R I,
leakage as a conductance, bias as a constant current) the RC law gives the time exactly [book].
Two things make it nonlinear, and both are integrated here over the voltages the node actually
crosses, t = integral of C(v) dv / i(v):

- a class II ceramic loses capacitance with DC bias: C(v) = C (1 - k (v / V_rated)^1.3) [mem];
  on the swing of a phase it is replaced by its cubic interpolant at four Chebyshev nodes, and
  the integral against a linear network is then exact in closed form (a polynomial over a
  linear function: one logarithm and a polynomial) [derived]. The nodes sit at fixed fractions
  of the upper threshold, so one power per point serves every node. Against a numerical integral
  of the curve itself the time is within 3e-4 on the monostable's 0-to-threshold ramp and 2e-6
  on an astable's swing [derived, measured in tests/reference/test_ode.py].
- the Shockley diode of astable-diode: i(v) has no closed-form integral. The node voltage is
  mapped to s = integral of dv / L(v), L the line through the currents at the two ends, so
  i/L is smooth and near 1, and Gauss-Legendre quadrature in s converges fast [derived].

Pure numpy, SI units.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

#: Chebyshev nodes on [0, 1] and the matrix taking values there to monomial coefficients in x
CHEB_X = 0.5 - 0.5 * np.cos((2.0 * np.arange(4) + 1.0) * np.pi / 8.0)
_TO_MONOMIAL = np.linalg.inv(np.vander(CHEB_X, 4, increasing=True))
#: Gauss-Legendre nodes and weights on [0, 1] for the nonlinear (diode) phase [book: any
#: numerical analysis text]; 6 nodes keep the diode astable within 1e-4 of the ODE reference
GL_X, GL_W = np.polynomial.legendre.leggauss(6)
GL_X, GL_W = 0.5 * (GL_X + 1.0), 0.5 * GL_W
DC_BIAS_EXPONENT = 1.3          # loss = k (V / V_rated)^1.3 [mem]
DC_BIAS_FLOOR = 0.05            # keeps C positive for absurd inputs [derived]


@dataclass(frozen=True)
class NodeCapacitance:
    """C(v) [F] of the timing node: `const` when it does not depend on the voltage, else a cubic
    in x = (v - a) / h with coefficients e (each an array broadcast against the grid)."""
    const: object = None
    a: object = 0.0
    h: object = 1.0
    e: tuple = ()

    def at(self, v_v):
        """Capacitance [F] at node voltage v_v [V]."""
        if self.const is not None:
            return self.const
        e0, e1, e2, e3 = self.e
        x = (v_v - self.a) / self.h
        return e0 + x * (e1 + x * (e2 + x * e3))

    def charge(self, v0_v, v1_v):
        """Charge [C] stored in the node going from v0 to v1: the integral of C(v) dv."""
        if self.const is not None:
            return self.const * (v1_v - v0_v)
        e0, e1, e2, e3 = self.e

        def anti(x):
            return x * (e0 + x * (e1 / 2.0 + x * (e2 / 3.0 + x * e3 / 4.0)))
        return self.h * (anti((v1_v - self.a) / self.h) - anti((v0_v - self.a) / self.h))

    def linear_time(self, vinf_v, g_s, v0_v, v1_v):
        """Time [s] to go from v0 to v1 when the net current into the node is g (V_inf - v):
        t = integral of C(v) dv / (g (V_inf - v)). For a constant C this is the RC law
        t = (C / g) ln((V_inf - v0) / (V_inf - v1)) [book]; for the cubic, the polynomial
        re-expanded about V_inf, w = V_inf - v: sum of d_j (w0^j - w1^j) / j plus d_0 ln(w0/w1)
        [derived]. NaN or negative where v1 is never reached (the caller masks it)."""
        with np.errstate(all="ignore"):
            log = np.log((vinf_v - v0_v) / (vinf_v - v1_v))
        if self.const is not None:
            return self.const / g_s * log
        e0, e1, e2, e3 = self.e
        big_x = (vinf_v - self.a) / self.h
        p0 = e0 + big_x * (e1 + big_x * (e2 + big_x * e3))
        p1 = e1 + big_x * (2.0 * e2 + 3.0 * e3 * big_x)
        p2 = e2 + 3.0 * e3 * big_x
        u0, u1 = (vinf_v - v0_v) / self.h, (vinf_v - v1_v) / self.h
        return (p0 * log - p1 * (u0 - u1) + p2 * (u0 * u0 - u1 * u1) / 2.0
                - e3 * (u0 ** 3 - u1 ** 3) / 3.0) / g_s


def node_capacitance(c_t_f, stray_f, loss, v_rated_v, v_up_v, low_fraction: float) -> NodeCapacitance:
    """C(v) = c_t (1 - loss (v / V_rated)^1.3, at least 5 %) + stray [F] on the swing from
    low_fraction x v_up to v_up [V]: c_t is the capacitance at 0 V and the working temperature."""
    if loss == 0.0:
        return NodeCapacitance(const=c_t_f + stray_f)
    frac = low_fraction + (1.0 - low_fraction) * CHEB_X
    scale = (np.maximum(v_up_v, 0.0) / v_rated_v) ** DC_BIAS_EXPONENT
    vals = [c_t_f * np.clip(1.0 - loss * scale * f ** DC_BIAS_EXPONENT, DC_BIAS_FLOOR, 1.0) + stray_f
            for f in frac]
    e = tuple(sum(_TO_MONOMIAL[m, i] * vals[i] for i in range(4)) for m in range(4))
    return NodeCapacitance(a=low_fraction * v_up_v, h=(1.0 - low_fraction) * v_up_v, e=e)


@dataclass(frozen=True)
class Phase:
    """One output state's run of the timing node: its length [s] including the propagation
    delay, the node voltage where it ends [V] and the integral of the node voltage over it [V s]
    (for leakage and supply charge)."""
    time_s: object
    v_end_v: object
    vt_vs: object


def run_on(cap: NodeCapacitance, vinf_v, g_s, v1_v, tpd_s):
    """Node voltage a propagation delay after crossing v1, still driven by g (V_inf - v): the
    comparator switches the output only then [derived: RC law over tpd, with C taken at the
    middle of a first estimate's run, since at the highest frequencies the run-on is a good part
    of the swing]."""
    v_est = vinf_v - (vinf_v - v1_v) * np.exp(-tpd_s * g_s / cap.at(v1_v))
    if cap.const is not None:
        return v_est
    return vinf_v - (vinf_v - v1_v) * np.exp(-tpd_s * g_s / cap.at(0.5 * (v1_v + v_est)))


def linear_phase(cap: NodeCapacitance, vinf_v, g_s, v0_v, v1_v, tpd_s) -> Phase:
    """From v0 to the threshold v1 and on for tpd through a linear network (net current
    g (V_inf - v) [A]). The integral of v dt is V_inf t - Q / g, Q the charge moved [derived]."""
    t = cap.linear_time(vinf_v, g_s, v0_v, v1_v)
    v_end = run_on(cap, vinf_v, g_s, v1_v, tpd_s)
    vt = vinf_v * t - cap.charge(v0_v, v1_v) / g_s + 0.5 * (v1_v + v_end) * tpd_s
    return Phase(t + tpd_s, v_end, vt)


def two_segment_phase(cap: NodeCapacitance, seg1, seg2, v_sw_v, v0_v, v1_v, tpd_s):
    """From v0 to the threshold v1 (up or down) through a network that is linear on each side of
    v_sw: seg1 = (V_inf, g) on v0's side, seg2 on v1's side [derived]. The delay's run-on past
    v1 continues on the segment it reaches, across v_sw if it gets there. Returns
    (Phase, stalls)."""
    (vinf1, g1), (vinf2, g2) = seg1, seg2
    d = np.sign(v1_v - v0_v)
    v_mid = np.clip(v_sw_v, np.minimum(v0_v, v1_v), np.maximum(v0_v, v1_v))
    t1 = cap.linear_time(vinf1, g1, v0_v, v_mid)
    t2 = cap.linear_time(vinf2, g2, v_mid, v1_v)
    vt = (vinf1 * t1 - cap.charge(v0_v, v_mid) / g1) + (vinf2 * t2 - cap.charge(v_mid, v1_v) / g2)
    in2 = (v_sw_v - v1_v) * d < 0.0                     # v1 lies in segment 2
    v_end = np.where(in2, run_on(cap, vinf2, g2, v1_v, tpd_s), run_on(cap, vinf1, g1, v1_v, tpd_s))
    cross = ~in2 & ((v_end - v_sw_v) * d > 0.0)
    if np.any(cross):
        c1 = cap.at(v1_v)
        t_a = c1 / g1 * np.log((vinf1 - v1_v) / np.where(cross, vinf1 - v_sw_v, vinf1 - v1_v))
        late = vinf2 - (vinf2 - v_sw_v) * np.exp(-(tpd_s - t_a) * g2 / c1)
        v_end = np.where(cross, late, v_end)
    vt = vt + 0.5 * (v1_v + v_end) * tpd_s
    stalls = (in2 & ((vinf2 - v1_v) * d <= 0.0)) | ((v_mid != v0_v) & ((vinf1 - v_mid) * d <= 0.0))
    return Phase(t1 + t2 + tpd_s, v_end, vt), stalls


def quadrature_phase(cap: NodeCapacitance, current_a, v0_v, v1_v, tpd_s):
    """A charge from v0 up to v1 when the net current into the node, current_a(v) [A], is any
    smooth decreasing function. With L the line through the end currents f0, f1 and
    s = integral of dv / L, t = S x integral over [0, 1] of C L / f, by Gauss-Legendre
    quadrature; v(sigma) = v0 + (v1 - v0) expm1(lambda sigma) / expm1(lambda), lambda =
    ln(f1 / f0) [derived]. Returns (Phase, stalls): it stalls where f(v1) <= 0."""
    f0, f1 = current_a(v0_v), current_a(v1_v)
    stalls = ~(f1 > 0.0)
    with np.errstate(all="ignore"):
        lam = np.log(f1 / f0)
        tiny = np.abs(lam) < 1e-9
        em1 = np.where(tiny, 1.0, np.expm1(lam))
        span = (v1_v - v0_v) / f0 * np.where(tiny, 1.0 - 0.5 * lam, lam / em1)
        t = 0.0
        vt = 0.0
        for x, w in zip(GL_X, GL_W):
            frac = np.where(tiny, x, np.expm1(lam * x) / em1)
            v = v0_v + (v1_v - v0_v) * frac
            q = w * cap.at(v) * f0 * np.exp(lam * x) / current_a(v)
            t = t + q
            vt = vt + q * v
        t, vt = span * t, span * vt
        # the run-on follows the current's local slope at v1 (a short difference) [derived]
        dv = 1e-4 * (v1_v - v0_v)
        slope = (current_a(v1_v - dv) - f1) / dv
        slope = np.where(slope > 0.0, slope, (f0 - f1) / (v1_v - v0_v))
        vinf = v1_v + f1 / slope
        v_end = run_on(cap, vinf, slope, v1_v, tpd_s)
    vt = vt + 0.5 * (v1_v + v_end) * tpd_s
    return Phase(t + tpd_s, v_end, vt), stalls
