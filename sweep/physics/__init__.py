"""Pure numpy physics of timer-sweep: parts, timer data, the circuits and the realistic model."""
from .circuits import ASTABLES, CIRCUIT_PARTS, CIRCUITS, REGISTRY, TIMING_PARTS, Circuit, circuit_named
from .model import FLAG_BITS, FLAGS, evaluate, flag_names
from .parts import CAPACITORS, Load, Parts, capacitor_named
from .timer import TimerModel

__all__ = ["ASTABLES", "CIRCUIT_PARTS", "CIRCUITS", "REGISTRY", "TIMING_PARTS", "Circuit",
           "circuit_named", "FLAG_BITS", "FLAGS", "evaluate", "flag_names", "CAPACITORS", "Load",
           "Parts", "capacitor_named", "TimerModel"]
