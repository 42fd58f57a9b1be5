"""Pure numpy physics of timer-sweep: parts, timer data and the realistic model."""
from .model import ASTABLES, CIRCUIT_PARTS, CIRCUITS, FLAG_BITS, evaluate, flag_names
from .parts import CAPACITORS, Load, Parts, capacitor_named
from .timer import TimerModel

__all__ = ["ASTABLES", "CIRCUIT_PARTS", "CIRCUITS", "FLAG_BITS", "evaluate", "flag_names",
           "CAPACITORS", "Load", "Parts", "capacitor_named", "TimerModel"]
