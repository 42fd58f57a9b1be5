"""Monostable: R from VCC to C, the discharge transistor holding C empty until a trigger; the
pulse lasts while C charges to the upper threshold, ideally R C ln 3 [book: any circuits text,
e.g. Horowitz & Hill, *The Art of Electronics*, the 555 section]."""
from __future__ import annotations

import numpy as np

from ..network import Node, node_source, surge
from ..nodes import linear_phase
from .base import Circuit, Starter


def phases(n: Node):
    """The monostable's pulse, supply and idle currents, and the capacitor dump at its end."""
    timer, stage, iq, vcc, r_t, v_up, i_draw, g_leak = (n.timer, n.stage, n.iq, n.vcc, n.r_t, n.v_up,
                                                       n.i_draw, n.g_leak)
    tpd = timer.propagation_delay_s
    # at rest the discharge transistor holds C: R from VCC, V_sat0 + R_sat, leakage and the
    # threshold input current; a resistor R_s between the discharge pin and C is in series with
    # the saturation resistance [derived: Kirchhoff's current law]
    r_s = n.parts.discharge_resistor_ohm
    r_sat = timer.saturation_ohm + r_s
    if r_sat > 0:
        v0 = ((vcc / r_t + timer.saturation_v / r_sat - i_draw)
              / (1.0 / r_t + 1.0 / r_sat + g_leak))
    else:
        v0 = timer.saturation_v + 0.0 * vcc * r_t
    vinf_c, g_c = node_source(vcc, r_t, g_leak, i_draw)
    stalls = vinf_c <= v_up
    with np.errstate(all="ignore"):
        ph = linear_phase(n.curve, vinf_c, g_c, v0, v_up, tpd, n.curve.at_fraction(1.0))
        pw = np.where(stalls, np.nan, ph.time_s)
        vm_h = ph.vt_vs / ph.time_s
    i_idle_r = (vcc - v0) / r_t
    supply = iq[True] + (vcc - vm_h) / r_t + stage.i_high
    idle = iq[False] + i_idle_r + stage.i_low
    p_chip = np.maximum(vcc * iq[True] + (vcc - stage.v_high) * stage.i_high,
                        vcc * iq[False] + stage.v_low * stage.i_low
                        + v0 * i_idle_r)
    v_top = ph.v_end_v
    # at the pulse's end the capacitor dumps into the transistor, through R_s if there is one
    # [derived]
    with np.errstate(all="ignore"):
        dump = np.minimum((v_top - timer.saturation_v) / max(r_sat, 1e-12), timer.surge_current_a)
    nan = np.full_like(pw, np.nan)
    out = dict(high_time_s=pw, low_time_s=nan, period_s=nan, frequency_hz=nan, duty=nan,
               pulse_width_s=pw, supply_current_a=supply, idle_current_a=idle,
               discharge_peak_a=dump + i_idle_r, ra_power_w=(vcc - v0) ** 2 / r_t)
    out.update(wave_v_start_v=v0, wave_v_top_v=v_top, wave_vinf_high_v=ph.vinf_v, wave_vinf_low_v=v0)
    return out, stalls, p_chip, surge(timer, n.curve, v_top, v0, r_s), i_idle_r


def trace(probe, p, input_period_s=np.nan) -> None:
    """One trigger: waiting, the pulse, the capacitor's dump into the discharge transistor (to a
    tenth in the model's dump time, so to a thousandth in three of them [derived]), waiting."""
    v0, v1, lo = p["wave_v_start_v"], p["wave_v_top_v"], p["output_low_v"]
    pw = p["pulse_width_s"]
    dump = p["discharge_dump_s"] if np.isfinite(p["discharge_dump_s"]) and p["discharge_dump_s"] > 0 \
        else 1e-3 * pw
    probe.seg(v0, v0, np.nan, 0.1 * pw, lo)
    probe.seg(v0, v1, p["wave_vinf_high_v"], pw, p["output_high_v"])
    probe.seg(v1, v0 + 1e-3 * (v1 - v0), v0, 3.0 * dump, lo)
    probe.seg(v0, v0, np.nan, 0.4 * pw, lo)


#: the pulse-width formula of the Check sheet, shared with the missing-pulse detector [book]
CHECK_RAMP = "{R}*{C}*LN({VCC}/({VCC}-{VC}))"

CIRCUIT = Circuit(
    name="monostable", title="monostable (one pulse per trigger)", parts=("r", "c"),
    main_outputs=("pulse_width_s",), spec_keys=("pulse_width", "idle_current"), phases=phases,
    textbook="pulse width = R·C·ln(VCC/(VCC − Vc)) = ln 3 · R · C with the internal divider",
    check={"pulse_width_s": CHECK_RAMP},
    starter=Starter(
        design='''
[design]                    # one pulse of about 1.1 R C per trigger
r = {{ series = "E24", min = "10k", max = "1M" }}
c = ["1u", "2.2u", "4.7u", "10u"]
''',
        spec='pulse_width = {{ target = "1s", tolerance = "10%" }}\nidle_current = {{ max = "1mA" }}'),
    timer_band="monostable", ramps_from_ground=True, has_idle=True, waits=True, discharge_resistor=True,
    trace=trace, cycle_output="pulse_width_s",
    input_resistor="r", charging=("r",),
    waveform_text="one trigger, the pulse while the capacitor climbs to the upper threshold, "
                  "and the recovery when the discharge transistor empties it",
)
