"""Bistable: the timer as a set/reset latch, trigger sets, reset clears; no timing parts [book:
any circuits text, e.g. Horowitz & Hill, *The Art of Electronics*, the 555 section]."""
from __future__ import annotations

import numpy as np

from ..network import Node
from .base import Circuit, Starter


def phases(n: Node):
    """The latch's supply current in its worse state, its idle (output low) current and the chip's
    power; nothing times."""
    iq, stage, vcc = n.iq, n.stage, n.vcc
    i_h = iq[True] + stage.i_high
    i_l = iq[False] + stage.i_low
    stalls = np.zeros(np.broadcast(vcc, n.t_amb).shape, dtype=bool)
    p_chip = np.maximum(vcc * iq[True] + (vcc - stage.v_high) * stage.i_high,
                        vcc * iq[False] + stage.v_low * stage.i_low)
    nan = np.full(stalls.shape, np.nan)
    out = dict(high_time_s=nan, low_time_s=nan, period_s=nan, frequency_hz=nan, duty=nan,
               pulse_width_s=nan, supply_current_a=np.maximum(i_h, i_l), idle_current_a=i_l,
               discharge_peak_a=np.zeros(stalls.shape), ra_power_w=np.zeros(stalls.shape),
               discharge_dump_s=nan)
    return out, stalls, p_chip, None, None


CIRCUIT = Circuit(
    name="bistable", title="bistable (set/reset latch)", parts=(), main_outputs=(),
    spec_keys=("idle_current",), phases=phases, timed=False,
    starter=Starter(
        design='''
# A bistable latch has no timing parts: trigger sets, reset clears.
''',
        spec='supply_current = {{ max = "5mA" }}'),
    has_idle=True,
)
