"""Timer-model data files and their loader.

`bipolar.toml` and `cmos.toml` ship with timer-sweep; a study may name its own file instead.
Every key of the shipped files is required in a user's file, so nothing is silently defaulted.
"""
from __future__ import annotations

import math
import tomllib
from pathlib import Path

from ..errors import InputError
from ..physics.timer import TimerModel

HERE = Path(__file__).parent
BUILTIN = {"bipolar": HERE / "bipolar.toml", "cmos": HERE / "cmos.toml"}
SECTIONS = ("supply", "inputs", "discharge", "output", "timing", "thermal")
#: timing spreads given as typical, each with its maximum (3 x typical where none is published)
SPREADS = ("accuracy_astable", "accuracy_monostable", "drift_astable_ppm_per_k",
           "drift_monostable_ppm_per_k", "supply_sensitivity_astable_per_v",
           "supply_sensitivity_monostable_per_v")


def spread_max_name(typical: str) -> str:
    """The key of a spread's maximum: 'accuracy_astable' -> 'accuracy_astable_max',
    'drift_astable_ppm_per_k' -> 'drift_astable_max_ppm_per_k'."""
    for unit in ("_ppm_per_k", "_per_v"):
        if typical.endswith(unit):
            return typical[: -len(unit)] + "_max" + unit
    return typical + "_max"


def load_timer(spec: str, base_dir: Path | None = None, study_file: str = "") -> TimerModel:
    """A timer model by built-in name ('bipolar', 'cmos') or path to a TOML file.

    Raises InputError naming the file and key on anything missing, malformed or impossible.
    """
    if spec in BUILTIN:
        path = BUILTIN[spec]
    else:
        path = Path(spec)
        if not path.is_absolute() and base_dir is not None:
            path = base_dir / path
        if not path.suffix == ".toml":
            raise InputError(study_file, "study.timer",
                             f"unknown timer {spec!r}: use 'bipolar', 'cmos' or a path to a .toml file")
        if not path.exists():
            raise InputError(study_file, "study.timer", f"timer-model file {str(path)!r} not found")
    fname = str(path)
    from ..files import MAX_TEXT, read_bytes_limited
    from ..tomltext import check_toml_text
    try:
        text = read_bytes_limited(path, MAX_TEXT, "a timer-model file").decode("utf-8")
        check_toml_text(text, fname)
        data = tomllib.loads(text)
    except UnicodeDecodeError:
        raise InputError(fname, "", "not a UTF-8 text file") from None
    except tomllib.TOMLDecodeError as e:
        raise InputError(fname, "", f"not valid TOML: {e}") from None
    flat: dict[str, object] = {}
    for key in ("name", "kind"):
        if not isinstance(data.get(key), str):
            raise InputError(fname, key, "missing or not a string")
        flat[key] = data[key]
    for section in SECTIONS:
        table = data.get(section)
        if not isinstance(table, dict):
            raise InputError(fname, section, "missing section")
        for key, value in table.items():
            flat[key] = value
    _upgrade_output_lines(flat)
    unknown = [k for k in data if k not in SECTIONS + ("name", "kind")]
    if unknown:
        raise InputError(fname, unknown[0], "unknown key")
    names = TimerModel.field_names()
    for k in flat:
        if k not in names:
            raise InputError(fname, k, "unknown key")
    maxima = {spread_max_name(t): t for t in SPREADS}
    for k in names:
        if k in maxima and k not in flat:
            raise InputError(fname, k, f"missing key: the maximum of {maxima[k]} (where the data "
                             "gives none, write 3 x the typical figure and say so)")
        if k not in flat:
            raise InputError(fname, k, "missing key")
        if k in ("name", "kind"):
            continue
        if k in POINT_LISTS:
            pts = flat[k]
            x_name, y_name = POINT_LISTS[k]
            ok = (isinstance(pts, list) and pts and all(
                isinstance(p, list) and len(p) == 2 and all(_is_num(x) for x in p) for p in pts))
            if not ok:
                raise InputError(fname, k, f"must be a list of [{x_name}, {y_name}] pairs")
            if any(p[0] < 0 or p[1] < 0 for p in pts) or any(b[0] <= a[0] for a, b in zip(pts, pts[1:])):
                raise InputError(fname, k, f"{y_name} and {x_name} must be >= 0 and {x_name} "
                                 "strictly increasing")
            if k != "quiescent_points" and any(b[1] < a[1] for a, b in zip(pts, pts[1:])):
                raise InputError(fname, k, "the drop must not fall as the current rises")
            flat[k] = tuple((float(a), float(b)) for a, b in pts)
            continue
        if k in ("high_can_sink", "trigger_current_sources"):
            if not isinstance(flat[k], bool):
                raise InputError(fname, k, "must be true or false")
            continue
        if not _is_num(flat[k]):
            raise InputError(fname, k, "must be a finite number")
        flat[k] = float(flat[k])
    model = TimerModel(**flat)
    _check_physical(model, fname)
    return model


#: timer-model keys that are lists of points, with the names of their two columns
POINT_LISTS = {"quiescent_points": ("volts", "amperes"),
               "source_drop_points": ("amperes", "volts"),
               "sink_drop_points": ("amperes", "volts")}


def _upgrade_output_lines(flat: dict) -> None:
    """Accept the older straight-line output keys (drop V0 + R I: high_drop_v, high_ohm,
    low_drop_v, low_ohm) as two-point curves, so timer files written for earlier versions load;
    such a file's source drop gets no temperature coefficient and a stage that sinks and sources
    (what the older model assumed)."""
    upgraded = False
    for old_v, old_r, new in (("high_drop_v", "high_ohm", "source_drop_points"),
                              ("low_drop_v", "low_ohm", "sink_drop_points")):
        if old_v in flat and old_r in flat and new not in flat:
            v0, r = flat.pop(old_v), flat.pop(old_r)
            if _is_num(v0) and _is_num(r):
                flat[new] = [[0.0, v0], [0.1, v0 + 0.1 * r]]
                upgraded = True
    if upgraded:
        flat.setdefault("source_drop_tempco_v_per_k", 0.0)
        flat.setdefault("high_can_sink", True)


def _is_num(x) -> bool:
    return isinstance(x, (int, float)) and not isinstance(x, bool) and math.isfinite(x)


def _check_physical(m: TimerModel, fname: str) -> None:
    """Refuse a model no chip could have."""
    def bad(key, why):
        raise InputError(fname, key, why)
    if not 0 < m.min_v < m.max_v <= m.abs_max_v:
        bad("max_v", "supply limits must satisfy 0 < min_v < max_v <= abs_max_v")
    if not m.min_v <= m.typical_v <= m.max_v:
        bad("typical_v", "must lie between min_v and max_v")
    if not 0.0 < m.threshold_fraction < 1.0:
        bad("threshold_fraction", "the upper threshold must lie between 0 and 1 of the supply "
            "(the lower one is half of it, so the thresholds stay in order)")
    for k in ("threshold_current_a", "threshold_current_max_a", "trigger_current_a", "saturation_v",
              "saturation_ohm", "surge_energy_max_j",
              "propagation_delay_s", "accuracy_astable", "accuracy_monostable",
              "drift_astable_ppm_per_k", "drift_monostable_ppm_per_k",
              "supply_sensitivity_astable_per_v", "supply_sensitivity_monostable_per_v",
              *map(spread_max_name, SPREADS), "min_capacitance_f", "min_resistance_ohm", "reset_v"):
        if getattr(m, k) < 0:
            bad(k, "must not be negative")
    if m.threshold_current_max_a < m.threshold_current_a:
        bad("threshold_current_max_a", "must be at least threshold_current_a")
    if m.quiescent_max_ratio < 1.0:
        bad("quiescent_max_ratio", "the maximum quiescent current must be at least the typical (ratio >= 1)")
    for typ in SPREADS:
        if getattr(m, spread_max_name(typ)) < getattr(m, typ):
            bad(spread_max_name(typ), f"a maximum must be at least the typical {typ}")
    for k in ("divider_resistance_ohm", "discharge_max_a", "surge_current_a", "source_max_a", "sink_max_a",
              "max_frequency_hz", "theta_ja_c_per_w", "resistance_derating"):
        if getattr(m, k) <= 0:
            bad(k, "must be greater than zero")
    if not m.ambient_min_c < m.ambient_max_c < m.tj_max_c:
        bad("ambient_max_c", "must satisfy ambient_min_c < ambient_max_c < tj_max_c")
    if m.source_drop_points[0][1] >= m.min_v:
        bad("source_drop_points", "output drop is larger than the lowest supply")
