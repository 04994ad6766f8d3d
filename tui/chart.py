"""Charts drawn as text: braille dots for curves, words for the legend.

Pure rendering into lists of strings, so a chart is tested without the app
and reads the same with or without colour. Every character placed here is
one terminal cell wide (braille, box drawing, ASCII); user text is measured
with :func:`_cells` so a wide character in a title cannot push a row over.
"""

from __future__ import annotations

import dataclasses
import unicodedata
from dataclasses import dataclass

import numpy as np

from model.design.units import format_si

from .chart_scale import axis_range, finite, rounded_out, scaled, tick_labels, ticks
from .minus_sign import minus

__all__ = ["Axis", "Series", "Marker", "Spot", "Chart", "render", "render_stack"]

TOO_SMALL = "enlarge to see the picture"
MARKER_COLUMN = "┊"
LINE_KEY = "─"
_MIN_PLOT_ROWS = 2
_MIN_PLOT_COLS = 4

# Braille dot bits by (dot row, dot column) inside one cell (Unicode 3.0,
# Braille Patterns block): dots 1-2-3 and 4-5-6 run down, 7 and 8 sit below.
_DOT_BITS = np.array([[0x01, 0x08], [0x02, 0x10], [0x04, 0x20], [0x40, 0x80]], dtype=np.uint8)
# Code 0 becomes a space rather than U+2800 so an empty cell copies and
# compares as blank.
_GLYPHS = np.array([" "] + [chr(0x2800 + code) for code in range(1, 256)], dtype=object)


@dataclass(frozen=True)
class Axis:
    """One axis: its name, unit and range (``None`` ends follow the data).
    ``round_ends`` moves the ends out to the nearest ticks, so that every
    value on the axis lies between two labelled ticks."""
    label: str
    unit: str
    log: bool = False
    lo: float | None = None
    hi: float | None = None
    round_ends: bool = False


@dataclass(frozen=True)
class Series:
    """Points in axis units; ``mark=None`` joins them as a braille line, a
    character puts that symbol at each point instead."""
    x: np.ndarray
    y: np.ndarray
    label: str
    mark: str | None = None


@dataclass(frozen=True)
class Marker:
    """A vertical line at ``x`` (x-axis unit), such as a corner frequency;
    ``text`` is its value as the legend writes it (None: the chart formats
    ``x``), so a figure shown elsewhere too reads the same in both places."""
    x: float
    symbol: str
    label: str
    text: str | None = None


@dataclass(frozen=True)
class Spot:
    """One marked point in axis units, such as the quiescent point."""
    x: float
    y: float
    symbol: str
    label: str


@dataclass(frozen=True)
class Chart:
    """What to draw. ``x_ticks=False`` leaves out the x label row, for a
    chart stacked above another that shares its x axis; ``marker_legend=False``
    leaves the markers out of the legend, for a chart stacked under one that
    already explains the same markers."""
    title: str
    x: Axis
    y: Axis
    series: tuple = ()
    markers: tuple = ()
    spots: tuple = ()
    x_ticks: bool = True
    marker_legend: bool = True


def _cells(text: str) -> int:
    return sum(0 if unicodedata.combining(ch) else 2 if unicodedata.east_asian_width(ch) in "WF" else 1
               for ch in text)


def _fit(text: str, width: int) -> str:
    """``text`` cut (with an ellipsis) or padded to exactly ``width`` cells."""
    if _cells(text) <= width:
        return text + " " * (width - _cells(text))
    out, used = [], 0
    for ch in text:
        need = _cells(ch)
        if used + need > width - 1:
            break
        out.append(ch)
        used += need
    return "".join(out) + ("…" if width else "") + " " * (width - 1 - used)


def _blank(message: str, width: int, height: int) -> list[str]:
    return [_fit(message if row == 0 else "", max(width, 0)) for row in range(max(height, 0))]


@dataclass(frozen=True)
class _Frame:
    """Where everything goes for one chart at one size."""
    gutter: int  # cells of y labels left of the axis column
    right: int  # cells kept free right of the plot for the last x label
    plot_rows: int
    plot_cols: int
    legend: tuple
    x_range: tuple
    y_range: tuple
    x_ticks: tuple  # (value, label)
    y_ticks: tuple


def _legend_items(chart: Chart, x_range, y_range) -> list[str]:
    items = [f"{s.mark or LINE_KEY} {s.label}" for s in chart.series]
    for m in chart.markers if chart.marker_legend else ():
        off = "" if _inside(chart.x, m.x, x_range) else " (off chart)"
        item = f"{m.symbol} {m.label} {m.text or minus(format_si(m.x, chart.x.unit))}{off}"
        if item not in items:  # a pair of marks (±vpk) explained once
            items.append(item)
    for s in chart.spots if chart.marker_legend else ():
        inside = _inside(chart.x, s.x, x_range) and _inside(chart.y, s.y, y_range)
        items.append(f"{s.symbol} {s.label}" + ("" if inside else " (off chart)"))
    return items


def _inside(axis: Axis, value: float, ends) -> bool:
    if not finite(axis, np.asarray(value, dtype=float)):
        return False
    return ends[0] <= float(scaled(axis, value)) <= ends[1]


def _wrap(items: list[str], width: int, rows: int) -> tuple:
    lines: list[str] = []
    for item in items:
        if lines and _cells(lines[-1]) + 2 + _cells(item) <= width:
            lines[-1] += "  " + item
        elif len(lines) < rows:
            lines.append(item)
        else:
            lines[-1] += "  " + item  # cut by _fit with an ellipsis
    return tuple(_fit(line, width) for line in lines)


def _frame(chart: Chart, width: int, height: int, gutter: int = 0, right: int = 0) -> _Frame | None:
    x_range = axis_range(chart.x, [np.asarray(s.x, float) for s in chart.series])
    y_range = axis_range(chart.y, [np.asarray(s.y, float) for s in chart.series])
    items = _legend_items(chart, x_range, y_range)
    fixed = 1 + chart.x_ticks
    # As many legend rows as the words need, up to a quarter of the height,
    # so that every mark stays explained on a narrow picture.
    needed = len(_wrap(items, width, len(items))) if items else 0
    legend_rows = max(1, min(needed, (height - fixed) // 4))
    legend = _wrap(items, width, legend_rows) if items else ()
    plot_rows = height - fixed - len(legend)
    if plot_rows < _MIN_PLOT_ROWS:
        return None
    y_values = ticks(chart.y, *y_range, count=max(2, plot_rows // 3))
    if chart.y.round_ends and not chart.y.log:
        y_range, y_values = rounded_out(y_range, y_values)
    y_ticks = tick_labels(y_values, chart.y.unit)
    gutter = max(gutter, max((_cells(t) for _, t in y_ticks), default=0))
    # The x labels depend on the plot width and the width on the widest
    # label, so guess with a typical label, then settle on the real one.
    label_cells = 7
    for _ in range(2):
        cols = width - gutter - 1 - max(right, (label_cells + 1) // 2)
        x_values = ticks(chart.x, *x_range, count=max(2, cols // (label_cells + 2)))
        x_ticks = tick_labels(x_values, chart.x.unit)
        label_cells = max((_cells(t) for _, t in x_ticks), default=1)
    right = max(right, label_cells // 2)
    cols = width - gutter - 1 - right
    if cols < _MIN_PLOT_COLS:
        return None
    return _Frame(gutter, right, plot_rows, cols, legend, x_range, y_range, x_ticks, y_ticks)


def _dots(axis: Axis, values, ends, dots: int, flip: bool) -> np.ndarray:
    """Fractional dot positions; 0 is the left column or the top row."""
    lo, hi = ends
    with np.errstate(over="ignore", invalid="ignore"):
        where = (scaled(axis, values) - lo) / (hi - lo) * (dots - 1)
    # Far-off points only set a line's slope at the edge; bounding them keeps
    # the integer casts below from overflowing.
    where = np.clip(where, -1e12, 1e12)
    return (dots - 1) - where if flip else where


def _draw_line(raster: np.ndarray, u: np.ndarray, v: np.ndarray) -> None:
    """Light the dots of a polyline already in dot coordinates (u sorted).

    Each dot column spans the lowest to the highest of its own samples and of
    the line where it crosses the column's edges, so neighbouring columns
    always touch and a step between two samples stays one connected stroke.
    """
    rows, cols = raster.shape
    first = max(int(np.rint(u[0])), -1)
    last = min(int(np.rint(u[-1])), cols)
    if last < first:
        return
    edges = np.clip(np.arange(first - 0.5, last + 1.0, 1.0), u[0], u[-1])
    at_edges = np.interp(edges, u, v)
    low = np.minimum(at_edges[:-1], at_edges[1:])
    high = np.maximum(at_edges[:-1], at_edges[1:])
    column = np.clip(np.rint(u).astype(np.int64), first, last) - first
    starts = np.flatnonzero(np.r_[True, np.diff(column) != 0])
    low[column[starts]] = np.minimum(low[column[starts]], np.minimum.reduceat(v, starts))
    high[column[starts]] = np.maximum(high[column[starts]], np.maximum.reduceat(v, starts))
    index = np.arange(first, last + 1)
    keep = (index >= 0) & (index < cols) & (high >= -0.5) & (low <= rows - 0.5)
    top = np.clip(np.rint(low[keep]), 0, rows - 1).astype(np.int64)
    bottom = np.clip(np.rint(high[keep]), 0, rows - 1).astype(np.int64)
    row = np.arange(rows)[:, None]
    raster[:, index[keep]] |= (row >= top) & (row <= bottom)


def _runs(ok: np.ndarray) -> list[slice]:
    """Slices of consecutive True values: the pieces of a line between gaps."""
    padded = np.r_[False, ok, False].astype(np.int8)
    change = np.flatnonzero(np.diff(padded))
    return [slice(a, b) for a, b in zip(change[::2], change[1::2])]


def _plot(chart: Chart, f: _Frame) -> list[list[str]]:
    dot_rows, dot_cols = 4 * f.plot_rows, 2 * f.plot_cols
    raster = np.zeros((dot_rows, dot_cols), dtype=bool)
    symbols: list[tuple[float, float, str]] = []
    for s in chart.series:
        x, y = np.asarray(s.x, float).ravel(), np.asarray(s.y, float).ravel()
        n = min(x.size, y.size)
        x, y = x[:n], y[:n]
        ok = finite(chart.x, x) & finite(chart.y, y)
        u = _dots(chart.x, np.where(ok, x, 1.0), f.x_range, dot_cols, False)
        v = _dots(chart.y, np.where(ok, y, 1.0), f.y_range, dot_rows, True)
        if s.mark:
            symbols += [(a, b, s.mark) for a, b in zip(u[ok], v[ok])]
            continue
        for piece in _runs(ok):
            order = np.argsort(u[piece], kind="stable")
            _draw_line(raster, u[piece][order], v[piece][order])
    codes = (raster.reshape(f.plot_rows, 4, f.plot_cols, 2) * _DOT_BITS[None, :, None, :]).sum(axis=(1, 3))
    cells = _GLYPHS[codes].tolist()
    for m in chart.markers:
        if _inside(chart.x, m.x, f.x_range):
            col = int(np.rint(_dots(chart.x, m.x, f.x_range, dot_cols, False))) // 2
            for r in range(f.plot_rows):
                if codes[r, col] == 0:
                    cells[r][col] = MARKER_COLUMN
            symbols.append((2 * col, 0.0, m.symbol))
    symbols += [(float(_dots(chart.x, s.x, f.x_range, dot_cols, False)),
                 float(_dots(chart.y, s.y, f.y_range, dot_rows, True)), s.symbol)
                for s in chart.spots if _inside(chart.x, s.x, f.x_range) and _inside(chart.y, s.y, f.y_range)]
    # Later symbols win a shared cell: series marks, then markers, then spots.
    for u_dot, v_dot, symbol in symbols:
        col, row = int(round(u_dot)) // 2, int(round(v_dot)) // 4
        if 0 <= col < f.plot_cols and 0 <= row < f.plot_rows:
            cells[row][col] = _fit(symbol, 1)
    return cells


def _x_label_row(chart: Chart, f: _Frame, width: int) -> str:
    row = [" "] * width
    start = f.gutter + 1
    free = 0  # first cell a label may use, so neighbours keep a space apart
    for value, text in f.x_ticks:
        col = start + int(np.rint(_dots(chart.x, value, f.x_range, 2 * f.plot_cols, False))) // 2
        n = _cells(text)
        left = min(max(col - (n - 1) // 2, 0), width - n)
        if left < free or n > width:
            continue
        row[left:left + n] = list(text) + [""] * (n - len(text))
        free = left + n + 1
    return "".join(row)


def render(chart: Chart, width: int, height: int, *, gutter: int = 0, right: int = 0) -> list[str]:
    """The chart as ``height`` rows of exactly ``width`` cells.

    ``gutter`` and ``right`` are least widths (cells) for the y labels and the
    space right of the plot; :func:`render_stack` uses them to line up the
    plot areas of charts drawn one above another.
    """
    width, height = max(int(width), 0), max(int(height), 0)
    f = _frame(chart, width, height, gutter, right) if height else None
    if f is None:
        return _blank(TOO_SMALL, width, height)
    heading = chart.title
    named = f"{heading} · {chart.y.label} against {chart.x.label}"
    rows = [_fit(named if _cells(named) <= width else heading, width)]
    tick_rows = {}
    for value, text in f.y_ticks:
        r = int(np.rint(_dots(chart.y, value, f.y_range, 4 * f.plot_rows, True))) // 4
        if 0 <= r < f.plot_rows and not tick_rows.keys() & {r - 1, r, r + 1}:
            tick_rows[r] = text
    pad = " " * f.right
    for r, cells in enumerate(_plot(chart, f)):
        label = tick_rows.get(r, "")
        axis = "┤" if r in tick_rows else "│"
        rows.append(" " * (f.gutter - _cells(label)) + label + axis + "".join(cells) + pad)
    if chart.x_ticks:
        rows.append(_x_label_row(chart, f, width))
    rows.extend(f.legend)
    return rows


def render_stack(charts, width: int, height: int) -> list[str]:
    """Charts one above another, sharing ``height`` and one plot-area edge.

    Charts above the last usually set ``x_ticks=False`` and share its x axis.
    When the height cannot give each chart a usable plot, only the first is
    drawn (with its x labels) rather than several "enlarge" notices.
    """
    charts = tuple(charts)
    width, height = max(int(width), 0), max(int(height), 0)
    if not charts:
        return _blank("", width, height)
    share = height // len(charts)
    if len(charts) == 1:
        return render(charts[0], width, height)
    if share < 5:
        return render(dataclasses.replace(charts[0], x_ticks=True), width, height)
    heights = [share + (height - share * len(charts) if i == 0 else 0) for i in range(len(charts))]
    frames = [_frame(c, width, h) for c, h in zip(charts, heights)]
    gutter = max((f.gutter for f in frames if f), default=0)
    right = max((f.right for f in frames if f), default=0)
    rows: list[str] = []
    for chart, h in zip(charts, heights):
        rows += render(chart, width, h, gutter=gutter, right=right)
    return rows
