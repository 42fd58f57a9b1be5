"""The workbook's points come back from the points file the run wrote, not from a second
evaluation: read back in rank order, with the columns a fresh evaluation gives."""
from __future__ import annotations

import numpy as np
import pandas as pd

from sweep.engine import axis_values
from sweep.pipeline import TableWriter, points_of, stored_points
from sweep.study import parse_study

STUDY = """
[study]
circuit = "astable"
timer = "cmos"
[design]
ra = ["10k", "22k"]
rb = ["47k", "100k"]
c = "10n"
[conditions]
vcc = { min = 4.5, max = 5.5, steps = 3 }
"""


def test_stored_points_equal_a_fresh_evaluation_in_the_order_asked(tmp_path):
    st = parse_study(STUDY)
    everyone = np.arange(1, st.n_designs + 1)
    path = tmp_path / "points.parquet"
    with TableWriter(path) as w:
        w.add(points_of(st, everyone, st.n_points, ideal=False))
    order = np.array([3, 1])
    got = stored_points(st, path, order, 10_000)
    want = points_of(st, order, 10_000, ideal=False)
    pd.testing.assert_frame_equal(got, want)
    assert list(got["design"].unique()) == [3, 1]
    # a limit cuts in rank order, as the evaluation does
    pd.testing.assert_frame_equal(stored_points(st, path, order, 4), want.head(4))
    # conditions of each design in their own order (the full-factorial index)
    cond = axis_values(st.conditions, np.arange(st.n_conditions))
    assert np.allclose(got["vcc_v"].to_numpy()[:3], cond["vcc"])


def test_a_design_missing_from_the_file_means_evaluate(tmp_path):
    st = parse_study(STUDY)
    path = tmp_path / "points.parquet"
    with TableWriter(path) as w:
        w.add(points_of(st, np.array([1, 2]), st.n_points, ideal=False))
    assert stored_points(st, path, np.array([2, 4]), 100) is None


def test_stored_points_read_whole_only_the_row_groups_holding_the_designs(tmp_path, monkeypatch):
    # a points file can hold millions of rows: reading it whole to pick a few designs' rows
    # peaked at 1.2 GiB for 5e6 points; only the groups that hold a wanted design are read whole
    import pyarrow.parquet as pq
    st = parse_study(STUDY)
    path = tmp_path / "points.parquet"
    with TableWriter(path) as w:              # one design per row group (group = 1 row)
        for d in range(1, st.n_designs + 1):
            w.add(points_of(st, np.array([d]), st.n_points, ideal=False))
    assert pq.ParquetFile(path).num_row_groups == st.n_designs
    whole = []
    read = pq.ParquetFile.read_row_group

    def counting(self, i, columns=None, **kw):
        if columns is None:
            whole.append(i)
        return read(self, i, columns=columns, **kw)
    monkeypatch.setattr(pq.ParquetFile, "read_row_group", counting)
    got = stored_points(st, path, np.array([3]), 100)
    assert whole == [2]                        # design 3's group alone
    pd.testing.assert_frame_equal(got, points_of(st, np.array([3]), 100, ideal=False))
