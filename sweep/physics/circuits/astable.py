"""Astable: RA from VCC to the discharge pin, RB from there to C; C charges through RA + RB and
discharges through RB into the discharge transistor [book: any circuits text, e.g. Horowitz &
Hill, *The Art of Electronics*, the 555 section]. Ideally f = 1/(ln 2 (RA + 2 RB) C)."""
from __future__ import annotations

from ..network import Node, node_source
from ..nodes import linear_phase
from ._astable import (CHECK_FROM_TIMES, WAVEFORM_TEXT, cycle, frequency_flags, trace,
                       transistor_discharge)
from .base import Circuit, Starter


def charge(n: Node, v_bot):
    """High phase: C charges from VCC through RA + RB [book]."""
    vinf, g = node_source(n.vcc, n.ra_t + n.rb_t, n.g_leak, n.i_draw)
    ph = linear_phase(n.curve, vinf, g, v_bot, n.v_up, n.timer.propagation_delay_s,
                      n.curve.at_fraction(1.0))
    return ph, vinf <= n.v_up, (n.vcc - v_bot) / (n.ra_t + n.rb_t), n.ra_t


def phases(n: Node):
    return cycle(n, charge, transistor_discharge(n))


CIRCUIT = Circuit(
    name="astable", title="astable (free-running)", parts=("ra", "rb", "c"),
    main_outputs=("frequency_hz", "duty"), spec_keys=("frequency", "duty"), phases=phases,
    textbook="f = 1/(ln 2 · (RA + 2·RB) · C), duty = (RA + RB)/(RA + 2·RB); with a control "
             "voltage Vc: tH = (RA + RB)·C·ln((VCC − Vc/2)/(VCC − Vc)), tL = ln 2 · RB · C",
    check={"high_time_s": "({RA}+{RB})*{C}*LN(({VCC}-{VC}/2)/({VCC}-{VC}))",
           "low_time_s": "LN(2)*{RB}*{C}", **CHECK_FROM_TIMES},
    starter=Starter(
        design='''
[design]                    # what you choose: every combination is a candidate design
ra = {{ series = "E12", min = "1k", max = "100k" }}
rb = {{ series = "E12", min = "10k", max = "1M" }}
c  = ["10n", "22n", "47n", "100n"]
''',
        spec='frequency = {{ target = "1kHz", tolerance = "5%" }}\nduty = {{ max = 0.7 }}'),
    timer_band="astable", free_running=True, trigger_on_node=True, input_resistor="ra",
    charging=("ra", "rb"), extra_flags=frequency_flags, trace=trace, cycle_output="period_s",
    waveform_text=WAVEFORM_TEXT,
)
