"""What a run keeps and writes, at most: the limits the pipeline applies and the estimate counts
with, in one place."""
from __future__ import annotations

WORKBOOK_POINTS = 100_000     # rows of the Points sheet (the top designs' points)
PARQUET_POINTS = 5_000_000    # rows of points.parquet unless --all-points
MC_DESIGNS = 2000             # designs that get a Monte Carlo, best worst-case margins first
WORKBOOK_DESIGNS = 100_000    # rows of the ranked table kept in memory for the report
