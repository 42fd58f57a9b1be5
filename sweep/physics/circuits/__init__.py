"""The registry of circuits: one module each, listed here once; every other layer reads it.

Adding a circuit: write its module (its physics and its `CIRCUIT` record, see `base.Circuit`),
add it to `_MODULES`, and add its tests (a textbook test in tests/reference/test_textbook.py,
an ODE check in tests/reference/test_ode.py). DEVELOPERS.md walks through it.
"""
from __future__ import annotations

from . import astable, astable_diode, astable_symmetric, bistable, missing_pulse, monostable
from .base import Circuit, Starter

_MODULES = (astable, astable_diode, astable_symmetric, monostable, missing_pulse, bistable)

#: every circuit by its study name, in the order the help and the errors list them
REGISTRY: dict[str, Circuit] = {m.CIRCUIT.name: m.CIRCUIT for m in _MODULES}
CIRCUITS: tuple[str, ...] = tuple(REGISTRY)
#: the free-running circuits (a period, a frequency and a duty cycle)
ASTABLES: tuple[str, ...] = tuple(n for n, c in REGISTRY.items() if c.free_running)
#: which timing parts each circuit needs
CIRCUIT_PARTS: dict[str, tuple[str, ...]] = {n: c.parts for n, c in REGISTRY.items()}
#: every timing part any circuit has: the resistors, then the capacitor
TIMING_PARTS: tuple[str, ...] = tuple(sorted(dict.fromkeys(p for c in REGISTRY.values() for p in c.parts),
                                             key=lambda p: p == "c"))


def circuit_named(name: str) -> Circuit:
    """The circuit record of a study name; ValueError naming the known ones otherwise."""
    try:
        return REGISTRY[name]
    except KeyError:
        raise ValueError(f"unknown circuit {name!r}; known: {', '.join(CIRCUITS)}") from None


__all__ = ["ASTABLES", "CIRCUITS", "CIRCUIT_PARTS", "Circuit", "REGISTRY", "Starter",
           "TIMING_PARTS", "circuit_named"]
