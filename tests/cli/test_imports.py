"""Imports on demand: each command loads only the libraries it uses.

Every case runs the command in a fresh interpreter (a subprocess: this test process has long
since imported everything) and lists which heavy libraries ended up in sys.modules.
"""
from __future__ import annotations

import json
import subprocess
import sys
import textwrap
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
HEAVY = ("pandas", "pyarrow", "plotly", "xlsxwriter", "openpyxl", "scipy", "dask", "numba")

SMALL = """# a tiny invented study for the import checks
[study]
title = "import check"
circuit = "astable"
timer = "bipolar"
[design]
ra = ["10k", "22k"]
rb = ["47k"]
c = ["100n"]
[conditions]
vcc = [9.0]
[analysis]
monte_carlo = 0
"""


def loaded_after(code: str, cwd: Path) -> tuple[list[str], str]:
    """(heavy modules loaded, stdout) after running ``code`` in a fresh interpreter."""
    probe = textwrap.dedent(f"""
        import sys
        {textwrap.indent(textwrap.dedent(code), '        ').strip()}
        print("LOADED=" + ",".join(m for m in {HEAVY!r} if m in sys.modules), file=sys.stderr)
    """)
    r = subprocess.run([sys.executable, "-c", probe], cwd=cwd, capture_output=True, text=True,
                       timeout=300)
    line = [ln for ln in r.stderr.splitlines() if ln.startswith("LOADED=")]
    assert line, r.stderr
    return [m for m in line[-1][len("LOADED="):].split(",") if m], r.stdout


def cli_code(*args: str) -> str:
    return f"""
        from sweep.cli import main
        try:
            main({list(args)!r})
        except SystemExit as e:
            assert e.code in (0, None), e.code
        """


@pytest.fixture()
def study(tmp_path) -> Path:
    p = tmp_path / "small.toml"
    p.write_text(SMALL, encoding="utf-8")
    return p


@pytest.mark.parametrize("args,allowed", [
    (("--help",), ()),
    (("point", "--ra", "10k", "--rb", "47k", "--c", "100n", "--vcc", "9", "--json"), ()),
    (("new", "astable", "--out", "{tmp}/starter.toml"), ()),
    (("new", "astable", "--frequency", "2Hz", "--out", "{tmp}/spec.toml"), ()),
    # check times a sample of the study (the analysis, on pandas, which loads pyarrow itself)
    # and of the workbook writer, to estimate the run: those it uses, nothing else
    (("check", "{study}"), ("pandas", "pyarrow", "xlsxwriter")),
])
def test_command_loads_only_what_it_uses(tmp_path, study, args, allowed):
    args = tuple(a.format(tmp=tmp_path, study=study) for a in args)
    loaded, out = loaded_after(cli_code(*args), tmp_path)
    assert set(loaded) <= set(allowed), f"timer-sweep {' '.join(args)} loaded {loaded}"
    if "--json" in args:
        assert "frequency_hz" in json.loads(out)      # the command really ran


def test_run_loads_the_writers_only_when_it_writes(tmp_path, study):
    """Parsing a study and importing the pipeline loads no writer; run_study then writes."""
    loaded, _ = loaded_after(f"""
        from sweep.study import load_study
        import sweep.pipeline
        st = load_study({str(study)!r})
        assert "sweep.writers.workbook" not in sys.modules
        assert "sweep.writers.page" not in sys.modules
        """, tmp_path)
    assert not {"xlsxwriter", "plotly", "openpyxl", "dask", "numba"} & set(loaded), loaded
    loaded, _ = loaded_after(f"""
        from pathlib import Path
        from sweep.study import load_study
        from sweep.pipeline import run_study
        run_study(load_study({str(study)!r}), Path({str(tmp_path / 'out')!r}))
        """, tmp_path)
    assert "xlsxwriter" in loaded                     # the probe sees what a run loads
    assert "plotly" not in loaded, "the chart page writes plotly's figure JSON itself"
    assert (tmp_path / "out" / "small.xlsx").is_file()


def test_a_monte_carlo_run_never_imports_scipy_stats_or_special(tmp_path):
    """The Monte Carlo's Sobol points come from sweep.sobol and its normal deviates from
    sweep.normal: scipy.stats (about 1 s to import) and scipy.special (about 0.2 s) stay out of
    a run that draws builds."""
    study = tmp_path / "mc.toml"
    study.write_text(SMALL.replace("monte_carlo = 0", "monte_carlo = 64"), encoding="utf-8")
    _, out = loaded_after(f"""
        from pathlib import Path
        import pandas as pd
        from sweep.study import load_study
        from sweep.pipeline import run_study
        run_study(load_study({str(study)!r}), Path({str(tmp_path / 'out')!r}))
        designs = pd.read_parquet({str(tmp_path / 'out' / 'designs.parquet')!r})
        print(int(designs.filter(like="_mc_").notna().to_numpy().sum()))
        print(*(m in sys.modules for m in ("scipy.stats", "scipy.special", "sweep.sobol",
                                            "sweep.normal")))
        """, tmp_path)
    mc_cells, flags = out.split("\n", 1)
    assert int(mc_cells) > 0                  # the probe's run really drew builds
    assert flags.split() == ["False", "False", "True", "True"], flags
