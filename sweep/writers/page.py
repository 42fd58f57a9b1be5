"""The chart page: one self-contained HTML file of interactive charts that opens offline.

The page lays out what the :class:`~sweep.report.Report` holds; it computes nothing about the
circuit. The only arithmetic here is presentation: log scales, tick positions, which designs
sit inside the spec at their nominal point (and so how each is drawn), the order lines are drawn
in, and the yield/current trade-off frontier.

Every piece of user text (title, summary, cautions, flags, part values) is HTML-escaped, both in
the page and inside the charts, whose labels plotly reads as a small subset of HTML.
"""
from __future__ import annotations

import base64
import html
import importlib.util
import json
import math
import pathlib
import re
from collections.abc import Callable
from dataclasses import dataclass

import functools

import numpy as np
import pandas as pd

from sweep.report import Report
from sweep.writers.atomic import atomic_path
from sweep.values import format_eng
from sweep.variables import STATS, VARIABLES, Variable

#: most designs drawn in any chart, the best-ranked first; the page says so when it cuts
MAX_DESIGNS = 20_000
#: up to this many values of the third part, the design map gets one panel per value
MAX_PANELS = 6

# Okabe & Ito (2008), "Color Universal Design": a qualitative set readable with the common
# colour-vision deficiencies. Yellow is left out of lines: it vanishes on white.
BLUE, VERMILLION, GREEN, PURPLE, ORANGE, SKY, BLACK = (
    "#0072B2", "#D55E00", "#009E73", "#CC79A7", "#E69F00", "#56B4E9", "#000000")
PALETTE = [BLUE, VERMILLION, GREEN, PURPLE, ORANGE, SKY, BLACK]
SYMBOLS = ["circle", "square", "diamond", "triangle-up", "triangle-down", "pentagon", "hexagon"]
DASHES = ["solid", "dash", "dot", "dashdot", "longdash", "longdashdot"]
#: sequential scale designed to read the same with colour-vision deficiency: cividis (Nuñez,
#: Anderton & Renslow 2018, "Optimizing colormaps with consideration for color vision deficiency
#: to enable accurate interpretation of scientific data", PLoS ONE 13(7)), in the ten evenly
#: spaced stops plotly's Python package gives it
CIVIDIS = ["#00224e", "#123570", "#3b496c", "#575d6d", "#707173", "#8a8678", "#a59c74",
           "#c3b369", "#e1cc55", "#fee838"]
SEQUENTIAL = [[i / (len(CIVIDIS) - 1), c] for i, c in enumerate(CIVIDIS)]
#: error from the target: Okabe-Ito blue (below) through pale grey (on target) to vermillion (above)
DIVERGING = [[0.0, "#0072B2"], [0.5, "#f2f2f2"], [1.0, "#D55E00"]]
YELLOW = "#F0E442"   # Okabe-Ito yellow: only as the fill of the black-edged pick star
GREY = "#8c8c8c"
LIMIT = "#3a3a3a"    # spec limit lines: dark grey, apart from every data colour
FONT = "system-ui, -apple-system, sans-serif"

HEADINGS = {
    "map": "Design map",
    "duty": "Duty cycle against frequency",
    "yield": "Yield against supply current",
    "mc": "Monte Carlo builds of the pick",
    "temperature": "Temperature drift of the top five",
    "parallel": "Every design across all columns",
    "waveform": "Waveforms of the pick",
}
#: the section a study with part grades adds
COST_HEADING = "Yield against the cost of part grades"

_TEMPLATE_LAYOUT = dict(
    font=dict(family=FONT, size=13, color="#222222"),
    paper_bgcolor="white", plot_bgcolor="white", colorway=PALETTE,
    xaxis=dict(showgrid=True, gridcolor="#e8e8e8", showline=True, linecolor="#9a9a9a",
               ticks="outside", tickcolor="#9a9a9a", zeroline=False, automargin=True),
    yaxis=dict(showgrid=True, gridcolor="#e8e8e8", showline=True, linecolor="#9a9a9a",
               ticks="outside", tickcolor="#9a9a9a", zeroline=False, automargin=True),
    legend=dict(bgcolor="rgba(255,255,255,0.9)", bordercolor="#d0d0d0", borderwidth=1),
    hoverlabel=dict(bgcolor="white", bordercolor="#666666",
                    font=dict(family=FONT, size=12, color="#222222")),
    margin=dict(l=70, r=30, t=30, b=60),
)
#: the page's chart template, in every figure's layout
_TEMPLATE = {"layout": _TEMPLATE_LAYOUT}
_CONFIG = {"displaylogo": False, "responsive": True,
           "modeBarButtonsToRemove": ["select2d", "lasso2d", "autoScale2d"]}


@dataclass
class Section:
    """One block of the page: a heading, how to read it, and a chart or the reason it is absent."""
    key: str
    heading: str
    explain: str
    figure: dict | None = None   # plotly's figure JSON: {"data": [traces], "layout": {...}}
    note: str = ""          # plain text shown above the chart (a cap, left-out rows, a skip reason)


# --- small helpers -----------------------------------------------------------------------------
def _var(name: str) -> Variable:
    return VARIABLES.get(name) or Variable(name, name, "", "text", "")


def _base(name: str) -> str:
    """'frequency_hz_nom' -> 'frequency_hz' (the registry entry of a per-design column)."""
    for suffix, _word in STATS:
        if name.endswith(suffix) and name[: -len(suffix)] in VARIABLES:
            return name[: -len(suffix)]
    return name


def _fmt_unit(name: str) -> str:
    v = _var(_base(name))
    return "%" if v.fmt == "pct" else v.unit


def _formatter(name: str) -> Callable[[float], str]:
    """How the values of column ``name`` are written (the registry is read once per column)."""
    v = _var(_base(name))
    if v.fmt in ("fixed1", "fixed2"):
        pattern = f"{{:.{v.fmt[-1]}f}} {v.unit}"

        def fixed(value: float) -> str:
            x = float(value)
            return "" if math.isnan(x) else pattern.format(x).strip()
        return fixed
    unit = _fmt_unit(name)
    return lambda value: format_eng(value, unit)


def _fmt(value: float, name: str) -> str:
    """One value as text a person reads: 4.7 kΩ, 100 nF, 35 %, 9.00 V."""
    return _formatter(name)(value)


def _fmt_series(values: pd.Series, name: str) -> pd.Series:
    """Text for a whole column, formatting each distinct value once (part columns repeat)."""
    fmt = _formatter(name)
    text = {u: fmt(u) for u in pd.unique(values.to_numpy())}
    return values.map(text).fillna("").astype(str)


def _header(name: str, extra: str = "") -> str:
    v = _var(_base(name))
    label = v.label + (f" {extra}" if extra else "")
    unit = "%" if v.fmt == "pct" else v.unit
    return f"{label} [{unit}]" if unit else label


def _count(n: int) -> str:
    """A count as the summary table writes it: comma between thousands (1,071)."""
    return f"{int(n):,}"


def _is_log(name: str) -> bool:
    return _var(_base(name)).log


def _round(x: float) -> float:
    return float(f"{x:.12g}")


def _nice_step(raw: float) -> float:
    mag = 10.0 ** math.floor(math.log10(raw))
    return next(m * mag for m in (1, 2, 2.5, 5, 10) if m * mag >= raw)


def nice_ticks(lo: float, hi: float, log: bool, count: int = 6,
               enclose: bool = False) -> list[float]:
    """Round tick positions (data units) for [lo, hi]: 1-2-5 per decade on a wide log range,
    plain round steps otherwise. With ``enclose`` the first and last tick lie at or beyond
    ``lo`` and ``hi``, so they can serve as the ends of an axis."""
    if not (math.isfinite(lo) and math.isfinite(hi)):
        return []
    if hi <= lo:
        return [lo]
    if log and lo > 0 and hi / lo >= 10:
        k0, k1 = math.floor(math.log10(lo)), math.ceil(math.log10(hi))
        mants = (1,) if k1 - k0 > 5 else (1, 2, 5)
        ticks = sorted(_round(m * 10.0 ** k) for k in range(k0, k1 + 1) for m in mants)
        if enclose:
            i0 = max(i for i, t in enumerate(ticks) if t <= lo * (1 + 1e-9))
            i1 = min(i for i, t in enumerate(ticks) if t >= hi * (1 - 1e-9))
            return ticks[i0:i1 + 1]
        ticks = [t for t in ticks if lo * (1 - 1e-9) <= t <= hi * (1 + 1e-9)]
        if len(ticks) >= 2:
            return ticks
    step = _nice_step((hi - lo) / count)
    if enclose:
        first, last = math.floor(lo / step + 1e-9), math.ceil(hi / step - 1e-9)
    else:
        first, last = math.ceil(lo / step - 1e-9), math.floor(hi / step + 1e-9)
    ticks = [_round(k * step) for k in range(first, last + 1)]
    return [t for t in ticks if t > 0] if log else ticks


def _axis(name: str, title: str | None = None, values: np.ndarray | None = None,
          span: tuple[float, float] | None = None, discrete: bool = False,
          log: bool | None = None, count: int = 6) -> dict:
    """Axis settings for a machine column: log where the registry says so (or as ``log``
    says), and ticks written in engineering notation with the unit (4.7 kΩ, 100 nF, 40 mA):
    at the actual values when a part (``discrete``) takes only a few, else at round values
    across ``values`` or ``span`` (data units)."""
    v = _var(_base(name))
    log = v.log if log is None else log
    ax: dict = {"title": {"text": title or _header(name)}}
    if log:
        ax["type"] = "log"
    if v.fmt == "pct":
        ax["tickformat"] = ".0%"
    elif v.fmt == "eng":
        ax["tickformat"] = "~s"
        fin = _finite(values) if values is not None else np.zeros(0)
        fin = fin[fin > 0] if log else fin
        uniq = np.unique(fin)
        if discrete and 1 <= len(uniq) <= 12:
            ticks = uniq.tolist()
        elif span is not None or fin.size:
            lo, hi = span if span is not None else (float(fin.min()), float(fin.max()))
            ticks = nice_ticks(lo, hi, log, count=count)
        else:
            ticks = []
        if ticks:
            ax["tickvals"] = ticks
            ax["ticktext"] = [format_eng(t, v.unit) for t in ticks]
    return ax


# --- the charts as plotly's figure JSON ------------------------------------------------------
# Each chart is the plain data plotly.js draws: {"data": [traces], "layout": {...}}, every trace
# a dict with its "type" (plotly's figure schema, the same JSON plotly's Python figure objects
# write). Building those objects cost most of the page's time (validation and deep copies of
# every property [measured]), so the page writes the JSON itself.
def _figure(data: list[dict], **layout) -> dict:
    """A chart: its traces and its layout, on the page's template."""
    return {"data": data, "layout": {"template": _TEMPLATE, **layout}}


def _scatter(**props) -> dict:
    return {"type": "scatter", **props}


def _hline(y: float, line: dict) -> dict:
    """A horizontal line across the whole plot at ``y`` (data units)."""
    return dict(type="line", xref="x domain", x0=0, x1=1, yref="y", y0=y, y1=y, line=line)


def _vline(x: float, line: dict) -> dict:
    """A vertical line across the whole plot at ``x`` (data units)."""
    return dict(type="line", xref="x", x0=x, x1=x, yref="y domain", y0=0, y1=1, line=line)


#: plotly.js's names of the typed arrays it reads from base64
_TYPED = {"int8": "i1", "uint8": "u1", "int16": "i2", "uint16": "u2", "int32": "i4",
          "uint32": "u4", "float32": "f4", "float64": "f8"}


def _typed_array(a: np.ndarray):
    """A numeric array as plotly.js's typed-array JSON ({"dtype", "bdata"}: the values' bytes in
    base64, exact and compact); 64-bit integers, which plotly.js does not read, narrowed to the
    smallest type that holds them. Any other array as a list."""
    if a.size and a.dtype.kind in "iu" and a.dtype.itemsize == 8:
        lo, hi = a.min(), a.max()
        kinds = (np.int8, np.int16, np.int32) if a.dtype.kind == "i" else (
            np.uint8, np.uint16, np.uint32)
        fit = next((t for t in kinds if np.iinfo(t).min <= lo and hi <= np.iinfo(t).max), None)
        if fit is None:
            return a.tolist()
        a = a.astype(fit)
    name = _TYPED.get(str(a.dtype))
    if not a.size or name is None:
        return a.tolist()
    out = {"dtype": name, "bdata": base64.b64encode(np.ascontiguousarray(a)).decode("ascii")}
    if a.ndim > 1:
        out["shape"] = ", ".join(str(n) for n in a.shape)
    return out


def _json_default(o):
    if isinstance(o, np.ndarray):
        return _typed_array(o)
    if isinstance(o, (pd.Series, pd.Index)):
        return _typed_array(o.to_numpy())
    if isinstance(o, np.generic):
        return o.item()
    raise TypeError(f"cannot write {type(o).__name__} into a chart")


_BARE_CONSTANT = re.compile(r"[\[:,](?:NaN|-?Infinity)[,\]}]")


def _to_json(obj) -> str:
    """``obj`` as JSON to put inside a script: numpy arrays as above, NaN and infinities as
    null (strict JSON, as plotly.js expects), and ``<``, ``>`` and ``/`` escaped, so that no text
    in a chart can close the script or open a tag."""
    text = json.dumps(obj, default=_json_default, separators=(",", ":"))
    if ("NaN" in text or "Infinity" in text) and _BARE_CONSTANT.search(text):
        text = json.dumps(json.loads(text, parse_constant=lambda _: None), separators=(",", ":"))
    return text.replace("<", "\\u003c").replace(">", "\\u003e").replace("/", "\\u002f")


@functools.cache
def _plotly_js() -> str:
    """plotly.js, as the plotly package ships it (read from the package's folder: importing the
    package costs time the page has no use for)."""
    spec = importlib.util.find_spec("plotly")
    if spec is None or not spec.submodule_search_locations:
        raise RuntimeError("the chart page needs the plotly package (its plotly.js)")
    folder = pathlib.Path(next(iter(spec.submodule_search_locations)))
    return (folder / "package_data" / "plotly.min.js").read_text(encoding="utf-8")


def _chart_html(fig: dict, div_id: str, first: bool) -> str:
    """The chart's HTML: a div and the script that draws it; the first chart of the page brings
    plotly.js itself."""
    height = fig["layout"].get("height")
    height = f"{height}px" if isinstance(height, (int, float)) else "100%"
    script = (f'if (document.getElementById("{div_id}")) {{Plotly.newPlot("{div_id}", '
              f"{_to_json(fig['data'])}, {_to_json(fig['layout'])}, {_to_json(_CONFIG)})}};")
    library = ("<script>window.PlotlyConfig = {MathJaxConfig: 'local'};</script>\n"
               f'<script charset="utf-8">{_plotly_js()}</script>\n') if first else ""
    return (f'<div style="height:{height}; width:100%;">{library}'
            f'<div id="{div_id}" class="plotly-graph-div" style="height:100%; width:100%;"></div>'
            f"<script>window.PLOTLYENV=window.PLOTLYENV || {{}}; {script}</script></div>")


def _finite(a) -> np.ndarray:
    a = np.asarray(a, dtype=float)
    return a[np.isfinite(a)]


def _main_limits(report: Report) -> tuple[float, float, float | None]:
    """(low, high, target) of the spec on the main output; open ends are -inf/+inf."""
    lo, hi, target = -np.inf, np.inf, None
    for row in report.spec:
        if report.main_output and row.column == report.main_output:
            lo, hi = max(lo, row.lo), min(hi, row.hi)
            target = row.target if row.target is not None else target
    return lo, hi, target


def _spec_of(report: Report, column: str) -> tuple[float, float]:
    lo, hi = -np.inf, np.inf
    for row in report.spec:
        if row.column == column:
            lo, hi = max(lo, row.lo), min(hi, row.hi)
    return lo, hi


def pareto_frontier(current: np.ndarray, yld: np.ndarray) -> np.ndarray:
    """Mask of the designs no other design beats on both counts (higher yield AND lower
    current). Of designs tied on both, one is kept. Rows with NaN are never on it."""
    current, yld = np.asarray(current, float), np.asarray(yld, float)
    mask = np.zeros(len(current), dtype=bool)
    ok = np.flatnonzero(np.isfinite(current) & np.isfinite(yld))
    if ok.size == 0:
        return mask
    order = ok[np.lexsort((-yld[ok], current[ok]))]          # current up, then yield down
    y = yld[order]
    best_before = np.maximum.accumulate(np.concatenate([[-np.inf], y[:-1]]))
    mask[order[y > best_before]] = True
    return mask


# --- the design table the charts share --------------------------------------------------------
@dataclass
class _Designs:
    table: pd.DataFrame      # capped, best-ranked first
    total: int
    custom: np.ndarray       # (rows, fields) hover text per design, already escaped
    template: str            # plotly hovertemplate that lays the fields out
    passes: np.ndarray       # the design's verdict is "pass" (the analysis decides, not the page)
    pick: np.ndarray         # True on the rank-1 row

    @property
    def capped(self) -> bool:
        return self.total > len(self.table)

    def hover(self, rows) -> dict:
        """Trace settings that show the hover text of ``rows`` (mask or indices): the layout is
        written once per trace, each design carries only its formatted values."""
        return dict(customdata=self.custom[rows], hovertemplate=self.template)


def _designs(report: Report) -> _Designs:
    d = report.designs
    if "rank" in d.columns:
        d = d.sort_values("rank", kind="stable")
    d = d.head(MAX_DESIGNS).reset_index(drop=True)
    n = len(d)
    num = d["design"].astype(str) if "design" in d.columns else pd.Series(
        np.arange(1, n + 1).astype(str))
    rank = d["rank"] if "rank" in d.columns else pd.Series(np.arange(1, n + 1))
    fields = [num.map(html.escape), rank.astype(str)]
    lines = ["<b>Design %{customdata[0]}</b> (rank %{customdata[1]})"]

    def add(label: str, text: pd.Series) -> None:
        lines.append(f"{html.escape(label)}: %{{customdata[{len(fields)}]}}")
        fields.append(text)

    for col in report.part_columns:
        if col in d.columns:
            add(_var(col).label, _fmt_series(d[col], col).map(html.escape))
    main = report.main_output
    for col in ([f"{main}_nom"] if main else []) + ["duty_nom"]:
        if col in d.columns and (col != "duty_nom" or main != "duty"):
            add(f"{_var(_base(col)).label} (nominal)", _fmt_series(d[col], col))
    if "verdict" in d.columns:
        add("Verdict", d["verdict"].fillna("").astype(str).map(html.escape))
    if "yield" in d.columns:
        y = _fmt_series(d["yield"], "duty")
        if {"yield_lo", "yield_hi"} <= set(d.columns):
            lo, hi = _fmt_series(d["yield_lo"], "duty"), _fmt_series(d["yield_hi"], "duty")
            y = y.where(d["yield"].isna(), y + " (95 %: " + lo + " to " + hi + ")")
        add("Yield", y)
    cur = _current_column(d)
    if cur:
        add("Supply current" + (" (highest)" if cur.endswith("_max") else ""),
            _fmt_series(d[cur], cur))
    template = "<br>".join(lines)
    if "flags" in d.columns:
        flags = d["flags"].fillna("").astype(str).map(html.escape)
        template += f"%{{customdata[{len(fields)}]}}"
        fields.append(pd.Series(np.where(flags != "", "<br>Flags: " + flags, ""), index=d.index))
    custom = (np.column_stack([f.to_numpy(dtype=object) for f in fields]) if n
              else np.empty((0, len(fields)), dtype=object))
    passes = (d["verdict"].to_numpy() == "pass" if "verdict" in d.columns
              else np.ones(n, dtype=bool))
    pick = rank.to_numpy() == 1
    return _Designs(d, len(report.designs), custom, template + "<extra></extra>", passes, pick)


def _current_column(d: pd.DataFrame) -> str | None:
    for col in ("supply_current_a_max", "supply_current_a_nom"):
        if col in d.columns and np.isfinite(d[col].to_numpy(float)).any():
            return col
    return None


def _cap_note(ds: _Designs) -> str:
    if not ds.capped:
        return ""
    return (f"This study has {_count(ds.total)} designs; this chart shows the "
            f"{_count(len(ds.table))} best-ranked.")


def _pick_trace(x, y, hover: dict, size: float = 19, **kw) -> dict:
    return _scatter(x=x, y=y, mode="markers", name="The pick (rank 1)", legendgroup="pick",
                    **hover, marker=dict(symbol="star", size=size, color=YELLOW,
                                         line=dict(color=BLACK, width=1.5)), **kw)


def _legend_only(name: str, group: str, **style) -> dict:
    """A legend entry with no data: it explains a mark or line drawn elsewhere."""
    return _scatter(x=[None], y=[None], name=name, legendgroup=group, hoverinfo="skip", **style)


def _spec_lines(report: Report, axis: str) -> tuple[list[dict], list[dict]]:
    """The spec limits (solid) and target (dashed) on the main output as lines across the
    plot, named in the legend rather than with labels that could sit on the data: (the lines,
    their legend entries)."""
    lo, hi, target = _main_limits(report)
    unit = _fmt_unit(report.main_output)
    line_at = _vline if axis == "x" else _hline
    limits = [v for v in (lo, hi) if np.isfinite(v)]
    shapes = [line_at(v, dict(color=LIMIT, width=2.5)) for v in limits]
    legend = []
    if limits:
        text = " and ".join(format_eng(v, unit) for v in limits)
        legend.append(_legend_only(f"Spec limit{'s' if len(limits) > 1 else ''}: {text}", "spec",
                                   mode="lines", line=dict(color=LIMIT, width=2.5)))
    if target is not None and np.isfinite(target):
        shapes.append(line_at(target, dict(color=BLACK, width=1.5, dash="dash")))
        legend.append(_legend_only(f"Target: {format_eng(target, unit)}", "spec", mode="lines",
                                   line=dict(color=BLACK, width=1.5, dash="dash")))
    return shapes, legend


# --- 1. design map -----------------------------------------------------------------------------
#: the map's marks, drawn in this order so the designs that matter sit on top. Each state differs
#: in size, fill and edge, not in colour alone (colour is the nominal value of the main output).
MAP_BREAKS, MAP_NEAR, MAP_MEETS, MAP_BLANK = "breaks", "near", "meets", "blank"


def map_states(report: Report, ds: _Designs) -> np.ndarray:
    """The state each design of ``ds.table`` is drawn in on the design map: "meets" (its verdict
    is pass), "near" (not a pass, but its nominal main output is inside the spec), "breaks" (not
    a pass, nominal main output outside the spec or no spec on it) or "blank" (no nominal value
    to place on the colour scale)."""
    d = ds.table
    main = report.main_output
    nomcol = f"{main}_nom" if main and f"{main}_nom" in d.columns else None
    nominal = d[nomcol].to_numpy(float) if nomcol else np.full(len(d), np.nan)
    ccol = nomcol or ("yield" if "yield" in d.columns else None)
    has_c = np.isfinite(d[ccol].to_numpy(float)) if ccol else np.zeros(len(d), dtype=bool)
    lo, hi, _ = _main_limits(report)
    has_spec = nomcol is not None and (np.isfinite(lo) or np.isfinite(hi))
    with np.errstate(invalid="ignore"):
        in_spec = (nominal >= lo) & (nominal <= hi) if has_spec else np.zeros(len(d), dtype=bool)
    state = np.full(len(d), MAP_BREAKS, dtype=object)
    state[in_spec] = MAP_NEAR
    state[ds.passes] = MAP_MEETS
    state[~has_c] = MAP_BLANK
    return state


def _map_marks(size: float, main_label: str) -> dict:
    """Legend name and marker style of each map state; None as colour means the colour scale."""
    faded = max(3.0, round(size * 0.55, 1))
    return {
        MAP_BREAKS: (f"Not a pass, {main_label} outside the spec (small, faded)" if main_label
                     else "Not a pass (small, faded)",
                     dict(symbol="circle", size=faded, opacity=0.55, line=dict(width=0)), None),
        MAP_BLANK: ("No nominal value (timing stalls)",
                    dict(symbol="diamond-open", size=max(4.0, size * 0.7),
                         line=dict(width=1, color=GREY)), GREY),
        MAP_NEAR: (f"Not a pass, nominal {main_label} in spec (ring)",
                   dict(symbol="circle-open", size=size, line=dict(width=1.6, color="#1a1a1a")),
                   "#1a1a1a"),
        MAP_MEETS: ("Verdict pass (filled, dark edge)",
                    dict(symbol="circle", size=size * 1.15, line=dict(width=1.6, color=BLACK)),
                    None),
    }


def _map_section(report: Report, ds: _Designs) -> Section:
    sec = Section("map", HEADINGS["map"], "")
    d = ds.table
    parts = [c for c in report.part_columns if c in d.columns]
    if len(parts) < 2 or d.empty:
        sec.note = "this study chooses fewer than two parts, so there is no map of parts to draw."
        return sec
    xcol, ycol = parts[:2]
    fcol = parts[2] if len(parts) > 2 else None
    main = report.main_output
    nomcol = f"{main}_nom" if main and f"{main}_nom" in d.columns else None
    ccol = nomcol or ("yield" if "yield" in d.columns else None)
    craw = d[ccol].to_numpy(float) if ccol else np.full(len(d), np.nan)
    clog = bool(ccol) and _is_log(ccol)
    cval = craw
    if clog:
        with np.errstate(divide="ignore", invalid="ignore"):
            cval = np.where(craw > 0, np.log10(np.where(craw > 0, craw, 1.0)), np.nan)
    lo, hi, target = _main_limits(report)
    has_spec = nomcol is not None and (np.isfinite(lo) or np.isfinite(hi))
    # with a target (or a closed window), colour by the nominal error from it in per cent, on a
    # diverging scale twice the spec window wide, so a narrow window shows instead of vanishing
    # in an absolute scale
    aim = target if target else (0.5 * (lo + hi) if np.isfinite(lo) and np.isfinite(hi) else None)
    err_span = None
    if nomcol is not None and aim:
        with np.errstate(divide="ignore", invalid="ignore"):
            cval = (craw / aim - 1.0) * 100.0
        window = [abs(v / aim - 1.0) * 100.0 for v in (lo, hi) if np.isfinite(v)]
        fin_err = _finite(cval)
        err_span = 2.0 * max(window) if window else (float(np.abs(fin_err).max()) if fin_err.size
                                                     else 10.0)
        err_span = max(err_span, 1e-6)
    state = map_states(report, ds)
    main_label = _var(main).label.lower() if main else ""

    x_all, y_all = d[xcol].to_numpy(float), d[ycol].to_numpy(float)
    fvals = np.unique(d[fcol].to_numpy(float)) if fcol else np.array([np.nan])
    groups = [(v, d[fcol].to_numpy(float) == v) if fcol else (v, np.ones(len(d), dtype=bool))
              for v in fvals]
    flabel = _var(fcol).label if fcol else ""
    names = [f"{flabel} = {_fmt(v, fcol)}" if fcol else "" for v, _ in groups]
    facets = len(groups) <= MAX_PANELS
    ncols = (2 if len(groups) == 4 else min(len(groups), 3)) if facets else 1
    nrows = math.ceil(len(groups) / ncols) if facets else 1
    # mark size from the spacing of the grid in a panel (the panels share about 810 x 330 px)
    nx, ny = len(np.unique(x_all)), len(np.unique(y_all))
    size = float(np.clip(0.8 * min(810 / ncols / max(nx, 1), 330 / max(ny, 1)), 5, 11))
    marks = _map_marks(size, main_label if has_spec else "")

    xax, yax = _axis(xcol, values=x_all, discrete=True), _axis(ycol, values=y_all, discrete=True)
    xtitle, ytitle = xax.pop("title")["text"], yax.pop("title")["text"]
    data, spans = [], []
    for i, (value, m) in enumerate(groups):
        panel = _panel_axes(i + 1 if facets else 1)
        show = facets or i == 0
        start = len(data)
        for key in (MAP_BREAKS, MAP_BLANK, MAP_NEAR, MAP_MEETS):   # faded first, best on top
            sel = m & (state == key)
            if not sel.any():
                continue
            name, style, colour = marks[key]
            marker = dict(style, color=colour) if colour else dict(
                style, color=cval[sel], coloraxis="coloraxis")
            data.append(_scatter(
                x=x_all[sel], y=y_all[sel], mode="markers", name=name, legendgroup=key,
                showlegend=False, marker=marker, **ds.hover(sel), visible=show, **panel))
        sel = m & ds.pick
        if sel.any():
            data.append(_pick_trace(x_all[sel], y_all[sel], ds.hover(sel), visible=show,
                                    showlegend=False, size=size + 9, **panel))
        spans.append((start, len(data)))
    # the legend: one entry per state present, in the order a reader looks for them
    keys = len(data)
    for key in (MAP_MEETS, MAP_NEAR, MAP_BREAKS, MAP_BLANK):
        if (state == key).any():
            name, style, colour = marks[key]
            legend = dict(style, size=max(style["size"], 7) if key == MAP_BREAKS else 12,
                          color=colour or "#6b6b6b")
            data.append(_legend_only(name, key, mode="markers", marker=legend))
    if ds.pick.any():
        data.append(_legend_only("The pick (rank 1)", "pick", mode="markers", marker=dict(
            symbol="star", size=17, color=YELLOW, line=dict(color=BLACK, width=1.5))))

    layout = map_grid(nrows, ncols, [html.escape(n) for n in names] if facets and fcol else [])
    _map_axes(layout, xax, yax, (xtitle, ytitle), nrows, ncols, len(groups) if facets else 1)
    cax = _map_colour_axis(ccol, nomcol, craw, clog, err_span, main)
    top = 80 if not facets else 50
    plot_h = 360 * nrows
    height = plot_h + top + 150
    layout.update(coloraxis=cax, height=height,
                  legend=dict(orientation="h", x=0, y=-105 / plot_h, yanchor="top"),
                  margin=dict(l=90, r=30, t=top, b=150))
    if not facets:
        _map_dropdown(layout, spans, names, keys, len(data), flabel)
    sec.figure = _figure(data, **layout)

    sec.explain = _map_explain(report, (xcol, ycol, fcol), len(groups), facets, err_span,
                               (nomcol, ccol), state, has_spec)
    notes = [_cap_note(ds)]
    if has_spec and not np.isin(state, [MAP_NEAR, MAP_MEETS]).any():
        notes.append(f"No design shown has its nominal {html.escape(main_label)} inside the spec.")
    sec.note = " ".join(n for n in notes if n)
    return sec


def _panel_axes(k: int) -> dict:
    """The axes of the map's ``k``-th panel (from 1, row by row from the top left), as a trace
    names them."""
    return dict(xaxis=f"x{k if k > 1 else ''}", yaxis=f"y{k if k > 1 else ''}")


def map_grid(nrows: int, ncols: int, titles: list[str]) -> dict:
    """The layout of the map's grid of panels (axes and panel titles), laid out as plotly's
    ``make_subplots`` lays out a grid whose panels all share their x and their y axis: the
    panels 0.06 of the width apart across and 0.16 of the height apart down (0.1 with one row),
    numbered row by row from the top left; every axis matches the lowest-left panel's, whose
    tick labels stand for the rest (the x ticks on the lowest row, the y ticks on the first
    column); each title centred above its panel."""
    hspace, vspace = 0.06, 0.16 if nrows > 1 else 0.1
    widths = [(1.0 - hspace * (ncols - 1)) / ncols] * ncols
    heights = [(1.0 - vspace * (nrows - 1)) / nrows] * nrows
    first = (nrows - 1) * ncols + 1
    layout: dict = {}
    notes = []
    for i in range(nrows * ncols):
        row, col = divmod(i, ncols)
        k = i + 1
        x0 = sum(widths[:col]) + col * hspace
        up = nrows - 1 - row                    # rows below this one
        y0 = sum(heights[:up]) + up * vspace
        xdom, ydom = [x0, x0 + widths[col]], [y0, min(y0 + heights[-1 - row], 1.0)]
        own, lowest_left = _panel_axes(k), _panel_axes(first)
        xaxis = dict(anchor=own["yaxis"], domain=xdom)
        yaxis = dict(anchor=own["xaxis"], domain=ydom)
        if k != first:
            xaxis["matches"], yaxis["matches"] = lowest_left["xaxis"], lowest_left["yaxis"]
            if row < nrows - 1:
                xaxis["showticklabels"] = False
            if col > 0:
                yaxis["showticklabels"] = False
        layout[f"xaxis{k if k > 1 else ''}"] = xaxis
        layout[f"yaxis{k if k > 1 else ''}"] = yaxis
        if i < len(titles) and titles[i]:
            notes.append(dict(text=titles[i], x=sum(xdom) / 2.0, y=ydom[1], xref="paper",
                              yref="paper", xanchor="center", yanchor="bottom", showarrow=False,
                              font=dict(size=16)))
    if notes:
        layout["annotations"] = notes
    return layout


def _map_axes(layout: dict, xax: dict, yax: dict, titles: tuple[str, str], nrows: int,
              ncols: int, used: int) -> None:
    """The map's axes: titles on the axes themselves, held off the tick labels, so long ticks
    never cover them; the x ticks on the lowest panel of each column; unused panels hidden."""
    xtitle, ytitle = titles
    for i in range(nrows * ncols):
        col = i % ncols + 1
        k = "" if i == 0 else i + 1
        xaxis, yaxis = layout[f"xaxis{k}"], layout[f"yaxis{k}"]
        xaxis.update(xax)
        yaxis.update(yax)
        if i >= used:
            xaxis["visible"] = yaxis["visible"] = False
            continue
        if i + ncols >= used:          # nothing below it: this panel carries the x ticks
            xaxis.update(showticklabels=True, title=dict(text=html.escape(xtitle), standoff=12))
        if col == 1:
            yaxis["title"] = dict(text=html.escape(ytitle), standoff=12)


def _map_colour_axis(ccol: str | None, nomcol: str | None, craw: np.ndarray, clog: bool,
                     err_span: float | None, main: str | None) -> dict:
    """The map's colour scale: the nominal error from the target on a diverging scale, else the
    nominal value (or the yield) on a sequential one, with readable ticks."""
    cax = dict(colorscale=SEQUENTIAL, colorbar=dict(
        title=dict(text=html.escape(_header(ccol, "(nominal)") if nomcol else "Yield")
                   if ccol else "", side="right"), thickness=14, len=0.9))
    fin = _finite(craw[craw > 0] if clog else craw)
    if err_span is not None:
        ticks = nice_ticks(-err_span, err_span, False)
        cax = dict(colorscale=DIVERGING, cmin=-err_span, cmax=err_span, colorbar=dict(
            title=dict(text=html.escape(f"{_var(main).label} error from the target [%] "
                                        "(nominal)"), side="right"), thickness=14, len=0.9,
            tickvals=ticks, ticktext=[f"{t:+g}" for t in ticks]))
    elif fin.size:
        ticks = nice_ticks(float(fin.min()), float(fin.max()), clog)
        cax["colorbar"]["tickvals"] = [math.log10(t) for t in ticks] if clog else ticks
        cax["colorbar"]["ticktext"] = [_fmt(t, ccol) for t in ticks]
        c0, c1 = (math.log10(fin.min()), math.log10(fin.max())) if clog else (fin.min(), fin.max())
        cax.update(cmin=c0 - 0.5, cmax=c1 + 0.5) if c0 == c1 else cax.update(cmin=c0, cmax=c1)
    return cax


def _map_dropdown(layout: dict, spans: list[tuple[int, int]], names: list[str], keys: int,
                  n: int, flabel: str) -> None:
    """One panel at a time: a list at the top left shows one value of the third part (the
    legend traces, from index ``keys`` on, stay visible; ``n`` traces in all)."""
    buttons = [dict(label=html.escape(name), method="update",
                    args=[{"visible": [start <= k < stop or k >= keys for k in range(n)]}])
               for (start, stop), name in zip(spans, names)]
    layout["updatemenus"] = [dict(type="dropdown", buttons=buttons, x=0.0, xanchor="left",
                                  y=1.02, yanchor="bottom", showactive=True, bgcolor="white",
                                  bordercolor="#9a9a9a")]
    layout.setdefault("annotations", []).append(dict(
        text=f"Showing {html.escape(flabel)}:", x=0, xref="paper", xanchor="right", xshift=-6,
        y=1.045, yref="paper", yanchor="bottom", showarrow=False))


def _map_explain(report: Report, cols: tuple, n_groups: int, facets: bool,
                 err_span: float | None, colour_cols: tuple, state: np.ndarray,
                 has_spec: bool) -> str:
    """How to read the map, in the words of its marks, panels and colour."""
    xcol, ycol, fcol = cols
    nomcol, ccol = colour_cols
    main = report.main_output
    main_label = _var(main).label.lower() if main else ""
    flabel = _var(fcol).label if fcol else ""
    panels = ""
    if fcol and facets and n_groups > 1:
        panels = f"; one panel per {html.escape(flabel)} value."
    elif fcol and not facets:
        panels = (f". {html.escape(flabel)} takes {n_groups} values: choose one in the list "
                  "at the top left of the chart.")
    else:
        panels = "."
    colour = ""
    if err_span is not None:
        colour = (f" Colour is the nominal {html.escape(main_label)}'s error from the target in "
                  f"per cent: grey on target, blue below, vermillion above, full colour at "
                  f"±{err_span:.3g} % (twice the spec window).")
    elif nomcol:
        colour = f" Colour is the nominal {html.escape(main_label)} (scale on the right)."
    elif ccol:
        colour = " Colour is the yield (scale on the right)."
    main_text = html.escape(main_label)
    text = [f"Each mark is one design, placed by its {html.escape(_var(xcol).label)} and "
            f"{html.escape(_var(ycol).label)} values (log scales){panels}{colour}",
            "Filled marks with a dark edge are designs whose verdict is pass (every limit kept, "
            "in spec at every condition, the yield target reached; the verdicts are explained "
            "at the top of the page)."]
    if has_spec:
        text.append(f"Open rings have the nominal {main_text} in spec but another verdict "
                    "(hover for it).")
        text.append(f"Small faded dots have the {main_text} outside the spec and are not a pass; "
                    "their colour shows which way it runs.")
    else:
        text.append("Small faded dots are not a pass (hover for the verdict).")
    if (state == MAP_BLANK).any():
        text.append("Grey open diamonds have no nominal value (the timing stalls).")
    text.append("The star is the pick; hover over any mark for its values.")
    if has_spec:
        text.append("Look for filled marks whose neighbours are filled or ringed too: there the "
                    "next standard value up or down still lands in spec, so tolerances and drift "
                    "have room.")
    return " ".join(text)


# --- 2. duty against frequency -----------------------------------------------------------------
def _padded(values: np.ndarray, limits: tuple[float, float], log: bool,
            clip: tuple[float, float] | None = None) -> tuple[float, float]:
    """Axis range (in axis units: log10 for log axes) that holds the data and finite limits."""
    pts = np.concatenate([_finite(values), _finite(np.asarray(limits, dtype=float))])
    if log:
        pts = pts[pts > 0]
    if pts.size == 0:
        return (0.0, 1.0)
    lo, hi = float(pts.min()), float(pts.max())
    if clip:
        lo, hi = max(lo, clip[0]), min(hi, clip[1])
    if log:
        lo, hi = math.log10(lo), math.log10(hi)
        pad = max((hi - lo) * 0.06, 0.05)
    else:
        pad = max((hi - lo) * 0.06, abs(hi) * 0.02, 1e-3)
    return (lo - pad, hi + pad)


#: how the scatter charts draw a design that breaks a limit and one that meets every limit: the
#: first small, grey and faded, the second larger, blue and dark-edged and drawn on top, so
#: the few good designs stand out of thousands by size and edge, not by colour alone
MARKS_BREAK = dict(symbol="circle", size=5, color="#9a9a9a", opacity=0.55, line=dict(width=0))
MARKS_MEET = dict(symbol="circle", size=9, color=BLUE, line=dict(width=1.2, color=BLACK))


def _design_marks(x: np.ndarray, y: np.ndarray, ds: _Designs) -> list[dict]:
    return [_scatter(x=x[sel], y=y[sel], mode="markers", name=name, marker=marker,
                     **ds.hover(sel))
            for name, sel, marker in (("Not a pass (small, grey)", ~ds.passes, MARKS_BREAK),
                                      ("Verdict pass (blue, dark edge)", ds.passes, MARKS_MEET))
            if sel.any()]


def _duty_section(report: Report, ds: _Designs) -> Section:
    sec = Section("duty", HEADINGS["duty"], (
        "Each mark is one design at its nominal point: frequency across (log scale), duty cycle "
        "(the share of each period the output is high) up. The shaded box is what the spec "
        "allows for the two together. Blue marks with a dark edge are designs whose verdict is "
        "pass; small grey dots have another verdict (hover for it). Prefer marks well inside the box to marks near its edge: "
        "tolerances, supply and temperature move every design around its mark."))
    d = ds.table
    if not report.circuit_text.free_running:
        sec.note = (f"only a free-running (astable) circuit has a duty cycle; this study is "
                    f"{html.escape(report.circuit)}.")
        return sec
    if not {"duty_nom", "frequency_hz_nom"} <= set(d.columns) or d.empty:
        sec.note = "the designs table holds no nominal duty and frequency."
        return sec
    f, du = d["frequency_hz_nom"].to_numpy(float), d["duty_nom"].to_numpy(float)
    flo, fhi = _spec_of(report, "frequency_hz")
    dlo, dhi = _spec_of(report, "duty")
    xr = _padded(f, (flo, fhi), log=True)
    yr = _padded(du, (dlo, dhi), log=False, clip=(0.0, 1.0))
    data, shapes, notes = [], [], []
    if any(np.isfinite(v) for v in (flo, fhi, dlo, dhi)):
        x0 = flo if np.isfinite(flo) and flo > 0 else 10 ** xr[0]
        x1 = fhi if np.isfinite(fhi) else 10 ** xr[1]
        y0 = dlo if np.isfinite(dlo) else yr[0]
        y1 = dhi if np.isfinite(dhi) else yr[1]
        box = dict(fillcolor="rgba(86,180,233,0.28)", line=dict(color=BLUE, width=1.5, dash="dash"))
        shapes.append(dict(type="rect", xref="x", yref="y", x0=x0, x1=x1, y0=y0, y1=y1,
                           layer="below", **box))
        data.append(_legend_only("Spec: the allowed region", "spec", mode="markers",
                                 marker=dict(symbol="square", size=15, color=box["fillcolor"],
                                             line=dict(color=BLUE, width=1.5))))
    else:
        notes.append("The spec sets no limit on frequency or duty, so no box is drawn.")
    data += _design_marks(f, du, ds)
    if ds.pick.any():
        data.append(_pick_trace(f[ds.pick], du[ds.pick], ds.hover(ds.pick)))
    xax = _axis("frequency_hz", _header("frequency_hz", "(nominal)"), values=f,
                span=(10 ** xr[0], 10 ** xr[1]))
    sec.figure = _figure(data, height=480, **({"shapes": shapes} if shapes else {}),
                         xaxis=dict(**xax, range=list(xr)),
                         yaxis=dict(**_axis("duty", "Duty cycle (nominal)"), range=list(yr)),
                         legend=dict(orientation="h", x=0, y=-0.22, yanchor="top"),
                         margin=dict(b=110))
    sec.note = " ".join(n for n in notes + [_cap_note(ds)] if n)
    return sec


# --- 3. yield against supply current -----------------------------------------------------------
def _yield_section(report: Report, ds: _Designs) -> Section:
    d = ds.table
    cur = _current_column(d)
    worst = cur == "supply_current_a_max"
    sec = Section("yield", HEADINGS["yield"], (
        "Yield is the share of simulated builds, with every part drawn within its tolerance, "
        "that meet the spec at every supply and temperature (its 95 % interval is in the "
        "hover text and the workbook). Supply current is the average "
        + ("draw in the condition that draws most. " if worst else "draw at the nominal point. ")
        + "Blue marks with a dark edge are designs whose verdict is pass; small grey dots have "
          "another verdict (hover for it). The "
          "stepped black line joins the designs that no other design beats on both counts: "
          "for a given current budget, the best yield on offer sits on the line. Walk along it "
          "from the left until the yield is high enough; further right only costs battery."))
    if cur is None or "yield" not in d.columns or not np.isfinite(d["yield"].to_numpy(float)).any():
        sec.note = ("this run has no yield or no supply current per design (a study without a "
                    "[spec] has no yield).")
        return sec
    x, y = d[cur].to_numpy(float), d["yield"].to_numpy(float)
    front = pareto_frontier(x, y)
    order = np.flatnonzero(front)[np.argsort(x[front], kind="stable")]
    data = _design_marks(x, y, ds)
    data.append(_scatter(x=x[order], y=y[order], mode="lines+markers",
                         name="Frontier: no design has more yield for less current",
                         line=dict(color=BLACK, width=2, shape="hv"),
                         marker=dict(symbol="circle-open", size=12, color=BLACK,
                                     line=dict(width=1.5)),
                         **ds.hover(order)))
    if ds.pick.any():
        data.append(_pick_trace(x[ds.pick], y[ds.pick], ds.hover(ds.pick)))
    xr = _padded(x, (np.nan, np.nan), log=True)
    xax = _axis(cur, _header(cur, "(highest)" if worst else "(nominal)"), values=x,
                span=(10 ** xr[0], 10 ** xr[1]))
    sec.figure = _figure(data, height=480, xaxis=dict(**xax, range=list(xr)),
                         yaxis=dict(title=dict(text="Yield"), tickformat=".0%",
                                    range=[-0.04, 1.06]),
                         legend=dict(orientation="h", x=0, y=-0.22, yanchor="top"),
                         margin=dict(b=110))
    sec.note = _cap_note(ds)
    return sec


# --- 4. Monte Carlo histogram ------------------------------------------------------------------
def _mc_counts(report: Report, values: int) -> str:
    """How many builds and conditions the ``values`` drawn stand for, from the run record."""
    info = report.run_info or {}
    builds, conds = info.get("monte_carlo"), info.get("conditions")
    if isinstance(builds, int) and builds > 0 and isinstance(conds, int) and conds > 0:
        if builds * conds == values:
            return (f"{_count(builds)} builds × {_count(conds)} conditions = "
                    f"{_count(values)} results.")
        return (f"{_count(values)} results, spread evenly over {_count(builds)} builds at "
                f"{_count(conds)} conditions.")
    return f"{_count(values)} results."


def _mc_explain(report: Report) -> str:
    """What the histogram shows, in words true to this report (latch or timer, limits drawn)."""
    main = report.main_output
    label = html.escape(_var(main).label.lower())
    if not report.circuit_text.timed:
        what = (f"A latch has no timing, so the output followed is the {label} it draws (in "
                "whichever state, set or reset, draws more). ")
    else:
        what = ""
    lo, hi, target = _main_limits(report)
    limits = sum(np.isfinite(v) for v in (lo, hi))
    lines = []
    if limits:
        lines.append("the solid vertical line" + (" is the spec limit" if limits == 1
                                                  else "s are the spec limits"))
    if target is not None and np.isfinite(target):
        lines.append("the dashed one the target")
    marks = (" " + ", ".join(lines).capitalize() + ".") if lines else (
        f" The spec sets no limit on the {label}, so no limit line is drawn.")
    verdict = (" A narrow hump well inside the limits means the design is robust; results "
               "beyond a line are the yield lost." if limits else "")
    return (f"{what}Each build is the pick made again in simulation, with every part and the "
            f"timer's own spread drawn at random within tolerance. The {label} of each build is "
            "taken at every supply and temperature condition, and each bar counts those results "
            f"(a build counts once per condition).{marks}{verdict} Separate humps mean the "
            "conditions move the value more than the tolerances do.")


def _mc_section(report: Report) -> Section:
    main = report.main_output
    mc = report.mc_samples
    has_mc = mc is not None and "value" in mc.columns and not mc.empty
    sec = Section("mc", HEADINGS["mc"], _mc_explain(report) if main else "")
    if main is None:
        sec.note = ("the Monte Carlo builds were made, but the report names no output to count "
                    "them by." if has_mc else "this run has no output to follow across builds.")
        return sec
    if not has_mc:
        mc_count = (report.run_info or {}).get("monte_carlo")
        sec.note = ("Monte Carlo was turned off for this run (monte_carlo = 0 in the study)."
                    if mc_count == 0 else "this run holds no Monte Carlo builds of the pick.")
        return sec
    raw = mc["value"].to_numpy(float)
    vals = _finite(raw)
    if vals.size == 0:
        sec.note = "none of the pick's Monte Carlo builds produced a value (the timing stalls)."
        return sec
    unit = _fmt_unit(main)
    bars = dict(type="histogram", x=vals, nbinsx=min(60, max(10, int(np.sqrt(vals.size)))),
                marker=dict(color=BLUE, line=dict(color="white", width=0.5)),
                name="Results", showlegend=False,
                hovertemplate=f"%{{x}} {html.escape(unit)}: %{{y}} results<extra></extra>")
    shapes, legend = _spec_lines(report, "x")
    xr = _padded(vals, _main_limits(report)[:2], log=False)
    xax = _axis(main, values=vals, span=xr, log=False, count=10)
    sec.figure = _figure([bars] + legend, height=440, bargap=0.02,
                         **({"shapes": shapes} if shapes else {}),
                         xaxis=dict(**xax, range=list(xr)),
                         yaxis=dict(title=dict(text="Results (build × condition)")),
                         legend=dict(orientation="h", x=0, y=-0.24, yanchor="top"),
                         margin=dict(t=20, b=110))
    notes = [_mc_counts(report, raw.size)]
    dropped = raw.size - vals.size
    if dropped:
        notes.append(f"{_count(dropped)} results gave no value (the timing stalls) and are not "
                     "drawn.")
    sec.note = " ".join(notes)
    return sec


# --- 5. temperature curves ---------------------------------------------------------------------
def _temperature_section(report: Report, ds: _Designs) -> Section:
    main = report.main_output
    label = _var(main).label.lower() if main else "main output"
    sec = Section("temperature", HEADINGS["temperature"], "")
    tc = report.temperature_curves
    need = {"rank", "vcc_v", "temperature_c", "value"}
    if main is None or tc is None or tc.empty or not need <= set(tc.columns):
        sec.note = ("this run has no temperature curves" + (
            " (the report names no output to follow)." if main is None else "."))
        return sec
    tc = tc.sort_values(["rank", "vcc_v", "temperature_c"])
    ranks = sorted(pd.unique(tc["rank"]))[:5]
    who = ("the best-ranked design" if len(ranks) == 1 else
           f"the {len(ranks)} best-ranked designs")
    sec.explain = (
        f"How the {html.escape(label)} of {who} moves with the ambient temperature, one line "
        "per supply voltage. "
        + ("Colour and marker shape tell the designs apart, the dash pattern tells the supply. "
           if len(ranks) > 1 else "The dash pattern tells the supply. ")
        + "Flat lines that stay close together mean the design shrugs off heat and supply "
          "changes; a steep or fanning line shows where its margin goes. The grey band around "
          "the best design's middle-supply line is the chip's own drift and supply "
          "sensitivity, whose sign no datasheet gives: darker its typical spread, lighter its "
          "maximum. Click a legend entry to hide a line.")
    vccs = sorted(pd.unique(tc["vcc_v"]))
    design_of = {}
    if "rank" in ds.table.columns and "design" in ds.table.columns:
        design_of = dict(zip(ds.table["rank"], ds.table["design"]))
    unit = _fmt_unit(main)
    data = _drift_band(tc, ranks[0], vccs)
    for i, r in enumerate(ranks):
        colour, symbol = PALETTE[i % len(PALETTE)], SYMBOLS[i % len(SYMBOLS)]
        group = f"Rank {r}" + (f" (design {design_of[r]})" if r in design_of else "")
        for j, v in enumerate(vccs):
            sub = tc[(tc["rank"] == r) & (tc["vcc_v"] == v)]
            if sub.empty:
                continue
            vt = format_eng(v, "V")
            hover = [f"{html.escape(group)}, {vt} supply<br>{t:g} °C: {format_eng(val, unit)}"
                     for t, val in zip(sub["temperature_c"], sub["value"])]
            data.append(_scatter(
                x=sub["temperature_c"].to_numpy(), y=sub["value"].to_numpy(),
                mode="lines+markers", name=f"{vt} supply", legendgroup=f"rank{r}",
                legendgrouptitle=dict(text=html.escape(group)),
                line=dict(color=colour, dash=DASHES[j % len(DASHES)], width=2),
                marker=dict(symbol=symbol, size=8, color=colour),
                text=hover, hovertemplate="%{text}<extra></extra>"))
    shapes, legend = _spec_lines(report, "y")
    lo, hi, target = _main_limits(report)
    yr = _padded(tc["value"].to_numpy(float), (lo, hi, np.nan if target is None else target),
                 log=False)
    rows = len(ranks) * (len(vccs) + 1) + 2          # legend lines: group titles, supplies, spec
    sec.figure = _figure(data + legend, height=max(460, 190 + 21 * rows + 8 * len(ranks)),
                         **({"shapes": shapes} if shapes else {}),
                         xaxis=dict(title=dict(text=_header("temperature_c")), ticksuffix=" °C"),
                         yaxis=dict(**_axis(main, values=tc["value"].to_numpy(float), span=yr,
                                            log=False, count=8), range=list(yr)),
                         legend=dict(groupclick="toggleitem", tracegroupgap=8),
                         margin=dict(r=20, t=20))
    return sec


def _drift_band(tc: pd.DataFrame, rank, vccs) -> list[dict]:
    """Shaded bands around the best design's line at the middle supply: the chip's drift and
    supply sensitivity at their maximum (light) and typical (darker) figures."""
    if not {"drift_typ", "drift_max"} <= set(tc.columns):
        return []
    v = vccs[len(vccs) // 2]
    sub = tc[(tc["rank"] == rank) & (tc["vcc_v"] == v)]
    if sub.empty or not np.any(sub["drift_max"].to_numpy(float) > 0):
        return []
    t = sub["temperature_c"].to_numpy(float)
    y = sub["value"].to_numpy(float)
    bands = []
    for col, shade, name in (("drift_max", "rgba(120,120,120,0.16)", "chip drift, maximum"),
                             ("drift_typ", "rgba(120,120,120,0.30)", "chip drift, typical")):
        w = sub[col].to_numpy(float)
        bands.append(_scatter(
            x=np.r_[t, t[::-1]], y=np.r_[y * (1 + w), (y * (1 - w))[::-1]], fill="toself",
            fillcolor=shade, line=dict(width=0), mode="lines", name=name, legendgroup="drift",
            hoverinfo="skip"))
    return bands


# --- 6. parallel coordinates -------------------------------------------------------------------
def _pc_dimension(name: str, label: str, values: np.ndarray, parts: list[str]) -> dict:
    log = _is_log(name)
    fin = _finite(values[values > 0] if log else values)
    lo, hi = (float(fin.min()), float(fin.max())) if fin.size else (0.0, 1.0)
    if name == "yield":
        ticks, lo, hi = [0, 0.25, 0.5, 0.75, 1.0], 0.0, 1.0
        text = [f"{t:.0%}" for t in ticks]
    else:
        uniq = np.unique(fin)
        if name in parts and len(uniq) <= 10:
            ticks = uniq.tolist()
        else:
            ticks = nice_ticks(lo, hi, log, count=5, enclose=True)
            lo, hi = min(lo, ticks[0]), max(hi, ticks[-1])
        text = [_fmt(t, name) for t in ticks]
    tv = [math.log10(t) for t in ticks] if log else list(ticks)
    rng = [math.log10(lo), math.log10(hi)] if log else [lo, hi]
    if rng[0] == rng[1]:
        rng = [rng[0] - 0.5, rng[1] + 0.5]
    vals = np.log10(values) if log else values
    return dict(label=html.escape(label), values=vals, tickvals=tv, ticktext=text, range=rng)


def parallel_order(yld: np.ndarray, rank: np.ndarray) -> np.ndarray:
    """Row order in which the parallel-coordinates lines are drawn, last on top: lowest yield
    first (no yield counts lowest), best yield last; among equal yields the better rank later."""
    y = np.where(np.isfinite(yld), yld, -1.0)
    return np.lexsort((-np.asarray(rank, dtype=float), y))


#: yield colours for the lines: pale grey for none, through mid blue, to a dark saturated blue
#: for all. Lightness rises steadily, so the scale reads the same with any colour vision.
YIELD_LINES = [[0.0, "#e2e2e2"], [0.25, "#c3d3e4"], [0.6, "#4f86bd"], [1.0, "#08306b"]]


def _parallel_section(report: Report, ds: _Designs) -> Section:
    sec = Section("parallel", HEADINGS["parallel"], "")
    d = ds.table
    if d.empty:
        sec.note = "there are no designs to show."
        return sec
    main = report.main_output
    cur = _current_column(d)
    cols = [c for c in report.part_columns if c in d.columns]
    labels = [_var(c).header for c in cols]
    for col, lab in ((f"{main}_nom" if main else "", _header(main, "(nominal)") if main else ""),
                     ("yield", "Yield"),
                     (cur or "", _header(cur or "", "(highest)" if cur == "supply_current_a_max"
                                         else "(nominal)"))):
        if col and col in d.columns and np.isfinite(d[col].to_numpy(float)).any():
            cols.append(col)
            labels.append(lab)
    if len(cols) < 2:
        sec.note = "there are too few columns to compare."
        return sec
    rank = d["rank"].to_numpy(float) if "rank" in d.columns else np.arange(1, len(d) + 1.0)
    yld = d["yield"].to_numpy(float) if "yield" in cols else np.full(len(d), np.nan)
    order = parallel_order(yld, rank)
    data = d[cols].to_numpy(float)[order]
    logs = np.array([_is_log(c) for c in cols])
    with np.errstate(invalid="ignore"):
        usable = np.isfinite(data).all(axis=1) & ((data > 0) | ~logs).all(axis=1)
    data = data[usable]
    if not len(data):
        sec.note = "no design has every column filled in, so there are no lines to draw."
        return sec
    dims = [_pc_dimension(c, lab, data[:, k], report.part_columns)
            for k, (c, lab) in enumerate(zip(cols, labels))]
    if "yield" in cols:
        line = dict(color=yld[order][usable], colorscale=YIELD_LINES, cmin=0, cmax=1,
                    showscale=True,
                    colorbar=dict(title=dict(text="Yield", side="top"), tickformat=".0%",
                                  thickness=14, len=0.8, x=1.0, xanchor="left", xpad=30,
                                  y=0.45, yanchor="middle"))
    else:
        line = dict(color=BLUE)
    # the axis labels sit centred over the first and last axes, above the plot: the margins
    # must hold half of each (about 7.5 px a character at 13 px); the colour bar sits in the
    # right margin below the labels
    half = [4.0 * len(labels[0]) + 16, 4.0 * len(labels[-1]) + 16]
    right = max(half[1], 110 if "yield" in cols else 30)
    lines = dict(type="parcoords", dimensions=dims, line=line, labelfont=dict(size=13),
                 tickfont=dict(size=11), rangefont=dict(size=1, color="rgba(0,0,0,0)"))
    sec.figure = _figure([lines], height=540,
                         margin=dict(l=max(80, int(half[0])), r=int(right), t=80, b=40))
    good = ("Colour is the yield: pale grey lines are designs with little or none, and the "
            "darker and bluer a line the higher its yield; the best are drawn last, on top. "
            if "yield" in cols else "")
    what = ("its parts (log scales), then what they give" if any(c in report.part_columns
                                                                 for c in cols)
            else "the figures it gives")
    sec.explain = (
        f"Every design is one line crossing the axes from left to right: {what}. "
        f"{good}Drag along an axis to keep only the lines that pass "
        "through that stretch; click the axis outside it to clear."
        + (" For example, drag over the top of the yield axis to see which part values the "
           "good designs share." if "yield" in cols else "")
        + " Drag an axis title sideways to reorder the axes.")
    notes = [_cap_note(ds)]
    if len(data) == 1:
        notes.append("This study has a single design, so there is one line.")
    if (~usable).sum():
        notes.append(f"{_count((~usable).sum())} designs without a value in some column are "
                     "left out.")
    if "yield" in cols:
        none = int((yld[order][usable] <= 0).sum())
        if none:
            notes.append(f"{_count(none)} of the {_count(usable.sum())} lines have no yield at "
                         "all (pale grey).")
    sec.note = " ".join(n for n in notes if n)
    return sec


# --- the page ----------------------------------------------------------------------------------
def build_sections(report: Report) -> list[Section]:
    """The sections of the page, each with its figure (plotly's figure JSON, as the page
    writes it) or the reason it has none."""
    return _sections(report, _designs(report))


def _sections(report: Report, ds: _Designs) -> list[Section]:
    return [_map_section(report, ds), _duty_section(report, ds), _yield_section(report, ds),
            _mc_section(report), _temperature_section(report, ds), _parallel_section(report, ds),
            _waveform_section(report)] \
        + ([_cost_section(report)] if report.grades is not None and len(report.grades) else [])


# --- 7. waveforms of the pick ------------------------------------------------------------------
def _waveform_section(report: Report) -> Section:
    sec = Section("waveform", HEADINGS["waveform"], "")
    tr = report.waveform
    if tr is None or tr.table.empty:
        sec.note = ("a latch has no timing, so there is no waveform to draw."
                    if not report.circuit_text.timed else
                    "the pick never completes a timing cycle, so there is no waveform to draw.")
        return sec
    what = report.circuit_text.waveform_text
    sec.explain = (f"What a probe on the pick's timing capacitor (solid) and output (dashed) would "
                   f"show: {what}. Blue is the nominal condition, vermillion the condition where "
                   "the pick's timing lies farthest from nominal; the dotted lines are the "
                   "thresholds. The same table is in waveform.csv.")
    data, shapes = [], []
    for (label, colour) in (("nominal", BLUE), ("worst case", VERMILLION)):
        sub = tr.table[tr.table["condition"] == label]
        if sub.empty:
            continue
        name = html.escape(f"{label} ({tr.described.get(label, '')})")
        time_s = sub["time_s"].to_numpy()
        data.append(_scatter(x=time_s, y=sub["capacitor_v"].to_numpy(), mode="lines",
                             name=f"capacitor, {name}", line=dict(color=colour, width=2)))
        data.append(_scatter(x=time_s, y=sub["output_v"].to_numpy(), mode="lines",
                             name=f"output, {name}",
                             line=dict(color=colour, width=1.5, dash="dash")))
        shapes += [_hline(v, dict(color=colour, width=1, dash="dot"))
                   for v in tr.thresholds.get(label, ())]
    sec.figure = _figure(data, height=560, **({"shapes": shapes} if shapes else {}),
                         xaxis=dict(title=dict(text="Time [s]"), exponentformat="SI",
                                    ticksuffix="s"),
                         yaxis=dict(title=dict(text="Voltage [V]"), ticksuffix=" V"),
                         legend=dict(orientation="h", yanchor="top", y=-0.22, x=0),
                         margin=dict(r=20, t=20, b=140))
    return sec


def _cost_section(report: Report) -> Section:
    """One mark per part grade: its best design's yield (with the 95 % interval) against the
    grade's relative cost index; the pick a star; the yield target a dashed line."""
    sec = Section("cost", COST_HEADING, (
        "One mark per combination of part grades, at the relative cost index of its timing parts "
        "(from the editable grade table: rough common-practice figures, not quotes) and the "
        "Monte Carlo yield of its best design, with the 95 % interval as a bar. The star is the "
        "pick: the cheapest grade whose best design reaches the yield target, then the lowest "
        "supply current."))
    g = report.grades
    target = report.run_info.get("yield_target")
    cost = g["cost_index"].to_numpy(float)
    y = g["yield"].to_numpy(float) * 100
    lo = g["yield_lo"].to_numpy(float) * 100
    hi = g["yield_hi"].to_numpy(float) * 100
    pick_design = int(report.designs.sort_values("rank").iloc[0]["design"])
    pick = g["design"].to_numpy() == pick_design
    hover = [f"<b>{html.escape(str(r.grade_label))}</b><br>cost index {r.cost_index:.2f}<br>"
             f"best design {r.design} (rank {r['rank']}), {html.escape(str(r.verdict))}<br>"
             + (f"yield {r['yield'] * 100:.1f} % (95 %: {r.yield_lo * 100:.1f} to "
                f"{r.yield_hi * 100:.1f} %)" if np.isfinite(r["yield"]) else "no yield figure")
             for _, r in g.iterrows()]
    data, shapes = [], []
    reach = g["reaches"].to_numpy(bool)
    for mask, name, colour in ((reach, "Reaches the yield target", BLUE),
                               (~reach, "Does not reach it", VERMILLION)):
        if not mask.any():
            continue
        data.append(_scatter(
            x=cost[mask], y=y[mask], mode="markers+text", name=name,
            text=[html.escape(str(t)) for t in g["grade_label"][mask]], textposition="top center",
            error_y=dict(type="data", symmetric=False, array=(hi - y)[mask],
                         arrayminus=(y - lo)[mask], color=colour, thickness=1.2),
            marker=dict(size=11, color=colour, symbol="circle", line=dict(width=1, color=BLACK)),
            hovertext=np.array(hover, dtype=object)[mask], hoverinfo="text"))
    if pick.any():
        data.append(_pick_trace(cost[pick], y[pick],
                                dict(hovertext=np.array(hover, dtype=object)[pick],
                                     hoverinfo="text")))
    if target:
        shapes.append(_hline(target * 100, dict(color=BLACK, width=1.5, dash="dash")))
        data.append(_legend_only(f"Yield target: {target * 100:g} %", "spec", mode="lines",
                                 line=dict(color=BLACK, width=1.5, dash="dash")))
    sec.figure = _figure(data, height=460, **({"shapes": shapes} if shapes else {}),
                         margin=dict(l=90, r=30, t=40, b=120),
                         legend=dict(orientation="h", x=0, y=-0.25, yanchor="top"),
                         xaxis=dict(title=dict(text="Relative cost index of the timing parts' "
                                                    "grades (rough common-practice figures "
                                                    "[cp], not quotes)")),
                         yaxis=dict(title=dict(text="Yield of the grade's best design [%]")))
    return sec


_CSS = """
:root { --ink: #1f2328; --muted: #5b6168; --rule: #d9dde1; --accent: #0072B2; }
* { box-sizing: border-box; }
body { margin: 0; font-family: system-ui, -apple-system, sans-serif; color: var(--ink);
       background: #f6f7f8; line-height: 1.5; }
.wrap { max-width: 1180px; margin: 0 auto; padding: 24px 20px 48px; }
header.top { background: white; border: 1px solid var(--rule); border-radius: 6px;
             padding: 22px 26px; }
.kicker { margin: 0; color: var(--muted); font-size: 13px; letter-spacing: .04em;
          text-transform: uppercase; }
h1 { margin: 4px 0 14px; font-size: 26px; line-height: 1.25; overflow-wrap: anywhere; }
h2 { margin: 0 0 6px; font-size: 20px; }
.facts { display: grid; grid-template-columns: max-content 1fr; gap: 2px 16px; margin: 0 0 14px; }
.facts dt { color: var(--muted); }
.facts dd { margin: 0; overflow-wrap: anywhere; }
table.summary { border-collapse: collapse; margin: 4px 0 12px; min-width: 50%; }
table.summary th, table.summary td { text-align: left; padding: 5px 14px 5px 0;
    border-bottom: 1px solid var(--rule); vertical-align: top; overflow-wrap: anywhere; }
table.summary th { color: var(--muted); font-weight: 600; white-space: nowrap; }
.cautions { border: 2px solid #E69F00; border-left-width: 8px; background: #fff7e6;
            border-radius: 4px; padding: 10px 16px; margin: 14px 0 6px; }
.cautions h2 { font-size: 16px; margin: 0 0 4px; }
.cautions ul { margin: 0; padding-left: 20px; }
.badge { display: inline-block; border: 1px solid var(--accent); color: var(--accent);
         border-radius: 3px; padding: 0 6px; font-size: 13px; }
.capnote { color: var(--ink); background: #eef5fb; border-left: 4px solid var(--accent);
           padding: 6px 12px; margin: 10px 0 0; }
nav.toc { margin-top: 14px; font-size: 14px; display: flex; flex-wrap: wrap; gap: 4px 18px; }
nav.toc a { color: var(--accent); }
section.chart-block { background: white; border: 1px solid var(--rule); border-radius: 6px;
                      padding: 18px 22px; margin-top: 18px; }
section.chart-block p.how { margin: 0 0 8px; max-width: 90ch; }
section.chart-block p.note { margin: 0 0 8px; color: var(--muted); font-style: italic; }
section.chart-block p.skip { margin: 4px 0; color: var(--muted); }
.chart { width: 100%; }
footer { color: var(--muted); font-size: 13px; margin-top: 24px; }
"""


def _header_html(report: Report, ds: _Designs) -> str:
    esc = html.escape
    circuit = report.circuit_text.title
    facts = [("Circuit", esc(circuit)), ("Timer model", esc(report.timer_name))]
    facts.append(("Model", '<span class="badge">ideal: textbook formulas, no non-idealities</span>'
                  if report.ideal else "realistic (bias currents, output stage, drift, parts)"))
    if report.main_output:
        facts.append(("Main output", esc(_var(report.main_output).label)))
    facts.append(("Designs", _count(ds.total)))
    facts.append(("Points evaluated", _count(report.points_total)))
    out = ['<header class="top">', '<p class="kicker">timer-sweep chart page</p>',
           f"<h1>{esc(report.title)}</h1>", '<dl class="facts">']
    out += [f"<dt>{k}</dt><dd>{v}</dd>" for k, v in facts]
    out.append("</dl>")
    if report.summary:
        out.append('<table class="summary"><tbody>')
        out += [f"<tr><th scope=\"row\">{esc(str(k))}</th><td>{esc(str(v))}</td></tr>"
                for k, v in report.summary]
        out.append("</tbody></table>")
    if report.verdicts:
        out.append('<p class="capnote"><b>Verdicts</b> (one per design, the same in the workbook '
                   'and run.json): ' + "; ".join(f"<b>{esc(k)}</b> = {esc(v)}"
                                                 for k, v in report.verdicts.items()) + ".</p>")
    if report.cautions:
        out.append('<div class="cautions" role="note"><h2>Cautions</h2><ul>')
        out += [f"<li>{esc(str(c))}</li>" for c in report.cautions]
        out.append("</ul></div>")
    if ds.capped:
        note = _cap_note(ds).replace("this chart shows", "the charts show")
        out.append(f'<p class="capnote">{esc(note)}</p>')
    return "\n".join(out)


def render_page(report: Report) -> str:
    """The whole page as one HTML string (plotly's JavaScript embedded once)."""
    esc = html.escape
    ds = _designs(report)
    sections = _sections(report, ds)
    parts = ["<!DOCTYPE html>", '<html lang="en">', "<head>", '<meta charset="utf-8">',
             '<meta name="viewport" content="width=device-width, initial-scale=1">',
             f"<title>{esc(report.title)} - timer-sweep</title>", f"<style>{_CSS}</style>",
             "</head>", "<body>", '<div class="wrap">', _header_html(report, ds)]
    parts.append('<nav class="toc">' + "".join(
        f'<a href="#sec-{s.key}">{esc(s.heading)}</a>' for s in sections) + "</nav></header>")
    parts.append("<main>")
    first = True
    for s in sections:
        parts.append(f'<section class="chart-block" id="sec-{s.key}">')
        parts.append(f"<h2>{esc(s.heading)}</h2>")
        if s.figure is None:
            parts.append(f'<p class="skip">Not shown: {s.note}</p>')
        else:
            # explain and note hold our own sentences with user text already escaped
            parts.append(f'<p class="how">{s.explain}</p>')
            if s.note:
                parts.append(f'<p class="note">{s.note}</p>')
            chart = _chart_html(s.figure, f"chart-{s.key}", first)
            parts.append(f'<div class="chart">{chart}</div>')
            first = False
        parts.append("</section>")
    parts.append("</main>")
    info = report.run_info or {}
    bits = [f"{esc(str(k))} {esc(str(info[k]))}" for k in ("version", "seed", "digest")
            if k in info]
    made = "Made by timer-sweep" + "".join(f" &middot; {b}" for b in bits)
    parts.append(f"<footer>{made}. The charts work offline: everything they need is inside this "
                 "file.</footer>")
    parts += ["</div>", "</body>", "</html>", ""]
    return "\n".join(parts)


def write_page(path: pathlib.Path, report: Report) -> None:
    """Write the chart page for ``report`` to ``path`` atomically: a temporary file in the same
    folder, renamed onto ``path``; nothing is left behind if anything fails."""
    path = pathlib.Path(path)
    text = render_page(report)
    path.parent.mkdir(parents=True, exist_ok=True)
    with atomic_path(path) as tmp:
        tmp.write_text(text, encoding="utf-8", newline="\n")
