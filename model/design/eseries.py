"""IEC 60063 preferred-number series (E6 to E96) and moving along them.

The values are a copy of the standard's tables, not a formula: eight E24
values (2.7, 3.0, 3.3, 3.6, 3.9, 4.3, 4.7, 8.2) differ from rounding
10**(i/24), so only the table gives the parts one can actually buy.

Results are built from the table's integer figures through decimal text, so
they are clean floats (``4700.0``, never ``4699.999999999999``).
"""

from __future__ import annotations

import bisect
import math
import numbers
import operator
from decimal import Decimal

from model.errors import UnitError

__all__ = ["SERIES", "TOLERANCE", "series_names", "nearest", "step", "step_decade"]

# Significant figures of each series and its values for one decade, as
# printed in IEC 60063.
_TABLES = {
    "E6": (2, "10 15 22 33 47 68"),
    "E12": (2, "10 12 15 18 22 27 33 39 47 56 68 82"),
    "E24": (2, "10 11 12 13 15 16 18 20 22 24 27 30 33 36 39 43 47 51 56 62 68 75 82 91"),
    "E48": (3, "100 105 110 115 121 127 133 140 147 154 162 169 178 187 196 205 215 226"
               " 237 249 261 274 287 301 316 332 348 365 383 402 422 442 464 487 511 536"
               " 562 590 619 649 681 715 750 787 825 866 909 953"),
    "E96": (3, "100 102 105 107 110 113 115 118 121 124 127 130 133 137 140 143 147 150"
               " 154 158 162 165 169 174 178 182 187 191 196 200 205 210 215 221 226 232"
               " 237 243 249 255 261 267 274 280 287 294 301 309 316 324 332 340 348 357"
               " 365 374 383 392 402 412 422 432 442 453 464 475 487 499 511 523 536 549"
               " 562 576 590 604 619 634 649 665 681 698 715 732 750 768 787 806 825 845"
               " 866 887 909 931 953 976"),
}
_FIGURES = {name: figures for name, (figures, _) in _TABLES.items()}
_SIGNIFICANDS = {name: tuple(int(v) for v in text.split()) for name, (_, text) in _TABLES.items()}

#: Each series' values for one decade as mantissas in [1, 10).
SERIES: dict[str, tuple[float, ...]] = {
    name: tuple(v / 10 ** (_FIGURES[name] - 1) for v in values)
    for name, values in _SIGNIFICANDS.items()
}

#: Tolerance conventionally sold with each series, as a fraction (common
#: practice, not part of the IEC 60063 tables).
TOLERANCE: dict[str, float] = {"E6": 0.20, "E12": 0.10, "E24": 0.05, "E48": 0.02, "E96": 0.01}

# Relative distance within which a value counts as already on the series, so
# that a computed 4699.9999999 is treated as 4.7k.
_ON_SERIES_RTOL = 1e-9
# Values accepted; far inside the float range so a decade of margin each side
# never meets zero or infinity (no component comes near either end).
_RANGE = (1e-300, 1e300)


def series_names() -> tuple[str, ...]:
    """Names of the known series, coarsest first."""
    return tuple(_TABLES)


def nearest(value: float, series: str = "E24") -> float:
    """The series value nearest to ``value`` in ratio (log distance).

    Parameters
    ----------
    value : float
        Positive, finite value in any unit (ohm, farad, ...).
    series : str
        Series name, e.g. ``"E24"`` (case does not matter).

    Returns
    -------
    float
        The nearest series value, in the same unit; it may lie in the next
        decade (9.6k in E24 gives 10k). An exact tie goes to the lower value.
    """
    name = _series_key(series)
    value = _checked(value)
    index, on_series = _floor_index(name, value)
    if on_series:
        return _ladder(name, index)
    below, above = _ladder(name, index), _ladder(name, index + 1)
    # Comparing ratios is comparing log distances without the logarithms.
    return below if value / below <= above / value else above


def step(value: float, series: str = "E24", n: int = 1) -> float:
    """The series value ``n`` positions above (or, for ``n < 0``, below) ``value``.

    Parameters
    ----------
    value : float
        Positive, finite value in any unit.
    series : str
        Series name, e.g. ``"E24"``.
    n : int
        Positions to move. From a value between two series values, ``+1`` is
        the next value above it and ``-1`` the next below; ``0`` returns
        :func:`nearest`. Steps cross decades (E24: 9.1k + 1 is 10k).

    Returns
    -------
    float
        The series value, in the same unit.
    """
    name = _series_key(series)
    n = operator.index(n)
    if n == 0:
        return nearest(value, name)
    index, on_series = _floor_index(name, _checked(value))
    # Off the series the floor value already is one step down.
    target = index + n + (1 if n < 0 and not on_series else 0)
    return _checked_result(value, _ladder(name, target))


def step_decade(value: float, n: int = 1) -> float:
    """``value`` times ``10**n``, as a clean float (``4.7e-9`` up one is ``4.7e-8``).

    Parameters
    ----------
    value : float
        Positive, finite value in any unit.
    n : int
        Decades to move, negative for down.

    Returns
    -------
    float
        The shifted value, in the same unit.
    """
    n = operator.index(n)
    # Shifting the shortest decimal text avoids 4.7e-9 * 10 = 4.700000000000001e-08.
    return _checked_result(value, float(Decimal(repr(float(_checked(value)))).scaleb(n)))


def _series_key(series: str) -> str:
    key = series.upper() if isinstance(series, str) else series
    if key not in _TABLES:
        raise UnitError(series, f"unknown series; known series are {', '.join(_TABLES)}")
    return key


def _checked(value: float) -> float:
    if (isinstance(value, bool) or not isinstance(value, numbers.Real)
            or not (math.isfinite(value) and value > 0)):
        raise UnitError(value, "must be a positive, finite value")
    if not _RANGE[0] <= value <= _RANGE[1]:
        raise UnitError(value, f"outside the supported range {_RANGE[0]:g} to {_RANGE[1]:g}")
    return float(value)


def _checked_result(value: float, result: float) -> float:
    if not (math.isfinite(result) and result > 0):
        raise UnitError(value, "the step leaves the range of floating-point numbers")
    return result


def _ladder(name: str, index: int) -> float:
    """Series value number ``index`` counted from 1 (index 0) across all decades."""
    decade, position = divmod(index, len(_SIGNIFICANDS[name]))
    significand = _SIGNIFICANDS[name][position]
    return float(f"{significand}e{decade - _FIGURES[name] + 1}")


def _floor_index(name: str, value: float) -> tuple[int, bool]:
    """Ladder index of the largest series value not above ``value``, and
    whether ``value`` is (within rounding) that series value."""
    count = len(_SIGNIFICANDS[name])
    # One decade of margin each side absorbs log10 rounding at decade edges.
    first = (math.floor(math.log10(value)) - 1) * count
    rungs = [_ladder(name, i) for i in range(first, first + 3 * count)]
    below = bisect.bisect_right(rungs, value) - 1
    if math.isclose(rungs[below + 1], value, rel_tol=_ON_SERIES_RTOL):
        below += 1
    return first + below, math.isclose(rungs[below], value, rel_tol=_ON_SERIES_RTOL)
