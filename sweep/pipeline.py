"""run_study: analyse every block, rank, build the report, write every output atomically."""
from __future__ import annotations

import hashlib
import json
import os
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq

from . import __version__
from .analysis import Options, analyse_block, points_frame, rank_designs
from .engine import DEFAULT_CHUNK, axis_values, design_blocks, evaluate_block
from .errors import InputError
from .reporting import build_report
from .study import Study

WORKBOOK_POINTS = 100_000     # rows of the Points sheet [issue: default cap]
PARQUET_POINTS = 5_000_000    # rows of points.parquet unless --all-points


@dataclass
class RunResult:
    study: Study
    designs: pd.DataFrame
    out_dir: Path
    files: dict[str, Path]
    info: dict = field(default_factory=dict)


def check_writable(out_dir: Path) -> None:
    """Refuse an output folder that cannot be written, before any work is done."""
    try:
        out_dir.mkdir(parents=True, exist_ok=True)
    except OSError as e:
        raise InputError(str(out_dir), "--out", f"cannot create the output folder: {e.strerror}") from None
    if not out_dir.is_dir():
        raise InputError(str(out_dir), "--out", "is not a folder")
    probe = out_dir / f".timer-sweep-probe-{os.getpid()}"
    try:
        probe.write_bytes(b"")
        probe.unlink()
    except OSError as e:
        raise InputError(str(out_dir), "--out", f"cannot write here: {e.strerror}") from None


def analyse(study: Study, opt: Options, chunk: int = DEFAULT_CHUNK, parquet_path: Path | None = None,
            parquet_limit: int = PARQUET_POINTS, progress: Callable[[int], None] | None = None,
            mapper=None) -> tuple[pd.DataFrame, int]:
    """Every design's figures (unranked) and the number of points streamed to parquet_path.

    `mapper(fn, blocks)` may run blocks elsewhere (processes, a Dask cluster); it must return
    results in block order. Points go to parquet_path only while they fit under parquet_limit.
    """
    blocks = list(design_blocks(study, chunk))
    stream = parquet_path is not None and study.n_points <= parquet_limit
    o = Options(**{**opt.__dict__, "keep_points": stream})
    frames, written, writer = [], 0, None
    try:
        results = (mapper(study, o, blocks) if mapper else
                   (analyse_block(study, a, b, o) for a, b in blocks))
        for (a, b), (df, pts) in zip(blocks, results):
            frames.append(df)
            if pts is not None:
                table = pa.Table.from_pandas(pts, preserve_index=False)
                if writer is None:
                    writer = pq.ParquetWriter(parquet_path, table.schema, compression="zstd")
                writer.write_table(table)
                written += len(pts)
            if progress:
                progress((b - a) * study.n_conditions)
    finally:
        if writer is not None:
            writer.close()
    return pd.concat(frames, ignore_index=True), written


def points_of(study: Study, design_numbers: np.ndarray, limit: int, ideal: bool) -> pd.DataFrame:
    """Points of the given designs (1-based numbers, in this order) up to `limit` rows."""
    nc = study.n_conditions
    keep = design_numbers[: max(1, limit // max(nc, 1))]
    d_idx = keep - 1
    design = axis_values(study.design, d_idx)
    c_idx = np.arange(nc)
    cond = axis_values(study.conditions, c_idx)
    frames = []
    step = max(1, DEFAULT_CHUNK // max(nc, 1))
    for s in range(0, len(d_idx), step):
        sl = slice(s, s + step)
        dd = {k: v[sl] for k, v in design.items()}
        out = evaluate_block(study, dd, cond, ideal=ideal)
        frames.append(points_frame(study, d_idx[sl], c_idx, dd, cond, out))
    df = pd.concat(frames, ignore_index=True) if frames else pd.DataFrame()
    return df.head(limit)


def _tmp(path: Path) -> Path:
    return path.with_name(f".{path.name}.part-{os.getpid()}")


def run_study(study: Study, out_dir: Path, *, ideal: bool = False, all_points: bool = False,
              chunk: int = DEFAULT_CHUNK, progress: Callable[[int], None] | None = None,
              mapper=None, workbook_points: int = WORKBOOK_POINTS,
              parquet_points: int = PARQUET_POINTS) -> RunResult:
    """The main job. Every output is written under a temporary name first and renamed at the end,
    so an interrupted run leaves the previous outputs intact and no partial file behind."""
    from .writers.page import write_page
    from .writers.workbook import write_workbook

    check_writable(out_dir)
    t0 = time.perf_counter()
    final = {"workbook": out_dir / f"{study.name}.xlsx", "page": out_dir / f"{study.name}.html",
             "points": out_dir / "points.parquet", "designs": out_dir / "designs.parquet",
             "record": out_dir / "run.json"}
    tmp = {k: _tmp(p) for k, p in final.items()}
    try:
        limit = study.n_points if all_points else parquet_points
        designs, streamed = analyse(study, Options(ideal=ideal), chunk, tmp["points"], limit, progress, mapper)
        t_an = time.perf_counter() - t0
        ranked = rank_designs(study, designs)
        order = ranked["design"].to_numpy()
        if streamed == study.n_points:
            parquet_note = f"points.parquet holds all {study.n_points:,} points."
        else:
            top_pts = points_of(study, order, parquet_points, ideal)
            top_pts.to_parquet(tmp["points"], index=False, compression="zstd")
            streamed = len(top_pts)
            parquet_note = (f"The sweep has {study.n_points:,} points; points.parquet holds the "
                            f"{streamed:,} points of the best-ranked designs (use --all-points for all).")
        wb_pts = points_of(study, order, workbook_points, ideal)
        rank_of = dict(zip(order, ranked["rank"]))
        wb_pts.insert(0, "rank", wb_pts["design"].map(rank_of))
        if len(wb_pts) < study.n_points:
            note = (f"This sheet holds {len(wb_pts):,} of {study.n_points:,} points, best-ranked designs "
                    f"first. {parquet_note}")
        else:
            note = f"All {study.n_points:,} points, best-ranked designs first. {parquet_note}"
        ranked.drop(columns=["flag_mask"]).to_parquet(tmp["designs"], index=False)
        info = {"tool": "timer-sweep", "version": __version__, "study": study.path,
                "study_sha256": study.digest, "seed": study.seed, "monte_carlo": study.monte_carlo,
                "ideal": ideal, "designs": study.n_designs, "conditions": study.n_conditions,
                "points": study.n_points, "points_in_parquet": streamed,
                "points_in_workbook": len(wb_pts), "seconds_analysis": round(t_an, 3)}
        report = build_report(study, ranked, wb_pts, note, ideal, info)
        write_workbook(tmp["workbook"], report)
        write_page(tmp["page"], report)
        info["meets_spec"] = report.run_info["meets_spec"]
        info["seconds_total"] = round(time.perf_counter() - t0, 3)
        info["created"] = time.strftime("%Y-%m-%dT%H:%M:%S%z")
        info["sha256"] = {k: _sha256(tmp[k]) for k in ("points", "designs")}
        tmp["record"].write_text(json.dumps(info, indent=2) + "\n", encoding="utf-8")
        for k in ("points", "designs", "workbook", "page", "record"):
            os.replace(tmp[k], final[k])
    finally:
        for p in tmp.values():
            if p.exists():
                p.unlink()
    return RunResult(study, ranked, out_dir, final, info)


def _sha256(path: Path) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as f:
        for block in iter(lambda: f.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()
