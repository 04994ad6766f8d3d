"""``sensitivity_matrix(design)``: what a 1 % rise of each knob does to each
headline figure, by central differences on the batched engine.

Rows are the numeric design keys the engine takes that can move a column
(see :data:`SKIPPED` for the others and why), less those whose value is 0
(a part not fitted) or infinite (an open load): a relative change of either
means nothing.  ``environment.ambient`` is a Celsius value, where "1 %
warmer" means nothing either, so its row is per +1 K instead.

Each cell is the normalised sensitivity ∂ln|y|/∂ln x: the % change of y for
a 1 % rise of x (per +1 K for the ambient), except av_loaded, given as the
change of 20·log10|av_loaded| in dB, and the yield, in percentage points.
Every row's + and − variants are solved in ONE call of
:func:`~model.analyses.batch_figures.analyse_many`.

The step: x·(1 ± h) with h = 1e-3.  The central difference's error is
O(h²) (about 1e-6 of a typical curvature here); the engine's own noise
(Newton's 1e-9 V tolerance, the corner search's 1e-6-decade bracket,
float rounding of ~1e-16) is divided by 2h, so h must not be much smaller:
on the geophone demo h = 1e-3 and h = 1e-4 agree to better than 1e-6 in
every cell, while h = 1e-2 is already 2e-4 off in the most curved one.

A cell is NaN where it is undefined: a variant that does not converge, a
figure that does not exist on both sides (f_high = inf, f_low = 0 when flat
to DC), a change of sign, or a variant outside forward-active for a
small-signal or large-signal figure (the DC figures ic, vce and
p_transistor need only the same region on both sides).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from model.analyses.batch_figures import analyse_many
from model.analyses.figures import _KEYS, design_values
from model.analyses.transfer import ACTIVE
from model.design.stage import Design, get_value, keys_for, with_values
from model.errors import DesignError
from model.spread.analysis import LEDGER_SAMPLES, quick_yield

#: The columns, in the order every table shows them.
COLUMNS = ("ic", "vce", "av_loaded", "rin", "rout", "swing_up", "swing_down", "thd",
           "p_transistor", "f_low", "f_high")
#: Columns that exist in any region (only the same region on both sides is needed).
DC_COLUMNS = ("ic", "vce", "p_transistor")
YIELD = "yield"
#: The relative step h of the central difference (see the module docstring).
STEP = 1e-3
#: The step of the yield column: ±1 %, the change it reports (see sensitivity_matrix).
YIELD_STEP = 1e-2
#: The knob that takes an absolute step, and its unit step (K).
AMBIENT = "environment.ambient"
#: dB of 20·log10|av| per unit of ∂ln|av|/∂ln x, for a 1 % rise.
DB_PER_PERCENT = 20.0 / math.log(10.0) / 100.0
METHOD = "central differences"

#: Numeric keys that are never rows, with the reason.
SKIPPED = {
    "source.freq": "moves only the gain and phase at the signal frequency, not a column",
    "transistor.theta_ja": "moves only tj",
    "transistor.vceo": "a limit the warnings check; moves no figure",
    "transistor.pd_max": "a limit the warnings check; moves no figure",
    "transistor.tj_max": "a limit the warnings check (and a Celsius value); moves no figure",
    "parts.resistor_power": "a rating the warnings check; moves no figure",
    "estimate.vbe": "moves only the hand estimate",
}


@dataclass(frozen=True)
class Sensitivity:
    """The matrix: ``rows`` maps each knob to {column: value} (NaN where
    undefined), in the units of :func:`unit_of`; ``step`` is h, and
    ``yield_step`` the yield's step when the yield column is in."""

    method: str
    step: float
    columns: tuple
    rows: dict
    yield_step: float | None = None

    @property
    def knobs(self) -> tuple:
        return tuple(self.rows)

    def movers(self, column: str, count: int = 5) -> list:
        """The ``count`` (knob, value) pairs that move ``column`` most, by
        magnitude; the ambient is left out, its row being per kelvin, not
        per cent, so not comparable."""
        cells = [(k, v[column]) for k, v in self.rows.items()
                 if k != AMBIENT and math.isfinite(v[column]) and v[column] != 0]
        return sorted(cells, key=lambda kv: -abs(kv[1]))[:count]

    def to_dict(self) -> dict:
        """The ``sensitivity --json`` object (numbers finite or None: write it
        through :func:`model.files.plain_json.dumps`)."""
        return {"method": self.method, "step": self.step, "yield_step": self.yield_step,
                "columns": list(self.columns),
                "units": {c: unit_of(c) for c in self.columns}, "ambient_unit": "per +1 K",
                "rows": {k: dict(v) for k, v in self.rows.items()}}


def unit_of(column: str, knob: str = "") -> str:
    """The unit of a cell: "dB" for av_loaded, "pp" (percentage points) for
    the yield, "%" otherwise; per 1 % of the knob, or per K for the ambient."""
    per = "per K" if knob == AMBIENT else "per %"
    return {"av_loaded": "dB", YIELD: "pp"}.get(column, "%") + (" " + per if knob else "")


def knob_rows(design: Design) -> tuple:
    """The keys that are rows for ``design``, in file order."""
    rows = []
    for key in keys_for(design.topology):
        if key not in _KEYS or key in SKIPPED:
            continue
        value = float(get_value(design, key))
        if key == AMBIENT or (value != 0.0 and math.isfinite(value)):
            rows.append(key)
    return tuple(rows)


def sensitivity_matrix(design: Design, *, step: float = STEP, columns: tuple = COLUMNS,
                       with_yield: bool = False, yield_samples: int | None = None) -> Sensitivity:
    """The sensitivity matrix of ``design`` (see the module docstring).

    ``columns`` may name any figure of analyse_many (tests use vb).  With
    ``with_yield`` and a non-empty ``design.spec``, a yield column from
    :func:`~model.spread.analysis.quick_yield` on each knob's ±1 % designs
    (±1 K for the ambient) with the same seed, so both sides judge the same
    draws (common random numbers) and the difference counts builds that
    cross a limit rather than draw noise.  Its step is the 1 % it reports,
    not h: a yield is a count, and ±0.1 % moves almost no build across a
    limit.  A knob whose ±1 % design breaks a rule gets None there.
    """
    if not 0.0 < step < 0.5:
        raise DesignError("step", step, "must be greater than 0 and less than 0.5")
    knobs = knob_rows(design)
    base = design_values([design])
    n = 2 * len(knobs)
    values = {k: np.repeat(v, n) for k, v in base.items()}
    for i, key in enumerate(knobs):
        for j, sign in ((2 * i, 1.0), (2 * i + 1, -1.0)):
            values[key][j] = _moved(key, float(base[key][0]), sign * step)
    out = analyse_many(design.topology, values, large_signal=True)
    up, down = slice(0, n, 2), slice(1, n, 2)
    ok = out["converged"][up] & out["converged"][down]
    same = ok & (out["region"][up] == out["region"][down])
    active = ok & (out["region"][up] == ACTIVE) & (out["region"][down] == ACTIVE)
    # The difference of ln x across the two variants; the ambient's is in
    # hundredths of a kelvin, so its row reads "% per K".
    span = np.array([2.0 * step / 0.01 / 100.0 if k == AMBIENT else math.log((1 + step) / (1 - step))
                     for k in knobs])
    rows = {k: {} for k in knobs}
    for c in columns:
        hi, lo = np.asarray(out[c][up], float), np.asarray(out[c][down], float)
        with np.errstate(divide="ignore", invalid="ignore"):
            s = (np.log(np.abs(hi)) - np.log(np.abs(lo))) / span
        good = (same if c in DC_COLUMNS else active) & np.isfinite(s) & (np.sign(hi) == np.sign(lo))
        s = np.where(good, s * (DB_PER_PERCENT if c == "av_loaded" else 1.0), np.nan)
        for i, k in enumerate(knobs):
            rows[k][c] = float(s[i])
    cols, ystep = tuple(columns), None
    if with_yield and design.spec:
        cols, ystep = cols + (YIELD,), YIELD_STEP
        for k in knobs:
            rows[k][YIELD] = _yield_change(design, k, yield_samples)
    return Sensitivity(METHOD, step, cols, rows, ystep)


def _moved(key: str, value: float, rel: float) -> float:
    """``value`` of ``key`` moved by the relative step ``rel``; the ambient by
    ``rel`` hundredths of a kelvin per unit (rel/0.01 K)."""
    return value + rel / 0.01 if key == AMBIENT else value * (1.0 + rel)


def _yield_change(design: Design, key: str, samples: int | None) -> float:
    """Percentage points of yield per 1 % of ``key`` (per K for the ambient)."""
    value = float(get_value(design, key))
    ends = []
    for sign in (1.0, -1.0):
        try:
            moved = with_values(design, {key: _moved(key, value, sign * YIELD_STEP)})
        except DesignError:
            return math.nan
        y = quick_yield(moved, samples or LEDGER_SAMPLES)
        ends.append(100.0 * y.value)
    return (ends[0] - ends[1]) / 2.0
