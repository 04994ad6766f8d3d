"""Statistics of sampled figures: summaries, yield with its confidence
interval, and which part drives each figure's variance."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from model.design.spread_tables import Limit

#: Two-sided 95 % normal quantile, Φ⁻¹(0.975).
Z_95 = 1.959963984540054

#: Figures that exist whatever the region: the operating point and power.
#: Every other figure (gain, resistances, swing, distortion, corners) is a
#: small-signal or active-region figure, judged only on active builds.
DC_FIGURES = ("ic", "ib", "vbe", "vce", "vb", "ve", "vc", "p_transistor", "p_supply", "i_supply", "tj")


@dataclass(frozen=True)
class Summary:
    """One figure over the builds it exists for: count, mean, std (sample,
    n − 1), min, the 1st, 50th and 99th percentiles (numpy's linear
    interpolation) and max, in the figure's unit; NaN when count is 0."""

    count: int
    mean: float
    std: float
    min: float
    p01: float
    p50: float
    p99: float
    max: float

    def to_dict(self) -> dict:
        return {k: getattr(self, k) for k in ("mean", "std", "min", "p01", "p50", "p99", "max", "count")}


def usable(key: str, values: np.ndarray, active: np.ndarray) -> np.ndarray:
    """Rows where figure ``key`` is a number that means something: finite
    values of converged builds, active ones for an active-region figure."""
    ok = np.isfinite(values)
    return ok if key in DC_FIGURES else ok & active


def summarise(values: np.ndarray) -> Summary:
    """The Summary of the given values (already filtered to usable rows)."""
    n = int(values.size)
    if n == 0:
        return Summary(0, *(math.nan,) * 7)
    p01, p50, p99 = np.percentile(values, [1.0, 50.0, 99.0])
    std = float(np.std(values, ddof=1)) if n > 1 else 0.0
    return Summary(n, float(np.mean(values)), std, float(values.min()), float(p01), float(p50),
                   float(p99), float(values.max()))


def wilson(passed: int, total: int, z: float = Z_95) -> tuple[float, float]:
    """The Wilson score interval (low, high) for ``passed`` of ``total``
    (E. B. Wilson, J. Am. Stat. Assoc. 22 (1927) 209); (0, 1) when total is 0."""
    if total == 0:
        return 0.0, 1.0
    p = passed / total
    z2n = z * z / total
    centre = (p + z2n / 2.0) / (1.0 + z2n)
    half = z / (1.0 + z2n) * math.sqrt(p * (1.0 - p) / total + z2n / (4.0 * total))
    return max(0.0, centre - half), min(1.0, centre + half)


def in_limit(limit: Limit, values: np.ndarray) -> np.ndarray:
    """Per row, whether the figure lies inside the limit (NaN never does)."""
    with np.errstate(divide="ignore", invalid="ignore"):
        x = 20.0 * np.log10(np.abs(values)) if limit.db else values
    low, high = limit.bounds()
    return (x >= low) & (x <= high)


def passes(limit: Limit, values: np.ndarray, active: np.ndarray) -> np.ndarray:
    """Per build, whether it meets ``limit``: inside it, and active if the
    figure needs the active region; an unsolved build (NaN) fails."""
    ok = in_limit(limit, values)
    return ok if limit.key in DC_FIGURES else ok & active


@dataclass(frozen=True)
class Yield:
    """A passing fraction and its 95 % Wilson interval."""

    passed: int
    total: int

    @property
    def value(self) -> float:
        return self.passed / self.total if self.total else math.nan

    @property
    def interval(self) -> tuple[float, float]:
        return wilson(self.passed, self.total)

    def to_dict(self) -> dict:
        low, high = self.interval
        return {"value": self.value, "low": low, "high": high, "passed": self.passed, "total": self.total}


def drivers(columns: np.ndarray, values: np.ndarray) -> tuple[np.ndarray, float]:
    """Each column's first-order share of the variance of ``values``, from a
    least-squares straight-line fit on the samples, and the fit's R².

    With independent inputs a linear model's variance is Σ bᵢ² var(xᵢ), so
    column i's share is bᵢ² var(xᵢ) over that sum (first-order propagation
    of variance; JCGM 100:2008, eq. 10).  R² says how much of the actual
    variance the straight-line model explains.
    """
    n, k = columns.shape
    if n < k + 2 or k == 0:
        return np.full(k, math.nan), math.nan
    scale = columns.std(axis=0)
    scale = np.where(scale > 0, scale, 1.0)
    x = (columns - columns.mean(axis=0)) / scale
    y = values - values.mean()
    coef, *_ = np.linalg.lstsq(x, y, rcond=None)
    parts = coef**2 * x.var(axis=0)
    total = float(parts.sum())
    explained = float(np.var(x @ coef))
    vy = float(np.var(y))
    r2 = explained / vy if vy > 0 else math.nan
    return (parts / total if total > 0 else np.full(k, math.nan)), r2
