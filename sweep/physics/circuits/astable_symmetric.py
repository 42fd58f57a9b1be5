"""Symmetric astable: one resistor R from the output to C, the threshold and trigger on C; the
output charges C when high and discharges it when low, 50 % duty on a rail-to-rail output, not on
a bipolar one [book: any circuits text, e.g. Horowitz & Hill, *The Art of Electronics*, the 555
section]. Ideally f = 1/(2 ln 2 R C)."""
from __future__ import annotations

import numpy as np

from ..network import Node, node_source
from ..nodes import linear_phase, two_segment_phase
from ._astable import CHECK_FROM_TIMES, WAVEFORM_TEXT, cycle, frequency_flags, trace
from .base import Circuit, Starter


def charge(n: Node, v_bot):
    """High phase: the output high drives R [derived]."""
    tpd, r_t, stage = n.timer.propagation_delay_s, n.r_t, n.stage
    v_h, r_h = stage.high
    seg1 = node_source(v_h, r_t + r_h, n.g_leak, n.i_draw)
    i0 = (v_h - v_bot) / (r_t + r_h)
    if stage.high_lifted is None:
        return linear_phase(n.curve, *seg1, v_bot, n.v_up, tpd), seg1[0] <= n.v_up, i0, r_t
    # a load to the supply lifts the output above a stage that cannot sink: the load alone
    # feeds R while the node stays above the stage's open level e [derived]
    v_l, r_l, e = stage.high_lifted
    lifted = ~np.isnan(v_l)
    seg2 = node_source(np.where(lifted, v_l, v_h), r_t + np.where(lifted, r_l, r_h), n.g_leak, n.i_draw)
    v_sw = np.where(lifted, e - r_t * (v_l - e) / r_l, -np.inf)
    ph, stalls = two_segment_phase(n.curve, seg1, seg2, v_sw, v_bot, n.v_up, tpd)
    i0 = np.where(lifted & (v_bot >= v_sw), (np.where(lifted, v_l, v_h) - v_bot)
                  / (r_t + np.where(lifted, r_l, r_h)), i0)
    return ph, stalls, i0, r_t


def discharge(n: Node):
    """Low phase: the output low sinks R's current [derived]. A load to ground below the stage's
    offset: while the node is above v_k the stage and the load sink R's current together, below
    it the load alone [derived]."""
    r_t, stage = n.r_t, n.stage
    v_l, r_l = stage.low
    seg_d = node_source(v_l, r_t + r_l, n.g_leak, n.i_draw)
    split = None
    if stage.low_split is not None:
        v_ld, r_ld, e = stage.low_split
        on = ~np.isnan(e)
        seg_ld = node_source(np.where(on, v_ld, v_l), r_t + np.where(on, r_ld, r_l), n.g_leak, n.i_draw)
        split = (seg_ld, np.where(on, e + r_t * (e - v_ld) / r_ld, -np.inf))
    return seg_d, split, None


def phases(n: Node):
    return cycle(n, charge, discharge(n))


CIRCUIT = Circuit(
    name="astable-symmetric", title="symmetric astable (one resistor from the output)",
    parts=("r", "c"), main_outputs=("frequency_hz", "duty"), spec_keys=("frequency", "duty"),
    phases=phases,
    textbook="f = 1/(2 · ln 2 · R · C), duty = 50 % (rail-to-rail output); with a "
             "control voltage Vc: tH = R·C·ln((VCC − Vc/2)/(VCC − Vc)), tL = ln 2 · R · C",
    check={"high_time_s": "{R}*{C}*LN(({VCC}-{VC}/2)/({VCC}-{VC}))",
           "low_time_s": "LN(2)*{R}*{C}", **CHECK_FROM_TIMES},
    starter=Starter(
        design='''
[design]                    # one resistor from the output to C
r = {{ series = "E24", min = "1k", max = "1M" }}
c = ["10n", "22n", "47n", "100n"]
''',
        spec='frequency = {{ target = "1kHz", tolerance = "5%" }}\nduty = {{ min = 0.45, max = 0.55 }}'),
    timer_band="astable", free_running=True, trigger_on_node=True, input_resistor="r",
    charging=("r",), extra_flags=frequency_flags, trace=trace, cycle_output="period_s",
    waveform_text=WAVEFORM_TEXT,
)
