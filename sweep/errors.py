"""The one error type for bad input: file, key and problem, shown to the user without a traceback."""
from __future__ import annotations

import re

MAX_WORD = 200      # characters of one word of a message; a longer one (a pasted value) is cut
_CONTROL = re.compile(r"[\x00-\x1f\x7f-\x9f\u2028\u2029\u202a-\u202e\u2066-\u2069]")
_LONG = re.compile(r"\S{%d,}" % (MAX_WORD + 1))


def printable(text: str) -> str:
    """`text` safe for a terminal: control characters, escape sequences and bidirectional
    overrides shown as visible escapes (ESC -> \\x1b), so a title or a file name cannot
    move the cursor, recolour the screen or hide what follows."""
    return _CONTROL.sub(lambda m: m.group().encode("unicode_escape").decode("ascii"), str(text))


def shorten(text: str) -> str:
    """`text` with every word longer than MAX_WORD characters cut, saying how long it was."""
    return _LONG.sub(lambda m: f"{m.group()[:MAX_WORD // 2]}... ({len(m.group()):,} characters)",
                     str(text))


class InputError(Exception):
    """Bad input from a user: a study, an option, a workbook, a timer-model file.

    `file` is the path as the user gave it ('' for a command-line option), `key` the dotted key or
    option name, `line` the line in the file where known.
    """

    def __init__(self, file: str, key: str, problem: str, line: int | None = None):
        self.file, self.key, self.problem, self.line = str(file), key, problem, line
        super().__init__(self.message)

    @property
    def message(self) -> str:
        where = self.file or "command line"
        if self.line:
            where += f", line {self.line}"
        if self.key:
            where += f", key '{self.key}'"
        return printable(shorten(f"{where}: {self.problem}"))
