"""The text chart renderer (tui.chart) and the Picture widget showing it.

Positions are checked against where the axis mapping must put them (a
linear or log10 map of the value onto the dot columns), measured from the
rendered text with an independent braille decoder, so a misplaced tick, an
off-by-one raster or a wrapped line fails here.
"""

from __future__ import annotations

import dataclasses
import math
import re

import numpy as np
import pytest
from rich.cells import cell_len
from textual.app import App, ComposeResult

from model.design.units import format_si, parse_value
from tui.chart import TOO_SMALL, Axis, Chart, Marker, Series, Spot, render, render_stack
from tui.widgets.picture import EMPTY, Picture

# Braille dot n sits at (row, column) in its cell; bit n-1 lights it
# (Unicode Standard, Braille Patterns block U+2800–U+28FF).
DOT_PLACES = {0: (0, 0), 1: (1, 0), 2: (2, 0), 3: (0, 1), 4: (1, 1), 5: (2, 1), 6: (3, 0), 7: (3, 1)}


def is_braille(ch: str) -> bool:
    return 0x2800 < ord(ch) <= 0x28FF


def plot_rows(rows: list[str]) -> tuple[int, list[str]]:
    """The axis column and the rows of the plot area (those the y axis runs past)."""
    axis = next(row.index(ch) for row in rows for ch in "┤│" if ch in row)
    return axis, [row for row in rows if len(row) > axis and row[axis] in "┤│"]


def lit_dots(rows: list[str]) -> tuple[int, np.ndarray]:
    """The axis column and every lit dot as (dot row, dot column from the
    plot's left edge)."""
    axis, plot = plot_rows(rows)
    dots = []
    for r, row in enumerate(plot):
        for c, ch in enumerate(row[axis + 1:]):
            if is_braille(ch):
                bits = ord(ch) - 0x2800
                dots += [(4 * r + dr, 2 * c + dc) for n, (dr, dc) in DOT_PLACES.items() if bits >> n & 1]
    return axis, np.array(dots, dtype=int).reshape(-1, 2)


def connected(dots: np.ndarray) -> bool:
    """Whether the lit dots form one stroke (each touches the next, diagonals count)."""
    todo = {tuple(d) for d in dots}
    if not todo:
        return False
    stack = [todo.pop()]
    while stack:
        r, c = stack.pop()
        for dr in (-1, 0, 1):
            for dc in (-1, 0, 1):
                if (r + dr, c + dc) in todo:
                    todo.remove((r + dr, c + dc))
                    stack.append((r + dr, c + dc))
    return not todo


def label_centre(row: str, text: str) -> int:
    """Column of the middle cell of ``text`` standing alone in ``row``."""
    found = re.search(rf"(?<!\S){re.escape(text)}(?!\S)", row)
    assert found, f"{text!r} not in {row!r}"
    return found.start() + (len(text) - 1) // 2


def unit_square(*series, **extra) -> Chart:
    return Chart("square", Axis("x", "V", lo=0.0, hi=1.0), Axis("y", "V", lo=0.0, hi=1.0), series, **extra)


def bode(**extra) -> Chart:
    f = np.logspace(0, 6, 400)
    gain = 20 * np.log10(np.abs(100 / (1 + 8.5 / (1j * f)) / (1 + 1j * f / 2.1e6)))
    return Chart("Bode magnitude", Axis("f", "Hz", log=True), Axis("gain", "dB"),
                 (Series(f, gain, "gain"),), (Marker(8.5, "L", "f_low"), Marker(2.1e5, "H", "f_high")),
                 (Spot(1e3, 40.0, "S", "signal"),), **extra)


# -- size ---------------------------------------------------------------------


SIZES = [(60, 18), (80, 24), (120, 40), (30, 8), (20, 6), (12, 4), (8, 3), (5, 2), (1, 1), (3, 0), (0, 3), (0, 0)]


@pytest.mark.parametrize("width, height", SIZES)
def test_every_row_has_exactly_the_cells_asked_for(width, height):
    flat = unit_square(Series(np.array([0.2, 0.8]), np.array([0.5, 0.5]), "flat", mark="o"))
    for rows in (render(bode(), width, height), render(flat, width, height),
                 render_stack((bode(x_ticks=False), bode()), width, height)):
        assert len(rows) == height
        assert [cell_len(row) for row in rows] == [width] * height


def test_a_picture_too_small_for_a_plot_says_so():
    rows = render(bode(), 40, 3)
    assert rows[0].startswith(TOO_SMALL)
    assert not any(is_braille(ch) for row in rows for ch in row)


# -- geometry -----------------------------------------------------------------


def test_the_line_y_equals_x_runs_along_the_diagonal():
    x = np.linspace(0, 1, 200)
    rows = render(unit_square(Series(x, x, "y=x")), 50, 20)
    _, dots = lit_dots(rows)
    height = 4 * len(plot_rows(rows)[1])
    width = dots[:, 1].max() + 1
    assert width >= 2 * (50 - 10)  # the line reaches across nearly all the plot width
    expected_row = (height - 1) * (1 - dots[:, 1] / (width - 1))
    assert np.abs(dots[:, 0] - expected_row).max() <= 2  # dots: rounding plus the joining span
    assert set(dots[:, 1]) == set(range(width))  # no column left dark
    assert {0, height - 1} <= set(dots[:, 0])  # both corners
    assert connected(dots)


def test_decade_ticks_on_a_log_axis_sit_where_log10_puts_them():
    f = np.logspace(0, 6, 400)
    chart = Chart("log", Axis("f", "Hz", log=True, lo=1.0, hi=1e6), Axis("y", "V", lo=0.0, hi=1.0),
                  (Series(f, np.zeros_like(f), "floor"),))
    rows = render(chart, 80, 20)
    axis, dots = lit_dots(rows)
    span = dots[:, 1].max()  # dot columns across 1 Hz … 1 MHz
    tick_row = rows[1 + len(plot_rows(rows)[1])]
    # format_si with one significant digit is what the labels must read.
    for hertz, text in ((1, "1 Hz"), (1e3, "1 kHz"), (1e6, "1 MHz")):
        assert format_si(hertz, "Hz", 1) == text
        column = axis + 1 + round(math.log10(hertz) / 6 * span) // 2
        assert abs(label_centre(tick_row, text) - column) <= 1


def test_linear_ticks_step_by_one_two_or_five():
    chart = Chart("lin", Axis("x", "A", lo=0.0, hi=3e-3), Axis("y", "V", lo=-7.0, hi=12.0))
    rows = render(chart, 70, 20)
    axis, plot = plot_rows(rows)
    y_labels = [row[:axis].strip() for row in plot if row[axis] == "┤"]
    x_labels = re.split(r"\s{1,}(?=-?\d)", rows[1 + len(plot)].strip())
    for labels, unit in ((y_labels, "V"), (x_labels, "A")):
        values = sorted(parse_value(text, unit) for text in labels)
        assert len(values) >= 3, labels
        steps = np.diff(values)
        np.testing.assert_allclose(steps, steps[0], rtol=1e-9)
        mantissa = steps[0] / 10 ** math.floor(math.log10(steps[0]))
        assert round(mantissa, 9) in (1, 2, 5), labels


def test_a_marker_stands_in_its_column_and_is_explained():
    chart = Chart("m", Axis("t", "s", lo=0.0, hi=10.0), Axis("y", "V", lo=0.0, hi=1.0),
                  (Series(np.array([0.0, 10.0]), np.array([0.0, 0.0]), "floor"),),
                  (Marker(2.5, "L", "f_low"),))
    rows = render(chart, 60, 16)
    axis, dots = lit_dots(rows)
    _, plot = plot_rows(rows)
    column = axis + 1 + round(2.5 / 10 * dots[:, 1].max()) // 2
    assert abs(plot[0].index("L") - column) <= 1
    dotted = [row[plot[0].index("L")] for row in plot[1:-1]]
    assert set(dotted) == {"┊"}  # the floor line takes the bottom row
    assert f"L f_low {format_si(2.5, 's')}" in rows[-1]


def test_a_spot_symbol_takes_its_cell():
    rows = render(unit_square(Series(np.array([0.0, 1.0]), np.array([1.0, 1.0]), "roof"),
                              spots=(Spot(0.5, 0.25, "Q", "Q-point"),)), 41, 20)
    axis, dots = lit_dots(rows)
    _, plot = plot_rows(rows)
    height, width = 4 * len(plot), dots[:, 1].max() + 1
    row = round((1 - 0.25) * (height - 1)) // 4
    column = axis + 1 + round(0.5 * (width - 1)) // 2
    assert abs(plot[row].index("Q") - column) <= 1
    assert sum(r.count("Q") for r in plot) == 1
    assert "Q Q-point" in rows[-1]


# -- data ---------------------------------------------------------------------


@pytest.mark.parametrize("bad", [math.nan, math.inf])
def test_non_finite_values_leave_a_gap(bad):
    x = np.linspace(0, 1, 201)
    y = np.full_like(x, 0.5)
    y[80:121] = bad  # x from 0.4 to 0.6
    _, dots = lit_dots(render(unit_square(Series(x, y, "gappy")), 60, 12))
    width = dots[:, 1].max() + 1
    lit = set(dots[:, 1])
    assert round(0.5 * (width - 1)) not in lit
    assert {round(0.3 * (width - 1)), round(0.7 * (width - 1))} <= lit


def test_a_step_between_two_samples_stays_one_stroke():
    x = np.arange(40.0)
    y = (x >= 20).astype(float)
    chart = Chart("step", Axis("t", "s", lo=0.0, hi=39.0), Axis("v", "V", lo=0.0, hi=1.0), (Series(x, y, "step"),))
    rows = render(chart, 50, 14)
    _, dots = lit_dots(rows)
    height = 4 * len(plot_rows(rows)[1])
    assert connected(dots)
    assert set(dots[:, 0]) == set(range(height))  # the riser crosses every dot row


def test_data_beyond_the_axis_is_clipped_not_wrapped():
    x = np.linspace(0, 1, 300)
    chart = Chart("clip", Axis("x", "V", lo=0.0, hi=1.0), Axis("y", "V", lo=0.0, hi=0.5), (Series(x, x, "y=x"),))
    rows = render(chart, 50, 14)
    _, dots = lit_dots(rows)
    width = 2 * (50 - plot_rows(rows)[0] - 1)
    beyond = dots[dots[:, 1] > 0.6 * width]
    assert beyond.size == 0  # y > 0.5 there: drawn nowhere, neither at the top nor wrapped to the bottom


@pytest.mark.parametrize("series", [
    Series(np.arange(10.0), np.full(10, 3.3), "constant"),
    Series(np.array([]), np.array([]), "empty"),
    Series(np.array([2.0]), np.array([5.0]), "one point"),
    Series(np.array([np.nan, np.nan]), np.array([1.0, np.nan]), "all gaps"),
])
def test_degenerate_data_does_not_raise(series):
    for y_axis in (Axis("y", "V"), Axis("y", "V", lo=2.0, hi=2.0), Axis("y", "A", log=True)):
        chart = Chart("degenerate", Axis("x", "s"), y_axis, (series,))
        rows = render(chart, 40, 10)
        assert len(rows) == 10 and all(cell_len(r) == 40 for r in rows)
        assert rows[0].startswith("degenerate")


@pytest.mark.parametrize("x_axis, y_axis, values", [
    (Axis("x", "V", lo=0.0, hi=1.0), Axis("y", "V", lo=0.0, hi=1.0), [0.0, 0.5, 1e308]),
    (Axis("x", "V"), Axis("y", "V"), [-1e308, 1e308]),
    (Axis("x", "V", log=True), Axis("y", "V", log=True), [1e-300, 1e300]),
    (Axis("x", "V", lo=5.0, hi=1.0), Axis("y", "V", lo=math.inf, hi=math.nan), [1.0, 2.0, 3.0]),
    (Axis("x", "V"), Axis("y", "V"), [1e-20, 1.0000000001e-20]),
])
def test_extreme_values_and_odd_ranges_neither_raise_nor_warn(x_axis, y_axis, values):
    # pytest turns warnings into errors, so an overflow in the scaling fails here.
    values = np.array(values)
    chart = Chart("extreme", x_axis, y_axis, (Series(values, values, "s"),),
                  (Marker(math.nan, "M", "nowhere"),), (Spot(math.inf, 0.0, "S", "far"),))
    rows = render(chart, 50, 9)
    assert [cell_len(r) for r in rows] == [50] * 9
    axis, plot = plot_rows(rows)
    labels = [row[:axis].strip() for row in plot if row[axis] == "┤"]
    assert len(labels) == len(set(labels))  # neighbouring ticks never read the same


def test_a_constant_line_is_drawn_on_an_axis_with_some_span():
    rows = render(Chart("flat", Axis("x", "s"), Axis("y", "V"), (Series(np.arange(5.0), np.full(5, 3.3), "f"),)), 40, 10)
    axis, dots = lit_dots(rows)
    assert dots.size and len(set(dots[:, 0])) <= 2
    assert sum(row[axis] == "┤" for row in plot_rows(rows)[1]) >= 2


def test_the_legend_names_every_series_marker_and_spot_in_words():
    x = np.linspace(1, 2, 20)
    chart = Chart("legend", Axis("x", "V"), Axis("y", "A"),
                  (Series(x, x, "load line"), Series(x, 2 * x, "measured", mark="o"), Series(x, -x, "hand estimate")),
                  (Marker(1.5, "C", "corner"),), (Spot(1.2, 1.2, "Q", "quiescent"),))
    legend = render(chart, 120, 20)[-1]
    for key in ("─ load line", "o measured", "─ hand estimate", "C corner", "Q quiescent"):
        assert key in legend


def test_stacked_charts_share_one_plot_edge_and_the_lower_x_labels():
    rows = render_stack((bode(x_ticks=False), bode()), 70, 30)
    top, bottom = rows[:15], rows[15:]
    assert plot_rows(top)[0] == plot_rows(bottom)[0]
    assert "1 kHz" not in "".join(top) and "1 kHz" in "".join(bottom)


# -- the widget ---------------------------------------------------------------


class PictureApp(App):
    def compose(self) -> ComposeResult:
        yield Picture(id="picture")


async def test_the_picture_draws_what_show_gives_it(monkeypatch):
    import tui.widgets.picture as picture_module

    made = []
    real = picture_module.render_stack

    def counting(*args):
        made.append(1)
        return real(*args)

    monkeypatch.setattr(picture_module, "render_stack", counting)
    app = PictureApp()
    async with app.run_test(size=(60, 20)) as pilot:
        picture = app.query_one(Picture)
        assert not picture.can_focus
        assert picture.render_line(0).text.startswith(EMPTY)
        picture.show((bode(),))
        await pilot.pause()
        text = [picture.render_line(y).text for y in range(picture.size.height)]
        assert picture.size == (60, 20)
        assert text[0].startswith("Bode magnitude")
        assert any(is_braille(ch) for line in text for ch in line)
        assert all(cell_len(line) == 60 for line in text)
        assert made == [1]  # repainting reuses the rendered rows

        # Lines drawn elsewhere (the worker) at this size are used as they are.
        drawn = real((bode(),), 60, 20)
        picture.show((bode(),), rendered=(60, 20, drawn))
        await pilot.pause()
        assert [picture.render_line(y).text for y in range(20)] == drawn and made == [1]
        # At another size they are not: the widget draws its charts itself.
        picture.show((bode(),), rendered=(50, 20, real((bode(),), 50, 20)))
        await pilot.pause()
        assert all(cell_len(picture.render_line(y).text) == 60 for y in range(20)) and made == [1, 1]

        picture.show((bode(x_ticks=False), bode()))
        await pilot.pause()
        text = "\n".join(picture.render_line(y).text for y in range(picture.size.height))
        assert text.count("Bode magnitude") == 2 and text.count("1 MHz") == 1


def test_markers_can_be_left_out_of_the_legend_but_stay_drawn():
    """A chart stacked under one that already explains its markers keeps the
    marker columns and symbols but does not repeat their words."""
    x = np.logspace(0, 6, 200)
    chart = Chart("c", Axis("f", "Hz", log=True), Axis("g", "dB"),
                  series=(Series(x, np.log10(x), "gain"),), markers=(Marker(1e3, "L", "f_low"),))
    shown = render(chart, 60, 16)
    quiet = render(dataclasses.replace(chart, marker_legend=False), 60, 16)
    assert any("L f_low" in row for row in shown)
    assert not any("f_low" in row for row in quiet)
    assert sum(row.count("┊") for row in quiet) > 3 and any("L" in row for row in quiet[1:3])
