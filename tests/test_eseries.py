"""model.design.eseries: the IEC 60063 preferred-number series and stepping along them.

Sources: the series tables are IEC 60063 (E6 to E96). The tolerance paired
with each series is common practice, not part of the standard's tables.
"""

import math
from decimal import Decimal

import pytest
from hypothesis import given
from hypothesis import strategies as st

from model.design.eseries import SERIES, TOLERANCE, nearest, series_names, step, step_decade
from model.errors import UnitError

# IEC 60063: one decade of each series, as the standard prints it.
IEC_60063 = {
    "E6": "10 15 22 33 47 68",
    "E12": "10 12 15 18 22 27 33 39 47 56 68 82",
    "E24": "10 11 12 13 15 16 18 20 22 24 27 30 33 36 39 43 47 51 56 62 68 75 82 91",
    "E48": "100 105 110 115 121 127 133 140 147 154 162 169 178 187 196 205 215 226 237"
           " 249 261 274 287 301 316 332 348 365 383 402 422 442 464 487 511 536 562 590"
           " 619 649 681 715 750 787 825 866 909 953",
    "E96": "100 102 105 107 110 113 115 118 121 124 127 130 133 137 140 143 147 150 154"
           " 158 162 165 169 174 178 182 187 191 196 200 205 210 215 221 226 232 237 243"
           " 249 255 261 267 274 280 287 294 301 309 316 324 332 340 348 357 365 374 383"
           " 392 402 412 422 432 442 453 464 475 487 499 511 523 536 549 562 576 590 604"
           " 619 634 649 665 681 698 715 732 750 768 787 806 825 845 866 887 909 931 953 976",
}
REL = 1e-12  # results come from decimal text, so only float rounding remains


def _mantissas(name):
    figures = IEC_60063[name].split()
    return [int(f) / 10 ** (len(f) - 1) for f in figures]


# --- tables ------------------------------------------------------------------

def test_series_names_coarsest_first():
    assert series_names() == ("E6", "E12", "E24", "E48", "E96")
    assert set(SERIES) == set(series_names()) == set(TOLERANCE)


@pytest.mark.parametrize("name", list(IEC_60063))
def test_tables_match_iec_60063(name):
    # IEC 60063: the series tables, normalised to mantissas in [1, 10).
    expected = _mantissas(name)
    count = int(name[1:])
    assert len(SERIES[name]) == count  # IEC 60063: En has n values per decade
    assert list(SERIES[name]) == pytest.approx(expected, rel=REL)
    assert all(1 <= m < 10 for m in SERIES[name])
    assert list(SERIES[name]) == sorted(SERIES[name])


@pytest.mark.parametrize("coarse, fine", [("E6", "E12"), ("E12", "E24"), ("E48", "E96")])
def test_each_series_is_every_other_value_of_the_next(coarse, fine):
    # IEC 60063: each series takes every second value of the next finer one.
    assert list(SERIES[coarse]) == pytest.approx(SERIES[fine][::2], rel=REL)


def test_e24_has_exactly_eight_irregular_values():
    # IEC 60063 (from memory): E24 keeps historical values that depart from
    # 10**(i/24) rounded to two figures; this is why the module uses a table.
    irregular = [
        m for i, m in enumerate(SERIES["E24"]) if not math.isclose(m, round(10 ** (i / 24), 1))
    ]
    assert irregular == pytest.approx([2.7, 3.0, 3.3, 3.6, 3.9, 4.3, 4.7, 8.2], rel=REL)


@pytest.mark.parametrize("name", ["E48", "E96"])
def test_three_figure_series_follow_the_geometric_rule(name):
    # IEC 60063 (from memory): E48 and E96 are 10**(i/n) rounded to three figures.
    count = len(SERIES[name])
    ideal = [round(10 ** (i / count), 2) for i in range(count)]
    assert list(SERIES[name]) == pytest.approx(ideal, rel=REL)


def test_conventional_tolerances():
    # Common practice (from memory): E6 20 %, E12 10 %, E24 5 %, E48 2 %, E96 1 %.
    expected = {"E6": 0.20, "E12": 0.10, "E24": 0.05, "E48": 0.02, "E96": 0.01}
    for name, tolerance in expected.items():
        assert TOLERANCE[name] == pytest.approx(tolerance, rel=REL)


# --- nearest -----------------------------------------------------------------

@pytest.mark.parametrize(
    "value, series, expected",
    [
        # Expected values are IEC 60063 table entries; picks are by log ratio.
        (4700, "E24", 4700.0),
        (4699.9999999, "E24", 4700.0),  # computed values snap to the series
        (4900, "E12", 4700.0),  # ln(4900/4700)=0.042 < ln(5600/4900)=0.134
        (9600, "E24", 10000.0),  # ln(9600/9100)=0.053 > ln(10000/9600)=0.041
        (9400, "E24", 9100.0),  # ln(9400/9100)=0.032 < ln(10000/9400)=0.062
        (1.04, "E24", 1.0),
        (0.0097, "E6", 0.01),
        (123e-9, "E96", 124e-9),
        (8.3e-12, "E6", 10e-12),  # ln(8.3/6.8)=0.199 > ln(10/8.3)=0.186
        (2.6e6, "e12", 2.7e6),  # case of the series name does not matter
    ],
)
def test_nearest_examples(value, series, expected):
    assert nearest(value, series) == pytest.approx(expected, rel=REL)


@pytest.mark.parametrize("value", [0, -1.0, math.inf, -math.inf, math.nan, True, "4k7", None])
def test_nearest_refuses_bad_values(value):
    with pytest.raises(UnitError, match="must be a positive, finite value") as caught:
        nearest(value)
    assert repr(value) in str(caught.value)


def test_values_far_outside_any_circuit_are_refused():
    with pytest.raises(UnitError, match="outside the supported range"):
        nearest(1e-310)


@pytest.mark.parametrize("series", ["E3", "E192", "", "24"])
def test_unknown_series_names_the_known_ones(series):
    with pytest.raises(UnitError) as caught:
        nearest(1000, series)
    message = str(caught.value)
    assert repr(series) in message
    assert all(name in message for name in ("E6", "E12", "E24", "E48", "E96"))


# --- step and step_decade ----------------------------------------------------

@pytest.mark.parametrize(
    "value, n, expected",
    [
        # IEC 60063 E24 neighbours.
        (4700, 1, 5100.0),
        (4700, -1, 4300.0),
        (4700, 2, 5600.0),
        (9100, 1, 10000.0),  # crosses into the next decade
        (10000, -1, 9100.0),  # and back
        (4700, 24, 47000.0),  # 24 steps is one decade in E24
        (4700, -24, 470.0),
        (4800, 1, 5100.0),  # off the series: next value strictly above
        (4800, -1, 4700.0),  # off the series: next value strictly below
        (4800, 0, 4700.0),  # zero steps snaps to the nearest
        (9500, 1, 10000.0),
        (9500, -1, 9100.0),
        (1e-9, -1, 9.1e-10),
    ],
)
def test_step_e24(value, n, expected):
    assert step(value, "E24", n) == pytest.approx(expected, rel=REL)


def test_step_results_are_clean_floats():
    # The shortest repr shows only the series' figures, never 4699.999999.
    assert repr(step(4300, "E24")) == "4700.0"
    assert repr(step(9.1e-9, "E24")) == "1e-08"
    assert repr(step(4.64e-9, "E96")) == "4.75e-09"
    assert repr(step_decade(4.7e-9)) == "4.7e-08"


def test_step_default_series_and_count():
    assert step(4700) == pytest.approx(5100.0, rel=REL)  # IEC 60063 E24


@pytest.mark.parametrize("n", [1.0, 0.5, "1"])
def test_step_count_must_be_an_integer(n):
    with pytest.raises(TypeError):
        step(4700, "E24", n)


def test_step_refuses_bad_values():
    with pytest.raises(UnitError, match="positive, finite"):
        step(-4700)
    with pytest.raises(UnitError, match="positive, finite"):
        step_decade(0)


def test_step_that_leaves_the_float_range_is_refused():
    with pytest.raises(UnitError, match="range of floating-point numbers"):
        step(1e300, "E6", 60)


@pytest.mark.parametrize(
    "value, n, expected", [(4700, 1, 47e3), (4700, -2, 47.0), (4.7e-9, 1, 4.7e-8), (3.3, 0, 3.3)]
)
def test_step_decade(value, n, expected):
    assert step_decade(value, n) == pytest.approx(expected, rel=REL)


# --- properties --------------------------------------------------------------

names = st.sampled_from(list(IEC_60063))
decades = st.integers(min_value=-15, max_value=12)
positive = st.floats(min_value=1e-15, max_value=1e12)


@st.composite
def on_series(draw):
    """A name and one of its IEC 60063 values in some decade."""
    name = draw(names)
    mantissa = draw(st.sampled_from(_mantissas(name)))
    return name, float(Decimal(repr(mantissa)).scaleb(draw(decades)))


def _is_on_series(value, name):
    decade = math.floor(math.log10(value))
    return any(
        math.isclose(value, m * 10.0**d, rel_tol=1e-9)
        for m in _mantissas(name)
        for d in (decade - 1, decade, decade + 1)
    )


def _significant_figures(value):
    return len(Decimal(repr(value)).normalize().as_tuple().digits)


@given(on_series(), st.integers(min_value=-100, max_value=100))
def test_step_up_then_down_returns(start, n):
    name, value = start
    assert step(step(value, name, n), name, -n) == pytest.approx(value, rel=REL)


@given(on_series())
def test_on_series_values_are_their_own_nearest(start):
    name, value = start
    assert nearest(value, name) == pytest.approx(value, rel=REL)


@given(positive, names)
def test_nearest_is_on_series_idempotent_and_nearest(value, name):
    result = nearest(value, name)
    assert _is_on_series(result, name)
    assert nearest(result, name) == pytest.approx(result, rel=REL)
    assert _significant_figures(result) <= (2 if name in ("E6", "E12", "E24") else 3)
    # No neighbour of the result is closer in ratio.
    distance = abs(math.log(result / value))
    for neighbour in (step(result, name, 1), step(result, name, -1)):
        assert distance <= abs(math.log(neighbour / value)) + 1e-12


@given(positive, names)
def test_one_step_either_way_brackets_any_value(value, name):
    up, down = step(value, name, 1), step(value, name, -1)
    assert down < value < up
    assert _is_on_series(up, name) and _is_on_series(down, name)
    snapped = nearest(value, name)
    on = math.isclose(snapped, value, rel_tol=1e-9)
    # Nothing of the series lies strictly between down and up except the
    # value itself (read as its series value when within rounding of it).
    assert step(down, name, 1) == pytest.approx(snapped if on else up, rel=REL)


@given(names, decades)
def test_one_decade_of_steps_visits_every_value(name, decade):
    start = float(Decimal(1).scaleb(decade))
    visited = [start]
    for _ in range(len(SERIES[name])):
        visited.append(step(visited[-1], name))
    scale = 10.0 ** decade
    # IEC 60063: one decade of the series, then the first value of the next.
    assert [v / scale for v in visited] == pytest.approx(_mantissas(name) + [10.0], rel=REL)
