"""The one error type for bad input: file, key and problem, shown to the user without a traceback."""
from __future__ import annotations


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
        return f"{where}: {self.problem}"
