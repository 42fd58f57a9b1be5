"""Missing-pulse detector: a monostable whose capacitor an input pulse train discharges (through
a transistor across C) and retriggers before it reaches the threshold. The timeout, from the last
pulse to the alarm, is the monostable's ramp from the discharged level to the threshold, ln 3 R C
in the ideal case [book: any circuits text, e.g. Horowitz & Hill, *The Art of Electronics*, the
555 section]; the external transistor is taken to discharge C to the same level as the timer's
own discharge transistor [cp]."""
from __future__ import annotations

import numpy as np

from ..network import Node
from ..traces import rc_segment
from . import monostable
from .base import Circuit, Starter


def phases(n: Node):
    """While pulses arrive the output stays high and C ramps for one input period at a time; the
    supply current is the quiescent high current, the load and the mean current through R over
    that ramp, with the node following the RC law whose time constant matches the timeout
    [derived]. The current in the alarm state (output low, C held) is the idle current."""
    out, stalls, p_chip, surge, steady = monostable.phases(n)
    timeout = out["pulse_width_s"]
    v0 = out["wave_v_start_v"]
    vinf = out["wave_vinf_high_v"]
    t_in = np.asarray(n.input_period, dtype=float)
    with np.errstate(all="ignore"):
        tau = timeout / np.log((vinf - v0) / (vinf - n.v_up))
        span = np.minimum(t_in, timeout)
        v_mean = vinf - (vinf - v0) * tau / span * -np.expm1(-span / tau)
        supply = n.iq[True] + (n.vcc - v_mean) / n.r_t + n.stage.i_high
    nan = np.full(np.shape(timeout), np.nan)
    out.update(pulse_width_s=nan, high_time_s=nan, timeout_s=timeout, timeout_margin_s=timeout - t_in,
               supply_current_a=np.where(np.isnan(timeout), np.nan, supply))
    return out, stalls, p_chip, surge, steady


def trace(probe, p, input_period_s=np.nan) -> None:
    """Two input pulses, each discharging C before it reaches the threshold, a third, then the
    one that never comes: C climbs to the threshold and the output drops (the alarm)."""
    v0, v1, hi = p["wave_v_start_v"], p["wave_v_top_v"], p["output_high_v"]
    to = p["timeout_s"]
    period = input_period_s if np.isfinite(input_period_s) and input_period_s < to else 0.5 * to
    vinf = p["wave_vinf_high_v"]
    for _ in range(2):
        tt, vv = rc_segment(v0, v1, vinf, to, probe.n)
        keep = tt <= period
        probe.add(np.append(tt[keep], period), np.append(vv[keep], np.interp(period, tt, vv)), hi)
    probe.seg(v0, v1, vinf, to, hi)
    probe.seg(v0, v0, np.nan, 0.5 * to, p["output_low_v"])


def false_alarm(out, env) -> dict:
    """The detector alarms although the pulses come in time: the timeout is shorter than the
    input period."""
    return {"false-alarm": out["timeout_s"] < np.asarray(env["input_period"], dtype=float)}


CIRCUIT = Circuit(
    name="missing-pulse", title="missing-pulse detector (alarms when an input pulse is late)",
    parts=("r", "c"), main_outputs=("timeout_s",), spec_keys=("timeout", "idle_current"),
    phases=phases,
    textbook="timeout after the last input pulse = R·C·ln(VCC/(VCC − Vc)) = ln 3 · R · C "
             "with the internal divider; no false alarm while the input period stays below it",
    check={"timeout_s": monostable.CHECK_RAMP},
    starter=Starter(
        design='''
[design]                    # alarms about 1.1 R C after the last input pulse
r = {{ series = "E24", min = "100k", max = "1M" }}
c = ["1u", "2.2u", "4.7u"]
''',
        spec='timeout = {{ target = "2s", tolerance = "20%" }}',
        conditions='input_period = {{ min = 0.8, max = 1.2, steps = 3 }}   '
                   '# the input pulse train, slowest legal period included\n'),
    after_main=("timeout_margin_s",), conditions=("input_period",), timer_band="monostable",
    ramps_from_ground=True, has_idle=True, input_resistor="r", charging=("r",),
    extra_flags=false_alarm, trace=trace, cycle_output="timeout_s",
    waveform_text="three input pulses, each discharging the capacitor before it reaches the "
                  "upper threshold, then a pulse that never comes: the capacitor climbs to the "
                  "threshold and the output drops, raising the alarm one timeout after the last "
                  "pulse",
    bom_extra=("discharge-transistor",),
)
