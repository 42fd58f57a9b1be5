"""One design at one condition, from command-line options, through the same study parser."""
from __future__ import annotations

import numpy as np

from .engine import evaluate_block, flag_text
from .errors import InputError
from .study import parse_study
from .tomltext import toml_inline
from .variables import OUTPUTS

SECTION_OF = {"circuit": ("study", "circuit"), "timer": ("study", "timer"),
              "ra": ("design", "ra"), "rb": ("design", "rb"), "r": ("design", "r"), "c": ("design", "c"),
              "vcc": ("conditions", "vcc"), "temperature": ("conditions", "temperature"),
              "control_voltage": ("conditions", "control_voltage"),
              "input_period": ("conditions", "input_period"),
              "load": ("load", "resistance"), "load_to": ("load", "to"),
              "load_forward_voltage": ("load", "forward_voltage"), "load_kind": ("load", "kind")}


def option_name(section_key: str) -> str:
    """'design.ra' -> '--ra', 'load.to' -> '--load-to' (the option a user typed)."""
    for opt, (sec, key) in SECTION_OF.items():
        if section_key.split(".")[:2] == [sec, key]:
            return "--" + opt.replace("_", "-")
    return "--" + section_key.split(".")[-1].replace("_", "-")


def evaluate_point(options: dict[str, str], ideal: bool = False) -> dict:
    """Evaluate the design the options describe. Returns machine column -> value."""
    data: dict[str, dict] = {"study": {}}
    for opt, value in options.items():
        sec, key = SECTION_OF.get(opt, ("parts", opt))
        data.setdefault(sec, {})[key] = value
    text = "\n".join(f"[{s}]\n" + "\n".join(f"{k} = {toml_inline(v)}" for k, v in keys.items())
                     for s, keys in data.items()) + "\n[analysis]\nmonte_carlo = 0\n"
    try:
        study = parse_study(text, "<command line>")
    except InputError as e:
        raise InputError("", option_name(e.key) if e.key else "", e.problem) from None
    design = {a.key: a.values for a in study.design}
    cond = {a.key: a.values for a in study.conditions}
    out = evaluate_block(study.case, design, cond, ideal=ideal, with_spec=False)
    row: dict = {"circuit": study.circuit, "timer": study.timer.name}
    for a in study.axes:
        row[a.column] = float(a.values[0])
    for o in OUTPUTS:
        row[o] = float(np.asarray(out[o]).ravel()[0])
    mask = np.asarray(out["flag_mask"]).ravel()
    row["flags"] = str(flag_text(mask)[0])
    row["ok"] = bool(mask[0] == 0)
    return row
