"""How far a figure sits inside its spec: the margin the proposal maximises.

For a limit [lo, hi] on a figure y, the margin is the smaller of the two
relative distances to its ends, (y − lo)/|lo| and (hi − y)/|hi| (a missing
end counts as infinitely far).  Positive inside the limit, negative outside,
0 on an end.  A gain limited in dB is judged on its magnitude in V/V: the
dB ends become 10^(dB/20) and the same rule applies, so a 1 dB margin reads
as 12.2 % up and 10.9 % down, like any other figure.  An end at 0 has no
scale of its own and takes the other end's (or 1 in SI units when both are
0 or missing).  A figure that does not exist (NaN), or needs the active
region in a design that is not active, has margin −inf.
"""

from __future__ import annotations

import math

import numpy as np

from model.design.spread_tables import Limit
from model.spread.statistics import DC_FIGURES


def limit_scale(limit: Limit) -> tuple[float | None, float | None]:
    """The limit's ends on the scale margins are taken in (dB ends as V/V)."""
    if not limit.db:
        return limit.low, limit.high
    lin = (lambda x: None if x is None else 10.0 ** (x / 20.0))
    return lin(limit.low), lin(limit.high)


def margin(limit: Limit, values: np.ndarray, active: np.ndarray) -> np.ndarray:
    """The margin (a fraction) of each row's figure to ``limit``; see the module."""
    y = np.asarray(values, dtype=float)
    if limit.db:
        y = np.abs(y)
    low, high = limit_scale(limit)
    ends = [abs(x) for x in (low, high) if x not in (None, 0.0)]
    fallback = ends[0] if ends else 1.0
    out = np.full(y.shape, math.inf)
    with np.errstate(invalid="ignore", over="ignore"):
        if low is not None:
            out = np.minimum(out, (y - low) / (abs(low) or fallback))
        if high is not None:
            # An unbounded figure (f_high with no corner) against an upper end is far outside.
            out = np.minimum(out, np.where(np.isinf(y) & (y > 0), -math.inf, (high - y) / (abs(high) or fallback)))
    ok = ~np.isnan(y)
    if limit.key not in DC_FIGURES:
        ok &= active
    return np.where(ok & ~np.isnan(out), out, -math.inf)


def margins(specs: tuple, figures: dict, active: np.ndarray) -> np.ndarray:
    """(rows, specs) margins of every row to every limit of ``specs``."""
    return np.column_stack([margin(s, figures[s.key], active) for s in specs])
