"""``aim``: the value(s) of the varied keys that bring one figure to a target,
snapped to the design's preferred series.

One knob: the knob's physical range (search.knob_range) is scanned on a log
grid in one batched call, the sign change nearest the present value is
narrowed by Illinois regula falsi (search.roots) until the figure is within
the target's tolerance, then the series values just below and above are
solved (one call) and the one whose figure is closer to the target chosen.

Several knobs: a minimum-norm move in log space.  The figure's gradient in
ln(knob) is taken by central differences (±1 %, one call); the knobs then
move together along it, x_i = x_i0 · k**e_i with e the gradient scaled so
its largest entry is ±1, which for a figure linear in the logs is the
least-squares (smallest) change that reaches the target.  The root search
runs on k on the exact engine, bounded so every knob stays in its range.
Every combination of each knob's series neighbours is then solved and the
closest to the target chosen.  It is not a full nonlinear least squares:
a target reachable only off that line is reported unreachable.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from model.advisor import search
from model.advisor.search import Engine, Line, Target, Unreachable
from model.design.fields import FIELDS
from model.design.stage import Design, get_value, with_values
from model.design.units import format_si
from model.errors import DesignError

#: The step of the central differences (±1 % of each knob).
GRADIENT_STEP = 0.01


@dataclass(frozen=True)
class Snap:
    """One set of series values and the figure it gives (raw SI)."""

    values: dict
    figure: float
    miss: float


@dataclass(frozen=True)
class AimResult:
    """What ``aim`` found.

    present: the figure now (raw SI); ranges: (key, low, high) searched;
    reached: the scan found a sign change; exact: each key's value at the
    root (or, unreachable, at the scan's closest point) with exact_figure
    there; tolerance: the root search's, in the target's scale; snaps:
    every series combination solved, in order of their values; chosen: the
    one closest to the target (None if unreachable); design: the chosen
    design (the design unchanged if unreachable); rows: designs solved.
    """

    target: Target
    line: Line
    present: float
    ranges: tuple
    reached: bool
    exact: dict
    exact_figure: float
    tolerance: float
    snaps: tuple
    chosen: Snap | None
    design: Design
    rows: int

    @property
    def keys(self) -> tuple:
        return self.line.keys

    def changes(self, design: Design) -> dict:
        """The chosen values that differ from ``design``'s (empty: already there)."""
        if self.chosen is None:
            return {}
        return {k: v for k, v in self.chosen.values.items() if v != float(get_value(design, k))}

    def note(self) -> str:
        """The generated ledger note, e.g. "aimed av_loaded at -20 dB by stage.rc"."""
        return f"aimed {self.target.figure} at {self.target.words()} by {', '.join(self.keys)}"

    def unreachable(self) -> Unreachable:
        """The error the command raises for this result."""
        shown = ", ".join(f"{k} = {_value(k, v)}" for k, v in self.exact.items())
        ranges = "; ".join(f"{k} {_value(k, lo)} to {_value(k, hi)}" for k, lo, hi in self.ranges)
        closest = (f"the closest is {self.target.shown(self.exact_figure)} at {shown}"
                   if math.isfinite(self.exact_figure) else "no design in the range solved in the active region")
        return Unreachable(f"{self.target.figure} cannot reach {self.target.words()} by "
                           f"{', '.join(self.keys)} within {ranges}; {closest}")


def _value(key: str, value: float) -> str:
    unit = FIELDS[key].unit
    return format_si(value, unit, 4) if unit not in ("", "°C") else f"{value:.4g} {unit}".rstrip()


def aim(design: Design, figure: str | Target, target: float | str | None = None,
        vary: tuple = ("stage.rc",), series: str | None = None) -> AimResult:
    """Bring ``figure`` to ``target`` by the keys in ``vary``.

    ``figure`` is a Target, or a figure name with ``target`` a number (SI)
    or text as the command line takes it ("20dB", "15k").  ``series``
    defaults to the design's ``parts.series``.
    """
    tgt = search.as_target(figure, target)
    vary = tuple(dict.fromkeys(vary))
    if not vary:
        raise DesignError("--vary", None, "needs at least one key to vary")
    series = series or design.parts.series
    engine = Engine(design, tgt)
    present_out = engine.figures({vary[0]: np.array([float(get_value(design, vary[0]))])})
    present = float(present_out[tgt.figure][0])
    search.check_sense(tgt, present)
    line = _line(design, engine, vary) if len(vary) > 1 else search.scale_line(design, vary, (1.0,), vary[0])
    ranges = tuple((k, *search.knob_range(design, k)[1:]) for k in vary)
    return _finish(design, engine, line, ranges, present, series)


def _line(design: Design, engine: Engine, vary: tuple) -> Line:
    """The line of least log change: along the gradient of the miss in ln x."""
    cols = {k: [] for k in vary}
    for j in range(len(vary)):
        for sign in (1.0, -1.0):
            for i, k in enumerate(vary):
                x = float(get_value(design, k))
                cols[k].append(x * math.exp(sign * GRADIENT_STEP) if i == j else x)
    miss = engine.miss(engine.figures({k: np.array(v) for k, v in cols.items()}))
    grad = (miss[0::2] - miss[1::2]) / (2 * GRADIENT_STEP)
    if not np.all(np.isfinite(grad)) or not np.any(grad):
        raise DesignError(", ".join(vary), None, "do not move the figure here (no gradient); vary other keys")
    # Toward the target: the sign of the step is the root search's business,
    # so only the direction matters.
    exponents = tuple(float(g) for g in grad / np.max(np.abs(grad)))
    return search.scale_line(design, vary, exponents, ", ".join(vary))


def _finish(design, engine, line, ranges, present, series) -> AimResult:
    tgt = engine.target
    grid = line.grid()
    (miss,), (raw,) = search.evaluate(engine, [line], [grid])
    br = search.bracket(line, grid, miss, raw)
    if br.found:
        (p, _, fig), = search.roots(engine, [line], [br])
    else:
        p, fig = br.a, br.raw_a
    exact = {k: float(v[0]) for k, v in line.values(p).items()} if math.isfinite(p) else dict(
        zip(line.keys, line.present))
    snaps, chosen, chosen_design = (), None, design
    if br.found:
        snaps = snap(engine, line.keys, exact, series)
        chosen = min(snaps, key=lambda s: abs(s.miss) if math.isfinite(s.miss) else math.inf)
        chosen_design = with_values(design, chosen.values)
    return AimResult(tgt, line, present, ranges, br.found, exact, float(fig), tgt.tolerance,
                     snaps, chosen, chosen_design, engine.rows)


def snap(engine: Engine, keys: tuple, exact: dict, series: str) -> tuple:
    """Every series combination around ``exact``, solved in one call."""
    return solve_rows(engine, search.snap_rows(engine.design, keys, exact, series))


def solve_rows(engine: Engine, rows: list) -> tuple:
    """The aimed figure of each row of values (dicts with the same keys), in one call."""
    keys = tuple(rows[0])
    out = engine.figures({k: np.array([r[k] for r in rows]) for k in keys})
    miss = engine.miss(out)
    return tuple(Snap(r, float(f), float(m)) for r, f, m in zip(rows, out[engine.target.figure], miss))
