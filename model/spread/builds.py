"""Builds of one design: the parts, β, i_s and ambient drawn within the
design's ``[tolerance]``, as arrays the batched engine takes.

Every quantity with a spread is one column ("stage.rc", "transistor.beta",
"environment.ambient", …), drawn independently.  A uniform draw spans the
tolerance or range; a normal one has the tolerance or the range's ends at
±3σ and is truncated there (redrawn), so no build leaves the box the file
declares, as parts outside their tolerance are rejected at goods-in.
A part that is 0 (not fitted) or open stays so.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from model.analyses.figures import design_values
from model.design.spread_tables import NORMAL, TOLERANCE_PARTS
from model.design.stage import Design, get_value, keys_for

#: The seed used when the caller gives none, so two runs agree.
DEFAULT_SEED = 20261202


@dataclass(frozen=True)
class Spread:
    """The box builds are drawn from: per column, its nominal value and
    its (low, high) ends, in the column's unit (Ω, F, V, β, A, °C)."""

    keys: tuple
    nominal: np.ndarray
    low: np.ndarray
    high: np.ndarray
    normal: bool

    @property
    def count(self) -> int:
        return len(self.keys)


def spread_of(design: Design) -> Spread:
    """The columns of ``design``'s tolerance box, in file order."""
    tol = design.tolerance
    keys, nominal, low, high = [], [], [], []
    for key in (k for k in TOLERANCE_PARTS if k in keys_for(design.topology)):
        value = float(get_value(design, key))
        rel = tol.relative(key)
        if rel > 0 and value != 0 and math.isfinite(value):
            keys.append(key)
            nominal.append(value)
            low.append(value * (1 - rel))
            high.append(value * (1 + rel))
    t = design.transistor
    # A follower's β spreads over the same range as the gain transistor's,
    # drawn on its own: two parts off the reel, not one part twice.
    second = (("transistor2.beta", tol.beta, 1.0, design.transistor2.beta),) if (
        "transistor2.beta" in keys_for(design.topology)) else ()
    for key, rng, scale, value in (("transistor.beta", tol.beta, 1.0, t.beta), *second,
                                   ("transistor.i_s", tol.i_s, t.i_s, t.i_s),
                                   ("environment.ambient", tol.ambient, 1.0, design.environment.ambient)):
        if rng is not None and rng[1] > rng[0]:
            keys.append(key)
            nominal.append(value)
            low.append(rng[0] * scale)
            high.append(rng[1] * scale)
    arr = (lambda x: np.array(x, dtype=float))
    return Spread(tuple(keys), arr(nominal), arr(low), arr(high), tol.shape == NORMAL)


def draw(spread: Spread, samples: int, seed: int) -> np.ndarray:
    """(samples, columns) values drawn in the box, reproducible by ``seed``."""
    rng = np.random.default_rng(seed)
    if spread.normal:
        z = rng.standard_normal((samples, spread.count))
        wide = np.abs(z) > 3.0
        while wide.any():
            z[wide] = rng.standard_normal(int(wide.sum()))
            wide = np.abs(z) > 3.0
        unit = (z / 3.0 + 1.0) / 2.0
    else:
        unit = rng.random((samples, spread.count))
    return spread.low + unit * (spread.high - spread.low)


def corner_values(spread: Spread, ends: np.ndarray) -> np.ndarray:
    """The box corners picked by ``ends`` (rows of 0/1 per column: low/high)."""
    return np.where(ends.astype(bool), spread.high, spread.low)


def engine_values(design: Design, spread: Spread, table: np.ndarray) -> dict:
    """The engine's per-row arrays: the nominal design with each column of
    ``table`` (rows, columns) in place."""
    rows = table.shape[0]
    values = {k: np.repeat(v, rows) for k, v in design_values([design]).items()}
    for j, key in enumerate(spread.keys):
        values[key] = table[:, j].copy()
    return values
