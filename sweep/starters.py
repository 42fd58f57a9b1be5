"""Commented starter studies for `timer-sweep new`."""
from __future__ import annotations

from .errors import InputError
from .physics import CIRCUITS

_HEAD = '''# timer-sweep study: {what}
# Quantities take SI prefixes ("4.7k", "100n", "2.2u") or IEC 60062 RKM codes ("4k7", "4n7");
# a unit, if written, must match the key ("100nF" is a capacitance). Ranges are a value, a list,
# {{ min, max, steps }} (linear), {{ min, max, per_decade }} (logarithmic) or
# {{ series = "E12", min, max }} (IEC 60063 standard values, bounds included).

[study]
title = "{title}"
circuit = "{circuit}"
timer = "cmos"              # bipolar | cmos | path to your own timer-model TOML file
supply = "regulated"        # regulated | battery | mains-derived (sets the cautions)
'''

_PARTS = {
    "astable": '''
[design]                    # what you choose: every combination is a candidate design
ra = {{ series = "E12", min = "1k", max = "100k" }}
rb = {{ series = "E12", min = "10k", max = "1M" }}
c  = ["10n", "22n", "47n", "100n"]
''',
    "astable-diode": '''
[design]                    # a diode across RB: charge through RA, discharge through RB
ra = {{ series = "E12", min = "1k", max = "100k" }}
rb = {{ series = "E12", min = "10k", max = "1M" }}
c  = ["10n", "22n", "47n", "100n"]
''',
    "astable-symmetric": '''
[design]                    # one resistor from the output to C
r = {{ series = "E24", min = "1k", max = "1M" }}
c = ["10n", "22n", "47n", "100n"]
''',
    "monostable": '''
[design]                    # one pulse of about 1.1 R C per trigger
r = {{ series = "E24", min = "10k", max = "1M" }}
c = ["1u", "2.2u", "4.7u", "10u"]
''',
    "missing-pulse": '''
[design]                    # alarms about 1.1 R C after the last input pulse
r = {{ series = "E24", min = "100k", max = "1M" }}
c = ["1u", "2.2u", "4.7u"]
''',
    "bistable": '''
# A bistable latch has no timing parts: trigger sets, reset clears.
''',
}

_SPEC = {
    "astable": 'frequency = {{ target = "1kHz", tolerance = "5%" }}\nduty = {{ max = 0.7 }}',
    "astable-diode": 'frequency = {{ target = "1kHz", tolerance = "5%" }}\nduty = {{ min = 0.2, max = 0.4 }}',
    "astable-symmetric": 'frequency = {{ target = "1kHz", tolerance = "5%" }}\nduty = {{ min = 0.45, max = 0.55 }}',
    "monostable": 'pulse_width = {{ target = "1s", tolerance = "10%" }}\nidle_current = {{ max = "1mA" }}',
    "missing-pulse": 'timeout = {{ target = "2s", tolerance = "20%" }}',
    "bistable": 'supply_current = {{ max = "5mA" }}',
}

_TAIL = '''
[conditions]                # what every design must survive; nominal defaults to the middle
vcc = {{ min = 4.5, max = 5.5, steps = 3 }}
temperature = {{ min = -10, max = 50, steps = 3, nominal = 25 }}

[parts]
# resistor_tolerance = "1%"     # default: implied by the series (E12 10 %, E24 5 %, E96 1 %)
resistor_tempco = "100ppm"      # per kelvin
capacitor = "X7R"               # C0G | X7R | X5R | Y5V | polypropylene | polyester | electrolytic | tantalum
capacitor_tolerance = "10%"
capacitor_voltage = "16V"       # rating, for DC-bias loss and leakage

[load]
resistance = "1k"
to = "ground"                   # ground: the output sources current; supply: it sinks it
kind = "resistive"              # resistive | led | relay | inductive | mains-switching

[spec]                          # what "good" means: {{ target, tolerance }} or {{ min, max }}
{spec}

[analysis]
monte_carlo = 1000              # builds per design
seed = 1
'''


#: extra [conditions] lines of a circuit
_CONDITIONS = {"missing-pulse": 'input_period = {{ min = 0.8, max = 1.2, steps = 3 }}   '
                                '# the input pulse train, slowest legal period included\n'}


def starter_text(circuit: str) -> str:
    if circuit not in CIRCUITS:
        raise InputError("", "circuit", f"unknown circuit {circuit!r}; known: {', '.join(CIRCUITS)}")
    return (_HEAD.format(what=f"{'an' if circuit[0] in 'aeiou' else 'a'} {circuit} starter (edit every value)", title=f"My {circuit} timer",
                         circuit=circuit)
            + _PARTS[circuit].format() + _TAIL.format(spec=_SPEC[circuit].format()).replace(
                "nominal defaults to the middle\n", "nominal defaults to the middle\n"
                + _CONDITIONS.get(circuit, "").format(), 1))
