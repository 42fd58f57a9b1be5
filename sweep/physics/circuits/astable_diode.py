"""Astable with a diode across RB (anode at the discharge pin): C charges through RA and the
diode, discharges through RB, so the duty can go below 50 % [book: any circuits text, e.g.
Horowitz & Hill, *The Art of Electronics*, the 555 section]. The diode is a Shockley device
[book: Sedra & Smith; temperature rule in parts.saturation_at] or, where a study gives
`diode_drop`, a fixed drop."""
from __future__ import annotations

import numpy as np

from ..network import Node, diode_feed_a, node_source
from ..nodes import quadrature_phase, two_segment_phase
from ..parts import reverse_current_at, saturation_at, thermal_voltage_v
from ._astable import (CHECK_FROM_TIMES, WAVEFORM_TEXT, cycle, frequency_flags, trace,
                       transistor_discharge)
from .base import Circuit, Starter


def _shockley(n: Node) -> bool:
    return not n.ideal and n.parts.diode_drop_v is None


def charge(n: Node, v_bot):
    """High phase: C charges through RA, with RB and the diode in parallel between RA and C."""
    tpd, vcc, ra_t, rb_t = n.timer.propagation_delay_s, n.vcc, n.ra_t, n.rb_t
    if not _shockley(n):
        # fixed diode drop: the diode conducts while (VCC - V) RB / (RA + RB) >= Vd, i.e. below
        # v_sw = VCC - Vd (RA + RB) / RB; above it the capacitor charges through RA + RB [derived]
        vd = 0.0 if n.ideal else n.parts.diode_drop_v
        seg1 = node_source(vcc - vd, ra_t, n.g_leak, n.i_draw)
        seg2 = node_source(vcc, ra_t + rb_t, n.g_leak, n.i_draw)
        v_sw = vcc - vd * (ra_t + rb_t) / rb_t
        ph, stalls = two_segment_phase(n.curve, seg1, seg2, v_sw, v_bot, n.v_up, tpd)
        i0 = np.where(v_sw > v_bot, (vcc - vd - v_bot) / ra_t, (vcc - v_bot) / (ra_t + rb_t))
        return ph, stalls, i0, ra_t
    diode = n.parts.diode_model
    i_sat = saturation_at(diode, n.t_amb) * n.diode_is_factor
    n_vt = diode.ideality * thermal_voltage_v(n.t_amb)

    def net(v):
        return diode_feed_a(vcc, v, ra_t, rb_t, i_sat, n_vt) - n.g_leak * v - n.i_draw
    ph, stalls = quadrature_phase(n.curve, net, v_bot, n.v_up, tpd)
    return ph, stalls, diode_feed_a(vcc, v_bot, ra_t, rb_t, i_sat, n_vt), ra_t


def phases(n: Node):
    # the diode is reverse biased while C discharges: its leakage helps [cp]
    i_rev = reverse_current_at(n.parts.diode_model, n.t_amb) if _shockley(n) else 0.0
    return cycle(n, charge, transistor_discharge(n, i_rev))


CIRCUIT = Circuit(
    name="astable-diode", title="astable with a diode across RB (duty can go below 50 %)",
    parts=("ra", "rb", "c"), main_outputs=("frequency_hz", "duty"),
    spec_keys=("frequency", "duty"), phases=phases,
    textbook="tH = RA·C·ln((VCC − Vd − Vc/2)/(VCC − Vd − Vc)), tL = ln 2 · RB · C, "
             "f = 1/(tH + tL), duty = tH/(tH + tL); Vc = 2/3 VCC without a control voltage",
    check={"high_time_s": "{RA}*{C}*LN(({VCC}-{VD}-{VC}/2)/({VCC}-{VD}-{VC}))",
           "low_time_s": "LN(2)*{RB}*{C}", **CHECK_FROM_TIMES},
    check_inputs=("diode_drop_v",),
    starter=Starter(
        design='''
[design]                    # a diode across RB: charge through RA, discharge through RB
ra = {{ series = "E12", min = "1k", max = "100k" }}
rb = {{ series = "E12", min = "10k", max = "1M" }}
c  = ["10n", "22n", "47n", "100n"]
''',
        spec='frequency = {{ target = "1kHz", tolerance = "5%" }}\nduty = {{ min = 0.2, max = 0.4 }}'),
    timer_band="astable", free_running=True, trigger_on_node=True, input_resistor="ra",
    charging=("ra",), extra_flags=frequency_flags, trace=trace, cycle_output="period_s",
    waveform_text=WAVEFORM_TEXT,
    bom_extra=("diode",),
)
