"""TOML text in and out: the guard that refuses text the parser should never see, and the
conversions between values, sheet rows and TOML text (the workbook's Study sheet)."""
from __future__ import annotations

import json
import re

import numpy as np

from .errors import InputError

MAX_DEPTH = 16                # nested [ ] and { } in a TOML value; a study needs 3
MAX_DIGITS = 64               # digits in one bare TOML number
MAX_KEY = 200                 # characters in one key or dotted key
_TOKENS = re.compile(r'''"""(?:[^\\]|\\.)*?"""|\'\'\'.*?\'\'\'|"(?:[^"\\\n]|\\.)*"|'[^'\n]*'|#[^\n]*'''
                     r"|[\[\]{}]|[0-9_.eE+-]{%d,}|[A-Za-z0-9_.-]{%d,}" % (MAX_DIGITS + 1, MAX_KEY + 1),
                     re.DOTALL)


def check_toml_text(text: str, fname: str) -> None:
    """Refuse TOML text the parser should never see: values nested deeper than MAX_DEPTH,
    numbers longer than MAX_DIGITS digits, bare keys longer than MAX_KEY (strings and comments
    are skipped). Vectorised over the tokens, so a 1 MiB file takes milliseconds."""
    toks = [(m.group(), m.start()) for m in _TOKENS.finditer(text)
            if m.group()[0] not in "\"'#"]
    if not toks:
        return
    def line(pos):
        return text.count("\n", 0, pos) + 1
    for t, pos in toks:
        if len(t) > 1:
            if t.replace("_", "").isdigit() or t[0] in "0123456789+-.":
                raise InputError(fname, "", f"a number of {len(t):,} characters; the limit is "
                                 f"{MAX_DIGITS}", line(pos))
            raise InputError(fname, "", f"a key of {len(t):,} characters; the limit is {MAX_KEY}",
                             line(pos))
    step = np.array([1 if t in "[{" else -1 for t, _ in toks])
    depth = np.cumsum(step)
    i = int(np.argmax(depth))
    if depth[i] > MAX_DEPTH:
        raise InputError(fname, "", f"values nested {int(depth[i])} deep; the limit is {MAX_DEPTH}",
                         line(toks[i][1]))


def toml_inline(value) -> str:
    """A value as TOML inline text (strings, numbers, booleans, lists, tables)."""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, (int, float)):
        return repr(value)
    if isinstance(value, str):
        return json.dumps(value, ensure_ascii=False)
    if isinstance(value, list):
        return "[" + ", ".join(toml_inline(v) for v in value) + "]"
    if isinstance(value, dict):
        return "{ " + ", ".join(f"{k} = {toml_inline(v)}" for k, v in value.items()) + " }"
    raise TypeError(type(value))


def rows_to_toml(rows: list[tuple[str, str, str]], row_numbers: list[int] | None = None
                 ) -> tuple[str, dict[int, int]]:
    """Study-sheet rows (section, key, value as TOML) back to study text, and a map from each
    line of that text to the sheet row it came from (so errors can name the row)."""
    by_section: dict[str, list[tuple[str, int]]] = {}
    numbers = row_numbers or list(range(1, len(rows) + 1))
    for (section, key, value), n in zip(rows, numbers):
        by_section.setdefault(section, []).append((f"{key} = {value}", n))
    lines, where = [], {}
    for section, items in by_section.items():
        lines.append(f"[{section}]")
        where[len(lines)] = items[0][1]
        for text, n in items:
            lines.append(text)
            where[len(lines)] = n
    return "\n".join(lines) + "\n", where
