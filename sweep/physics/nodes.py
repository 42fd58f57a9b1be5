"""The timing node: its capacitance against voltage, and how long it takes to move.

A phase of the timer moves the capacitor between two voltages while a network drives a current
into it. With C constant and the network linear (Thevenin sources, saturation as V0 + R I,
leakage as a conductance, bias as a constant current) the RC law gives the time exactly [book].
Two things make it nonlinear, and both are integrated here over the voltages the node actually
crosses, t = integral of C(v) dv / i(v):

- a class II ceramic loses capacitance with DC bias: C(v) = C (1 - k (v / V_rated)^1.3) [mem];
  on the swing of a phase it is replaced by its quadratic interpolant at three Chebyshev nodes,
  and
  the integral against a linear network is then exact in closed form (a polynomial over a
  linear function: one logarithm and a polynomial) [derived]. The nodes sit at fixed fractions
  of the upper threshold, so one power per point serves every node. Against a numerical integral
  of the curve itself the time is within 1e-4 on the monostable's 0-to-threshold ramp and 5e-5
  on an astable's swing, Y5V at its rated voltage [derived; the ODE reference in
  tests/reference/test_ode.py integrates the curve itself].
- the Shockley diode of astable-diode: i(v) has no closed-form integral. The node voltage is
  mapped to s = integral of dv / L(v), L the line through the currents at the two ends, so
  i/L is smooth and near 1, and Gauss-Legendre quadrature in s converges fast [derived].

Pure numpy, SI units.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

#: Chebyshev nodes on [0, 1] and the matrix taking values there to monomial coefficients in x
CHEB_X = 0.5 - 0.5 * np.cos((2.0 * np.arange(3) + 1.0) * np.pi / 6.0)
_TO_MONOMIAL = np.linalg.inv(np.vander(CHEB_X, 3, increasing=True))
#: Gauss-Legendre nodes and weights on [0, 1] for the nonlinear (diode) phase [book: any
#: numerical analysis text]; 6 nodes keep the diode astable within 1e-4 of the ODE reference
GL_X, GL_W = np.polynomial.legendre.leggauss(6)
GL_X, GL_W = 0.5 * (GL_X + 1.0), 0.5 * GL_W
DC_BIAS_EXPONENT = 1.3          # loss = k (V / V_rated)^1.3 [mem]
DC_BIAS_FLOOR = 0.05            # keeps C positive for absurd inputs [derived]


@dataclass(frozen=True)
class NodeCapacitance:
    """C(v) [F] of the timing node: `const` when it does not depend on the voltage, else
    scale x S(x) + stray with S a quadratic in x = (v - a) / h, coefficients `shape`. The shape, a
    and h depend only on the thresholds (the conditions), so they stay small arrays; `scale` (the
    capacitance at 0 V and the working temperature) carries the design axis."""
    const: object = None
    scale: object = 0.0
    stray: float = 0.0
    a: object = 0.0
    h: object = 1.0
    shape: tuple = ()

    def _s(self, x):
        s0, s1, s2 = self.shape
        return s0 + x * (s1 + x * s2)

    def at(self, v_v):
        """Capacitance [F] at node voltage v_v [V]."""
        if self.const is not None:
            return self.const
        return self.scale * self._s((v_v - self.a) / self.h) + self.stray

    def at_fraction(self, x):
        """Capacitance [F] and its slope dC/dv [F/V] at a fixed point x of the fit range (0: its
        low end, 1: the upper threshold), from the small shape arrays."""
        if self.const is not None:
            return self.const, 0.0
        s0, s1, s2 = self.shape
        return self.scale * self._s(x) + self.stray, self.scale * (s1 + 2.0 * s2 * x) / self.h

    def charge(self, v0_v, v1_v):
        """Charge [C] stored in the node going from v0 to v1: the integral of C(v) dv."""
        if self.const is not None:
            return self.const * (v1_v - v0_v)
        s0, s1, s2 = self.shape

        def anti(x):
            return x * (s0 + x * (s1 / 2.0 + x * s2 / 3.0))
        return (self.scale * self.h * (anti((v1_v - self.a) / self.h) - anti((v0_v - self.a) / self.h))
                + self.stray * (v1_v - v0_v))

    def linear_time(self, vinf_v, g_s, v0_v, v1_v):
        """(time [s], charge [C]) to go from v0 to v1 when the net current into the node is
        g (V_inf - v): t = integral of C(v) dv / (g (V_inf - v)), Q = integral of C(v) dv. For a
        constant C, t is the RC law (C / g) ln((V_inf - v0) / (V_inf - v1)) [book]; for the
        quadratic,
        the polynomial re-expanded about V_inf in u = (V_inf - v) / h, with coefficients d_j:
        t = (d_0 ln(u0/u1) + sum d_j (u0^j - u1^j) / j) / g and Q = h sum d_j (u0^(j+1) -
        u1^(j+1)) / (j + 1) [derived]. NaN or negative where v1 is never reached (the caller
        masks it)."""
        with np.errstate(all="ignore"):
            log = np.log((vinf_v - v0_v) / (vinf_v - v1_v))
        if self.const is not None:
            return self.const / g_s * log, self.const * (v1_v - v0_v)
        s0, s1, s2 = self.shape
        big_x = (vinf_v - self.a) / self.h
        p1 = s1 + 2.0 * s2 * big_x
        p0 = s0 + big_x * (s1 + big_x * s2)
        u0, u1 = (vinf_v - v0_v) / self.h, (vinf_v - v1_v) / self.h
        d1 = u0 - u1
        d2 = d1 * (u0 + u1)
        d3 = d1 * (u0 * u0 + u0 * u1 + u1 * u1)
        t = (self.scale * (p0 * log - p1 * d1 + s2 * 0.5 * d2) + self.stray * log) / g_s
        q = self.scale * self.h * (p0 * d1 - p1 * 0.5 * d2 + s2 * d3 / 3.0) + self.stray * (v1_v - v0_v)
        return t, q


def node_capacitance(c_t_f, stray_f, loss, v_rated_v, v_up_v, low_fraction: float) -> NodeCapacitance:
    """C(v) = c_t (1 - loss (v / V_rated)^1.3, at least 5 %) + stray [F] on the swing from
    low_fraction x v_up to v_up [V]: c_t is the capacitance at 0 V and the working temperature."""
    if np.ndim(loss) == 0 and loss == 0.0:
        return NodeCapacitance(const=c_t_f + stray_f)
    frac = low_fraction + (1.0 - low_fraction) * CHEB_X
    ratio = (np.maximum(v_up_v, 0.0) / v_rated_v) ** DC_BIAS_EXPONENT
    vals = [np.clip(1.0 - loss * ratio * f ** DC_BIAS_EXPONENT, DC_BIAS_FLOOR, 1.0) for f in frac]
    shape = tuple(sum(_TO_MONOMIAL[m, i] * vals[i] for i in range(3)) for m in range(3))
    return NodeCapacitance(scale=c_t_f, stray=stray_f, a=low_fraction * v_up_v,
                           h=(1.0 - low_fraction) * v_up_v, shape=shape)


@dataclass(frozen=True)
class Phase:
    """One output state's run of the timing node: its length [s] including the propagation
    delay, the node voltage where it ends [V], the integral of the node voltage over it [V s]
    (for leakage) and the charge the node took [C] (for the supply current); vinf_v [V] is the
    voltage the node heads for (of the segment that reaches the threshold, or of the straight
    line through the phase's end currents for a nonlinear network): the waveform's asymptote."""
    time_s: object
    v_end_v: object
    vt_vs: object
    charge_c: object
    vinf_v: object = None


def run_on(cap: NodeCapacitance, vinf_v, g_s, v1_v, tpd_s, at_v1=None):
    """Node voltage a propagation delay after crossing v1, still driven by g (V_inf - v): the
    comparator switches the output only then [derived: RC law over tpd, with C taken at the
    middle of the run (from its value and slope at v1), since at the highest frequencies the
    run-on is a good part of the swing]. at_v1: (C, dC/dv) at v1 if known."""
    c1, dc1 = at_v1 if at_v1 is not None else (cap.at(v1_v), None)
    v_est = vinf_v - (vinf_v - v1_v) * np.exp(-tpd_s * g_s / c1)
    if cap.const is not None:
        return v_est
    c_mid = cap.at(0.5 * (v1_v + v_est)) if dc1 is None else c1 + 0.5 * dc1 * (v_est - v1_v)
    return vinf_v - (vinf_v - v1_v) * np.exp(-tpd_s * g_s / c_mid)


def linear_phase(cap: NodeCapacitance, vinf_v, g_s, v0_v, v1_v, tpd_s, at_v1=None) -> Phase:
    """From v0 to the threshold v1 and on for tpd through a linear network (net current
    g (V_inf - v) [A]). The integral of v dt is V_inf t - Q / g, Q the charge moved [derived].
    at_v1: (C, dC/dv) at v1 if known."""
    t, q = cap.linear_time(vinf_v, g_s, v0_v, v1_v)
    v_end = run_on(cap, vinf_v, g_s, v1_v, tpd_s, at_v1)
    c1 = at_v1[0] if at_v1 is not None else cap.at(v1_v)
    vt = vinf_v * t - q / g_s + 0.5 * (v1_v + v_end) * tpd_s
    return Phase(t + tpd_s, v_end, vt, q + c1 * (v_end - v1_v), vinf_v)


def two_segment_phase(cap: NodeCapacitance, seg1, seg2, v_sw_v, v0_v, v1_v, tpd_s):
    """From v0 to the threshold v1 (up or down) through a network that is linear on each side of
    v_sw: seg1 = (V_inf, g) on v0's side, seg2 on v1's side [derived]. The delay's run-on past
    v1 continues on the segment it reaches, across v_sw if it gets there. Returns
    (Phase, stalls)."""
    (vinf1, g1), (vinf2, g2) = seg1, seg2
    d = np.sign(v1_v - v0_v)
    v_mid = np.clip(v_sw_v, np.minimum(v0_v, v1_v), np.maximum(v0_v, v1_v))
    t1, q1 = cap.linear_time(vinf1, g1, v0_v, v_mid)
    t2, q2 = cap.linear_time(vinf2, g2, v_mid, v1_v)
    vt = (vinf1 * t1 - q1 / g1) + (vinf2 * t2 - q2 / g2)
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
    return (Phase(t1 + t2 + tpd_s, v_end, vt, q1 + q2 + cap.charge(v1_v, v_end),
                  np.where(in2, vinf2, vinf1)), stalls)


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
    with np.errstate(all="ignore"):
        vinf_line = v0_v + f0 * (v1_v - v0_v) / (f0 - f1)      # the line L through the end currents
    return Phase(t + tpd_s, v_end, vt, cap.charge(v0_v, v_end), vinf_line), stalls
