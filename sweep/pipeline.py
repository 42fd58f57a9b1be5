"""run_study: analyse every block, rank, build the report, write every output atomically."""
from __future__ import annotations

import contextlib
import errno
import hashlib
import json
import os
import shutil
import signal
import stat
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.parquet as pq

from . import __version__
from .analysis import (RANK_KEYS, Options, analyse_block, block_points, finish_keys,
                       graded_analyse_block,
                       graded_monte_carlo_block, mc_columns,
                       monte_carlo_block, points_frame)
from .case import axis_values
from .engine import DEFAULT_CHUNK, design_blocks, evaluate_block
from .errors import InputError
from . import grades
from .limits import MC_DESIGNS, PARQUET_POINTS, WORKBOOK_DESIGNS, WORKBOOK_POINTS
from .pick import pick_figures
from .reporting import build_report
from .variables import OUTPUTS
from .spreads import extra_spreads, varied_parts
from .study import Study



@dataclass
class RunResult:
    study: Study
    designs: pd.DataFrame
    out_dir: Path
    files: dict[str, Path]
    info: dict = field(default_factory=dict)
    main_outputs: tuple[str, ...] = ()                    # the circuit's main output columns
    verdicts: dict[str, str] = field(default_factory=dict)  # verdict word -> what it means


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




class TableWriter:
    """Append DataFrames to one parquet file in row groups of about `group` rows (few, big
    groups read fast); every batch is cast to the first batch's schema."""

    def __init__(self, path: Path, group: int = 1):
        self.path, self.group = path, group
        self.pending: list[pd.DataFrame] = []
        self.writer: pq.ParquetWriter | None = None
        self.rows = 0

    def add(self, df: pd.DataFrame) -> None:
        self.pending.append(df)
        self.rows += len(df)
        if sum(map(len, self.pending)) >= self.group:
            self.flush()

    def flush(self) -> None:
        if not self.pending:
            return
        t = pa.Table.from_pandas(pd.concat(self.pending, ignore_index=True), preserve_index=False)
        self.pending.clear()
        if self.writer is None:
            self.writer = pq.ParquetWriter(self.path, t.schema, compression="zstd")
        self.writer.write_table(t.cast(self.writer.schema))

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        if exc[0] is None:
            self.flush()
        if self.writer is not None:
            self.writer.close()


@dataclass
class Analysis:
    keys: pd.DataFrame        # every design: the columns ranking and screening need, and rank
    table: Path               # per-design figures of every design (parquet, design order)
    mc: pd.DataFrame          # Monte Carlo figures of the sampled designs
    streamed: int             # points written to the points file
    screened: dict            # reason -> number of designs without a Monte Carlo


def analyse(study: Study, opt: Options, tmp_dir: Path, chunk: int | None = None,
            points_path: Path | None = None, points_limit: int = PARQUET_POINTS,
            progress: Callable[..., None] | None = None, mapper=None,
            mc_designs: int = MC_DESIGNS) -> Analysis:
    """Two passes in bounded memory. Pass 1 streams every design's figures (and points, while
    they fit under points_limit) to parquet and keeps only the ranking keys; pass 2 runs the
    Monte Carlo on the designs whose worst case can still meet the spec, best margins first.

    `mapper(fn, study, opt, jobs)` may run jobs elsewhere (processes, a Dask cluster); it must
    return results in job order. chunk: points per block (None: analysis.block_points).
    """
    # a block's largest arrays hold every worst-case corner at every condition: size blocks by
    # that, so they stay bounded (a whole small study in one block ran 3x slower, measured)
    corners = 2 ** (len(varied_parts(study)) + len(extra_spreads(study, opt.ideal)))
    chunk = chunk or block_points(study, opt.ideal)
    blocks = list(design_blocks(study, chunk, per_design=study.n_conditions * (1 + corners)))
    stream = points_path is not None and study.n_points <= points_limit
    o = Options(**{**opt.__dict__, "keep_points": stream})
    table = tmp_dir / f".designs-pass1-{os.getpid()}.parquet"
    keys = []
    block_fn = graded_analyse_block if study.grade_plan else analyse_block
    results = (mapper(block_fn, study, o, blocks) if mapper else
               (block_fn(study, a, b, o) for a, b in blocks))
    with TableWriter(table, 1 << 16) as designs, TableWriter(points_path, 1 << 18) as points:
        for (a, b), (df, pts) in zip(blocks, results):
            keys.append(df[RANK_KEYS + ["reach"] + (["cost_index"] if study.grade_plan else [])])
            designs.add(df.drop(columns=["reach"]))
            if pts is not None:
                points.add(pts)
            if progress:
                progress((b - a) * study.n_conditions)
    streamed = points.rows
    keys = pd.concat(keys, ignore_index=True)
    # pass 2: Monte Carlo where the spec can still be met, best worst-case margins first
    screened = {"worst case entirely outside the spec (yield 0)": int((~keys["reach"]).sum())}
    n_mc = study.monte_carlo if opt.monte_carlo is None else opt.monte_carlo
    mc = pd.DataFrame(columns=mc_columns(study))
    if n_mc > 0:
        cand = keys[keys["reach"]]
        cand = cand.iloc[np.lexsort((cand["design"].to_numpy(), -cand["wc_margin"].to_numpy(),
                                     ~cand["feasible"].to_numpy(dtype=bool)))]
        if len(cand) > mc_designs:
            screened[f"beyond the {mc_designs:,} best worst-case margins (not sampled)"] = len(cand) - mc_designs
            cand = cand.head(mc_designs)
        numbers = np.sort(cand["design"].to_numpy())
        per = max(1, (1 << 20) // max(1, n_mc * study.n_conditions))
        jobs = [numbers[i:i + per] for i in range(0, len(numbers), per)]
        mc_fn = graded_monte_carlo_block if study.grade_plan else monte_carlo_block
        parts = (mapper(mc_fn, study, opt, jobs) if mapper and jobs else
                 (mc_fn(study, j, opt) for j in jobs))
        frames = []
        for job, part in zip(jobs, parts):
            frames.append(part)
            if progress:
                progress(len(job), "Monte Carlo", len(numbers))
        if frames:
            mc = pd.concat(frames, ignore_index=True)
        y = pd.Series(mc["yield"].to_numpy(), index=mc["design"].to_numpy())
        keys["yield"] = keys["design"].map(y).where(lambda v: v.notna(), keys["yield"])
    finish_keys(study, keys, n_mc)
    return Analysis(keys, table, mc, streamed, {k: v for k, v in screened.items() if v})


def ranked_designs(study: Study, an: Analysis, limit: int = WORKBOOK_DESIGNS) -> pd.DataFrame:
    """The best `limit` designs with every figure, ranked (rank 1 first)."""
    top = an.keys.nsmallest(limit, "rank")[["design", "rank"]]
    wanted = set(top["design"].tolist())
    frames = []
    pf = pq.ParquetFile(an.table)
    for i in range(pf.num_row_groups):
        df = pf.read_row_group(i).to_pandas()
        frames.append(df[df["design"].isin(wanted)])
    d = pd.concat(frames, ignore_index=True).drop(columns=["yield"])
    d = d.merge(top, on="design").merge(an.keys[["design", *DECIDED]], on="design")
    if len(an.mc):
        d = d.merge(an.mc.drop(columns=["yield"]), on="design", how="left")
    d["screened"] = np.where(d["screened"] != "", d["screened"],
                             np.where(d["yield"].isna() & (study.monte_carlo > 0), "not sampled", ""))
    d = d.sort_values("rank", kind="mergesort").reset_index(drop=True)
    cols = ["rank"] + [c for c in d.columns if c != "rank"]
    return d[cols]


#: per-design figures decided after the Monte Carlo: the yield, its interval and the verdict
DECIDED = ["yield", "yield_lo", "yield_hi", "verdict"]


def write_designs_table(study: Study, an: Analysis, path: Path) -> None:
    """Every design with its rank and Monte Carlo figures, in design order, batch by batch."""
    rank = pd.Series(an.keys["rank"].to_numpy(), index=an.keys["design"].to_numpy())
    decided = an.keys.set_index("design")[DECIDED]
    mc = an.mc.drop(columns=["yield"]).set_index("design") if len(an.mc) else None
    pf = pq.ParquetFile(an.table)
    with TableWriter(path) as out:
        for i in range(pf.num_row_groups):
            df = pf.read_row_group(i).to_pandas()
            df.insert(0, "rank", df["design"].map(rank).to_numpy())
            df = df.drop(columns=["yield"]).join(decided, on="design")
            if mc is not None:
                df = df.join(mc, on="design")
            else:
                for c in mc_columns(study)[2:]:
                    df[c] = np.nan
            out.add(df.drop(columns=["flag_mask"]))


def iter_points(study: Study, design_numbers: np.ndarray, limit: int, ideal: bool):
    """Point tables of the given designs (1-based numbers, in this order), block by block, up to
    `limit` rows in all."""
    nc = study.n_conditions
    keep = np.asarray(design_numbers)[: max(1, limit // max(nc, 1))]
    c_idx = np.arange(nc)
    cond = axis_values(study.conditions, c_idx)
    step = max(1, DEFAULT_CHUNK // max(nc, 1))
    left = limit
    for s in range(0, len(keep), step):
        d_idx = keep[s:s + step] - 1
        dd = grades.design_values(study, d_idx)
        out = evaluate_block(study.case, dd, cond, ideal=ideal)
        df = points_frame(study, d_idx, c_idx, dd, cond, out).head(left)
        left -= len(df)
        yield df
        if left <= 0:
            break


def points_of(study: Study, design_numbers: np.ndarray, limit: int, ideal: bool) -> pd.DataFrame:
    """Points of the given designs (in this order) up to `limit` rows, as one table."""
    frames = list(iter_points(study, design_numbers, limit, ideal))
    return pd.concat(frames, ignore_index=True) if frames else pd.DataFrame()


def stored_points(study: Study, path: Path, design_numbers: np.ndarray, limit: int
                  ) -> pd.DataFrame | None:
    """The rows of the given designs (in this order) up to `limit`, read back from the points
    file the run wrote, so no point is evaluated twice; None where the file does not hold
    every one of them."""
    keep = [int(d) for d in design_numbers]
    # row group by row group, reading a group whole only where it holds a wanted design: the
    # file can hold millions of points (reading it whole to filter it peaked at 1.2 GiB for 5e6)
    pf = pq.ParquetFile(path)
    wanted = pa.array(keep, type=pa.int64())
    groups = []
    for i in range(pf.num_row_groups):
        hit = pc.is_in(pf.read_row_group(i, columns=["design"])["design"].cast(pa.int64()),
                       value_set=wanted)
        if pc.any(hit).as_py():
            groups.append(pf.read_row_group(i).filter(hit))
    if not groups:
        return None
    df = pa.concat_tables(groups).to_pandas()
    columns = (["design", "condition"] + [a.column for a in study.design + study.conditions]
               + OUTPUTS + ["flags", "ok"])
    if set(df["design"].unique()) != set(keep) or set(df.columns) != set(columns):
        return None
    df = df[columns]
    order = {d: i for i, d in enumerate(keep)}
    df = df.iloc[np.argsort(df["design"].map(order).to_numpy(), kind="stable")]
    return df.head(limit).reset_index(drop=True)


def write_points(study: Study, design_numbers: np.ndarray, limit: int, ideal: bool, path: Path) -> int:
    """Stream the points of the given designs to parquet in row groups; returns the row count."""
    with TableWriter(path) as out:
        for df in iter_points(study, design_numbers, limit, ideal):
            out.add(df)
    return out.rows


STAGING = ".timer-sweep-run-"
PREVIOUS = ".timer-sweep-previous-"      # the outputs a commit replaces, until it is complete
HELD = {signal.SIGINT, signal.SIGTERM, signal.SIGHUP}


def clean_stale(out_dir: Path) -> None:
    """Undo what a run killed outright (SIGKILL, power loss) left: remove its staging folder,
    and if it died while putting its outputs in place, put the previous outputs back."""
    for prefix in (STAGING, PREVIOUS):
        for p in out_dir.glob(prefix + "*"):
            try:
                pid = int(p.name[len(prefix):])
                os.kill(pid, 0)
            except ValueError:
                continue
            except ProcessLookupError:
                if prefix == PREVIOUS:
                    for old in p.iterdir():
                        with contextlib.suppress(OSError):
                            os.replace(old, out_dir / old.name)
                shutil.rmtree(p, ignore_errors=True)
            except PermissionError:
                pass


def check_target(final: Path) -> None:
    """Refuse to replace anything but a file (or a link) at an output's name."""
    try:
        mode = final.lstat().st_mode
    except FileNotFoundError:
        return
    if not (stat.S_ISREG(mode) or stat.S_ISLNK(mode)):
        what = "a folder" if stat.S_ISDIR(mode) else "something that is not a file"
        raise InputError(str(final), "--out", f"{what} sits where this output goes; move it away "
                         "and run again (the previous outputs were kept)")


def commit(pairs: list[tuple[Path, Path]], on_commit: Callable[[], None] | None = None,
           stop_requested: Callable[[], bool] | None = None) -> None:
    """Put every staged file in place as one step, with SIGINT, SIGTERM and SIGHUP held back:
    each file being replaced is first moved aside into a PREVIOUS folder; if any rename fails,
    every file already placed is removed and the previous ones are moved back, and the error
    names the path that blocked. So the folder holds either the whole new set or the whole old
    one, and run.json (renamed last) always describes the files beside it. stop_requested: a
    stop signal arrived that the run did not see (a library swallowed its interrupt): nothing
    is put in place."""
    old = signal.pthread_sigmask(signal.SIG_BLOCK, HELD)
    try:
        if stop_requested is not None and stop_requested():
            raise KeyboardInterrupt
        out_dir = pairs[0][1].parent
        aside = out_dir / f"{PREVIOUS}{os.getpid()}"
        aside.mkdir(exist_ok=True)
        placed: list[tuple[Path, Path | None]] = []   # (final, where its previous file went)
        try:
            for tmp, final in pairs:
                check_target(final)
                prev = None
                if os.path.lexists(final):
                    prev = aside / final.name
                    os.replace(final, prev)
                placed.append((final, prev))
                os.replace(tmp, final)
        except BaseException as e:
            _roll_back(placed, aside)
            if isinstance(e, OSError):
                raise InputError(str(e.filename or out_dir), "--out", f"cannot put the outputs in "
                                 f"place: {e.strerror or e}; the previous outputs were kept") from None
            raise
        shutil.rmtree(aside, ignore_errors=True)
        if on_commit:
            on_commit()
    finally:
        signal.pthread_sigmask(signal.SIG_SETMASK, old)


def _roll_back(placed: list[tuple[Path, Path | None]], aside: Path) -> None:
    """Undo a partial commit: remove the new files, move the previous ones back."""
    for final, prev in reversed(placed):
        try:
            if prev is not None:
                os.replace(prev, final)
            elif os.path.lexists(final):
                os.unlink(final)
        except OSError as e:
            raise InputError(str(aside), "--out", f"could not restore {final.name} after a failed "
                             f"commit ({e.strerror}); the previous outputs are in this folder") from None
    shutil.rmtree(aside, ignore_errors=True)


DISK_ERRNOS = {errno.ENOSPC, errno.EDQUOT, errno.EFBIG, errno.EROFS, errno.EACCES, errno.EPERM,
               errno.EIO}
DISK_WORDS = ("No space left", "Disk quota", "Permission denied", "Read-only file system",
              "File too large")


def disk_error(e: BaseException) -> OSError | None:
    """The disk or permission error behind `e` (writers wrap them in their own types), if any."""
    seen = 0
    while e is not None and seen < 8:
        if isinstance(e, OSError) and (e.errno in DISK_ERRNOS or
                                       any(w in str(e) for w in DISK_WORDS)):
            return e
        inner = [a for a in getattr(e, "args", ()) if isinstance(a, BaseException)]
        e = inner[0] if inner else (e.__cause__ or e.__context__)
        seen += 1
    return None


def run_study(study: Study, out_dir: Path, *, ideal: bool = False, all_points: bool = False,
              chunk: int | None = None, progress: Callable[..., None] | None = None,
              mapper=None, workbook_points: int = WORKBOOK_POINTS,
              parquet_points: int = PARQUET_POINTS,
              on_commit: Callable[[], None] | None = None,
              stop_requested: Callable[[], bool] | None = None) -> RunResult:
    """The main job. Every output is written into a staging folder first and the set is put in
    place together at the end (`commit`), so a run that is interrupted or fails leaves the
    previous outputs whole and no partial file behind. `on_commit` is called once the new set is
    in place. A full disk or a permission error is an InputError naming the output folder."""
    from .writers.page import write_page
    from .writers.workbook import DESIGNS_ROWS, write_workbook

    workbook = out_dir / f"{study.name}.xlsx"
    if workbook.exists() and Path(study.path).resolve() == workbook.resolve():
        raise InputError(study.path, "--out", "this run would overwrite the workbook it reads its "
                         "study from; choose another --out folder")
    check_writable(out_dir)
    clean_stale(out_dir)
    t0 = time.perf_counter()
    final = {"workbook": out_dir / f"{study.name}.xlsx", "page": out_dir / f"{study.name}.html",
             "points": out_dir / "points.parquet", "designs": out_dir / "designs.parquet",
             "bom": out_dir / "bom.csv", "waveform": out_dir / "waveform.csv",
             "record": out_dir / "run.json"}
    for path in final.values():
        check_target(path)
    staging = out_dir / f"{STAGING}{os.getpid()}"
    tmp = {k: staging / p.name for k, p in final.items()}
    try:
        # made inside the try, so a stop signal landing right after it still removes it
        try:
            staging.mkdir(exist_ok=True)
        except OSError as e:
            raise InputError(str(out_dir), "--out", f"cannot write here: {e.strerror}") from None
        limit = study.n_points if all_points else parquet_points
        an = analyse(study, Options(ideal=ideal), staging, chunk, tmp["points"], limit, progress, mapper)
        t_an = time.perf_counter() - t0
        ranked = ranked_designs(study, an)
        order = ranked["design"].to_numpy()
        streamed = an.streamed
        if streamed == study.n_points:
            parquet_note = f"points.parquet holds all {study.n_points:,} points."
        else:
            everyone = an.keys["design"].to_numpy()[np.argsort(an.keys["rank"].to_numpy(), kind="stable")]
            streamed = write_points(study, everyone, parquet_points, ideal, tmp["points"])
            parquet_note = (f"The sweep has {study.n_points:,} points; points.parquet holds the "
                            f"{streamed:,} points of the best-ranked designs (use --all-points for all).")
        # the sheet holds the points of the top designs (the parquet file holds every point):
        # writing every point's cells was most of a small study's run time [measured]
        sheet_designs = order[:max(1, study.top)]
        wb_pts = stored_points(study, tmp["points"], sheet_designs, workbook_points) if streamed else None
        if wb_pts is None:
            wb_pts = points_of(study, sheet_designs, workbook_points, ideal)
        rank_of = dict(zip(order, ranked["rank"]))
        wb_pts.insert(0, "rank", wb_pts["design"].map(rank_of))
        wb_pts.insert(2, "verdict", wb_pts["design"].map(dict(zip(order, ranked["verdict"]))))
        if len(wb_pts) < study.n_points:
            note = (f"This sheet holds the points of the {min(len(sheet_designs), study.n_designs):,} "
                    f"best-ranked designs ({len(wb_pts):,} of {study.n_points:,} points; "
                    f"[analysis] top sets how many designs). {parquet_note}")
        else:
            note = f"All {study.n_points:,} points, best-ranked designs first. {parquet_note}"
        write_designs_table(study, an, tmp["designs"])
        ranked = ranked.drop(columns=["flag_mask"])
        info = {"tool": "timer-sweep", "version": __version__, "study": study.path,
                "study_sha256": study.digest, "seed": study.seed, "monte_carlo": study.monte_carlo,
                "ideal": ideal, "designs": study.n_designs, "conditions": study.n_conditions,
                "points": study.n_points, "points_in_parquet": streamed,
                "points_in_workbook": len(wb_pts),
                "designs_in_workbook": min(len(ranked), DESIGNS_ROWS),
                "monte_carlo_designs": len(an.mc), "screened": an.screened,
                "seconds_analysis": round(t_an, 3)}
        report = build_report(study, ranked, wb_pts, note, ideal, info,
                              pick_figures(study, ranked, ideal))
        write_workbook(tmp["workbook"], report)
        write_page(tmp["page"], report)
        write_tables(report, tmp["bom"], tmp["waveform"])
        for k in ("verdict", "meets_spec", "worst_case_in_spec", "yield", "yield_lo", "yield_hi",
                  "yield_target", "typical_sigma", "spreads"):
            info[k] = report.run_info[k]
        info["seconds_total"] = round(time.perf_counter() - t0, 3)
        info["created"] = time.strftime("%Y-%m-%dT%H:%M:%S%z")
        info["sha256"] = {final[k].name: _sha256(tmp[k])
                          for k in ("points", "designs", "workbook", "page", "bom", "waveform")}
        tmp["record"].write_text(json.dumps(info, indent=2) + "\n", encoding="utf-8")
        commit([(tmp[k], final[k]) for k in ("points", "designs", "workbook", "page", "bom", "waveform",
                                             "record")],
               on_commit, stop_requested)
    except InputError:
        raise
    except Exception as e:
        disk = disk_error(e)
        if disk is None:
            raise
        raise InputError(str(out_dir), "--out", f"cannot write the outputs: "
                         f"{disk.strerror or disk}; the previous outputs were kept") from None
    finally:
        shutil.rmtree(staging, ignore_errors=True)
    return RunResult(study, ranked, out_dir, final, info, report.circuit_text.main_outputs,
                     dict(report.verdicts))


def write_tables(report, bom_path: Path, waveform_path: Path) -> None:
    """bom.csv (sweep.bom.BOM_COLUMNS) and waveform.csv (sweep.waveform.WAVEFORM_COLUMNS; only
    the header for a latch, which has no timing), UTF-8 with a header row."""
    from .bom import bom_table
    from .waveform import WAVEFORM_COLUMNS
    bom_table(report.parts).to_csv(bom_path, index=False, encoding="utf-8")
    wave = report.waveform.table if report.waveform is not None else pd.DataFrame(columns=WAVEFORM_COLUMNS)
    wave.to_csv(waveform_path, index=False, encoding="utf-8", float_format="%.9g")


def _sha256(path: Path) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as f:
        for block in iter(lambda: f.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()
