"""Shared fixtures. `examples`: every example study (studies/*.toml) run end to end once per test
session, through the command line, into one folder per study; the tests that read an example's
outputs share that run instead of making their own."""
from __future__ import annotations

import json
import shutil
from dataclasses import dataclass
from pathlib import Path

import pytest

EXAMPLES = sorted(Path("studies").glob("*.toml"))


@dataclass(frozen=True)
class ExampleRun:
    """One example study's run: `timer-sweep run STUDY --out OUT` (no --quiet, so the terminal
    table is in stdout). The folder is shared by every test: read it, never write into it; a test
    that runs into an output folder works on `copy_to(tmp_path / ...)`."""
    name: str
    study: Path
    out: Path
    code: int
    stdout: str
    stderr: str

    @property
    def record(self) -> dict:
        return json.loads((self.out / "run.json").read_text(encoding="utf-8"))

    def copy_to(self, dest: Path) -> Path:
        shutil.copytree(self.out, dest)
        return dest


class ExampleRuns:
    """name -> ExampleRun, each study run the first time a test asks for it (so `-k` picks that
    need one example do not run them all), then kept for the session."""

    def __init__(self, root: Path):
        self.root = root
        self.runs: dict[str, ExampleRun] = {}

    def names(self) -> list[str]:
        return [p.stem for p in EXAMPLES]

    def __getitem__(self, name: str) -> ExampleRun:
        if name not in self.runs:
            from tests.cli_helpers import cli_captured
            study = Path("studies") / f"{name}.toml"
            assert study.is_file(), f"no example study {study}"
            out = self.root / name
            code, stdout, stderr = cli_captured(["run", str(study), "--out", str(out)])
            self.runs[name] = ExampleRun(name, study, out, code, stdout, stderr)
        return self.runs[name]


@pytest.fixture(scope="session")
def examples(tmp_path_factory) -> ExampleRuns:
    return ExampleRuns(tmp_path_factory.mktemp("examples"))
