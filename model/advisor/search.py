"""The advisor's search on the exact engine: a target figure, the lines a
design may move along, one batched scan for brackets, a bracketed root
search run for every line at once, and snapping to the preferred series.

Every solve goes through :func:`model.analyses.batch_figures.analyse_many`;
each step of the search is one batched call, whatever the number of lines.
"""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass

import numpy as np

from model.analyses.batch_figures import LARGE_FIGURES, NOISE_FIGURES, QUICK_FIGURES, analyse_many
from model.analyses.figures import _KEYS, design_values
from model.analyses.transfer import ACTIVE
from model.design import eseries
from model.design.fields import check_value, rule_for
from model.design.spread_tables import FRACTIONS, GAINS, SPEC_UNITS, _limit
from model.design.stage import Design, get_value
from model.design.stepping import LINEAR_STEPS
from model.design.units import format_si
from model.errors import DesignError, StageledgerError
from model.spread.statistics import DC_FIGURES

#: Each knob is searched from its present value / SPAN to × SPAN, clipped to its rule.
SPAN = 1e3
#: Scan points per decade of a logarithmic line (61 over the six decades of SPAN).
PER_DECADE = 10
#: Scan points of a linear line (a fixed-sum pair).
LINEAR_POINTS = 41
#: The root search stops once the figure is this close to the target: in dB
#: for a dB target, else relative to the target's size.
TOLERANCE_DB = 1e-4
TOLERANCE_RELATIVE = 1e-6
#: ... or once the bracket is this narrow (relative, in the line's parameter).
BRACKET_RELATIVE = 1e-12
MAX_STEPS = 80
#: The figures a target may name: every numeric figure analyse_many gives.
AIMABLE = tuple(k for k in SPEC_UNITS if k in QUICK_FIGURES + LARGE_FIGURES + NOISE_FIGURES)


class Unreachable(StageledgerError):
    """The target lies outside what the knob(s) can reach in their range."""


@dataclass(frozen=True)
class Target:
    """FIGURE at VALUE; with ``db`` VALUE is 20·log10|figure| in dB."""

    figure: str
    value: float
    db: bool = False

    @property
    def large_signal(self) -> bool:
        return self.figure in LARGE_FIGURES + NOISE_FIGURES

    @property
    def tolerance(self) -> float:
        """How close the root search brings the figure (in the target's scale)."""
        return TOLERANCE_DB if self.db else TOLERANCE_RELATIVE * max(abs(self.value), 1e-30)

    def scaled(self, figure):
        """A figure (raw SI) in the target's scale."""
        figure = np.asarray(figure, dtype=float)
        if not self.db:
            return figure
        with np.errstate(divide="ignore", invalid="ignore"):
            return 20.0 * np.log10(np.abs(figure))

    def shown(self, figure: float) -> str:
        """A figure (raw SI) as the target is written: dB, per cent or SI."""
        if not math.isfinite(figure):
            return "none"
        if self.db:
            return f"{float(self.scaled(figure)):.2f} dB"
        if self.figure in FRACTIONS:
            return f"{100 * figure:.3g} %"
        if self.figure in GAINS:
            # Four figures with their trailing zeros, as tui.report.gain_text
            # writes a gain: the target -10.00 beside the -8.839 it gives.
            return f"{format(figure, '+#.4g').removesuffix('.')} V/V"
        return format_si(figure, SPEC_UNITS[self.figure], 4)

    def words(self) -> str:
        """The target as written, e.g. "-20 dB"."""
        if self.db:
            return f"{self.value:g} dB"
        return self.shown(self.value)


def parse_target(text: str) -> Target:
    """``"av_loaded=20dB"`` → Target; the value is read by the spec rules
    (units, SI prefixes, dB for gains, per cent for distortions)."""
    name, sep, value = text.partition("=")
    name = name.strip()
    if not sep or not value.strip():
        raise StageledgerError(f"{text!r}: expected FIGURE=TARGET, for example av_loaded=20dB")
    if name not in AIMABLE:
        raise DesignError(name, None, "is not a figure to aim at; expected one of " + ", ".join(AIMABLE))
    try:
        limit = _limit(name, name, [value, value])
    except DesignError:
        rule = f"must be a number in {SPEC_UNITS[name] or 'V/V'}"
        rule += "; a gain may be in dB ('20 dB')" if name in GAINS else ""
        rule += "; a distortion may be in per cent ('1 %')" if name in FRACTIONS else ""
        raise DesignError(name, value.strip(), rule) from None
    if not math.isfinite(limit.low):
        raise DesignError(name, value.strip(), "must be a finite target")
    return Target(name, limit.low, limit.db)


def check_sense(target: Target, present: float) -> None:
    """Refuse a negative dB target on a stage that has gain: −20 dB is an
    attenuation (|gain| = 0.1), and a gain stage aimed there almost always
    means an inverting gain of 10, which is +20 dB; better said than solved."""
    if target.db and target.value < 0 and math.isfinite(present) and abs(present) >= 1.0:
        now = 20.0 * math.log10(abs(present))
        raise DesignError(target.figure, f"{target.value:g} dB",
                          f"is an attenuation (|{target.figure}| = {10 ** (target.value / 20):.3g}) and the stage "
                          f"has {now:+.1f} dB now; a dB target bounds the gain's size, so an inverting gain of "
                          f"{10 ** (-target.value / 20):.3g} is '{-target.value:g}dB' (or "
                          f"'-{10 ** (-target.value / 20):.3g}' in V/V)")


def as_target(figure, target=None) -> Target:
    """A Target as given, or from a figure name and a target (SI number, or
    text as the command line takes it: "20dB", "15k")."""
    if isinstance(figure, Target):
        return figure
    text = target if isinstance(target, str) else repr(float(target))
    return parse_target(f"{figure}={text}")


def knob_range(design: Design, key: str) -> tuple[float, float, float]:
    """(present, low, high): the physical range a knob is searched over,
    present / SPAN to present × SPAN clipped to its rule; DesignError for a
    key the engine does not use, or one at 0 (not fitted) or open."""
    rule = rule_for(key, design.topology)
    if rule.kind != "number" or key not in _KEYS:
        raise DesignError(key, None, "is not a knob the analysis uses; vary a part, the supply or a device value")
    present = float(get_value(design, key))
    if not (math.isfinite(present) and present > 0):
        raise DesignError(key, present, "must be above 0 and finite (fitted) to be varied: "
                          "the search scales the present value")
    low = max(present / SPAN, rule.low if rule.low > 0 else 0.0)
    high = min(present * SPAN, rule.high)
    # A strict limit is never touched: nudge inside it.
    if rule.low_strict and low <= rule.low:
        low = rule.low * (1 + 1e-9) if rule.low > 0 else low
    if rule.high_strict and high >= rule.high:
        high = rule.high * (1 - 1e-9)
    return present, low, high


@dataclass(frozen=True)
class Line:
    """A one-parameter family of designs through the present one.

    kind "scale": x_i = present_i · k**exponent_i, parameter k (log, 1 at
    present); kind "share": the first key takes the parameter p and the
    second total − p (a fixed sum), linear.  ``low``/``high`` bound the
    parameter so every key stays in its range.
    """

    name: str
    keys: tuple
    present: tuple
    exponents: tuple
    low: float
    high: float
    kind: str = "scale"

    @property
    def start(self) -> float:
        return 1.0 if self.kind == "scale" else self.present[0]

    @property
    def log(self) -> bool:
        return self.kind == "scale"

    def values(self, p) -> dict:
        """Each key's value (arrays) at parameters ``p``."""
        p = np.atleast_1d(np.asarray(p, dtype=float))
        if self.kind == "share":
            total = self.present[0] + self.present[1]
            return {self.keys[0]: p, self.keys[1]: np.maximum(total - p, 0.0)}
        return {k: x * p ** e for k, x, e in zip(self.keys, self.present, self.exponents)}

    def grid(self) -> np.ndarray:
        if self.log:
            decades = math.log10(self.high / self.low)
            n = max(int(math.ceil(decades * PER_DECADE)) + 1, 3)
            return np.geomspace(self.low, self.high, n)
        return np.linspace(self.low, self.high, LINEAR_POINTS)


def scale_line(design: Design, keys: tuple, exponents: tuple, name: str | None = None) -> Line:
    """The keys scaled together, x_i · k**e_i, within every key's range."""
    present, low, high = [], 0.0, math.inf
    for key, e in zip(keys, exponents):
        x, lo, hi = knob_range(design, key)
        present.append(x)
        if e != 0:
            a, b = (lo / x) ** (1 / e), (hi / x) ** (1 / e)
            low, high = max(low, min(a, b)), min(high, max(a, b))
    return Line(name or " and ".join(keys), tuple(keys), tuple(present), tuple(exponents), low, high)


def share_line(design: Design, first: str, second: str) -> Line:
    """``first`` and ``second`` at their present sum, the share between them moving."""
    a, b = float(get_value(design, first)), float(get_value(design, second))
    return Line(f"{first} and {second} at a fixed sum", (first, second), (a, b), (1.0, -1.0), 0.0, a + b, "share")


class Engine:
    """The design's figures for rows of changed keys, and their miss from the target."""

    def __init__(self, design: Design, target: Target):
        self.design, self.target = design, target
        self._base = design_values([design])
        self.rows = 0

    def figures(self, columns: dict, large_signal: bool | None = None) -> dict:
        """analyse_many on the design with ``columns`` (key → array) in place."""
        n = len(next(iter(columns.values())))
        values = {k: np.repeat(v, n) for k, v in self._base.items()}
        values.update({k: np.asarray(v, dtype=float) for k, v in columns.items()})
        self.rows += n
        large = self.target.large_signal if large_signal is None else large_signal
        return analyse_many(self.design.topology, values, large_signal=large,
                            noise=large and self.target.figure in NOISE_FIGURES)

    def miss(self, out: dict) -> np.ndarray:
        """The figure minus the target, in the target's scale; NaN where the
        row did not solve, or left the active region for a figure that
        exists only there."""
        with np.errstate(invalid="ignore"):
            miss = self.target.scaled(out[self.target.figure]) - self.target.value
        bad = ~out["converged"]
        if self.target.figure not in DC_FIGURES:
            bad |= out["region"] != ACTIVE
        return np.where(bad | ~np.isfinite(miss), np.nan, miss)


def evaluate(engine: Engine, lines: list, params: list) -> tuple[list, list]:
    """The miss and raw figure of every line at its parameters, in ONE call."""
    columns: dict = {}
    sizes = [len(p) for p in params]
    keys = list(dict.fromkeys(k for line in lines for k in line.keys))
    for line, p in zip(lines, params):
        vals = line.values(p)
        for k in keys:
            present = float(engine._base[k][0])
            columns.setdefault(k, []).append(vals.get(k, np.full(len(p), present)))
    joined = {k: np.concatenate(v) for k, v in columns.items()}
    out = engine.figures(joined)
    miss, raw = engine.miss(out), out[engine.target.figure]
    cuts = np.cumsum([0] + sizes)
    return ([miss[a:b] for a, b in zip(cuts, cuts[1:])], [raw[a:b] for a, b in zip(cuts, cuts[1:])])


@dataclass(frozen=True)
class Bracket:
    """Where a line's scan changed sign (a, b), with the miss and raw figure
    at each end; when none did, ``found`` is False and a, miss_a, raw_a are
    the scan's closest point (all NaN if no point solved)."""

    a: float
    b: float
    miss_a: float
    miss_b: float
    raw_a: float
    raw_b: float
    found: bool


def bracket(line: Line, grid: np.ndarray, miss: np.ndarray, raw: np.ndarray) -> Bracket:
    """The sign change nearest the present design, or the closest grid point."""
    ok = np.isfinite(miss)
    if not ok.any():
        nan = math.nan
        return Bracket(nan, nan, nan, nan, nan, nan, False)
    pair = ok[:-1] & ok[1:] & (miss[:-1] * miss[1:] <= 0)
    where = np.flatnonzero(pair)
    if where.size:
        pos = np.log(grid) if line.log else grid
        start = math.log(line.start) if line.log else line.start
        i = int(where[np.argmin(np.abs((pos[where] + pos[where + 1]) / 2 - start))])
        return Bracket(grid[i], grid[i + 1], miss[i], miss[i + 1], raw[i], raw[i + 1], True)
    j = int(np.nanargmin(np.abs(np.where(ok, miss, np.nan))))
    return Bracket(grid[j], grid[j], miss[j], miss[j], raw[j], raw[j], False)


def roots(engine: Engine, lines: list, brackets: list) -> list:
    """Illinois (modified regula falsi) on every bracketed line at once, in
    log of the parameter for a log line: one batched call per step for all
    lines.  Stops a line when its miss is within the target's tolerance or
    its bracket is BRACKET_RELATIVE wide.  Returns per line the best point
    found, (parameter, miss, raw figure)."""
    tol = engine.target.tolerance
    log = [ln.log for ln in lines]
    ua = np.array([math.log(b.a) if lg else b.a for b, lg in zip(brackets, log)])
    ub = np.array([math.log(b.b) if lg else b.b for b, lg in zip(brackets, log)])
    fa = np.array([b.miss_a for b in brackets])
    fb = np.array([b.miss_b for b in brackets])
    best = [(b.a, b.miss_a, b.raw_a) if abs(b.miss_a) <= abs(b.miss_b) else (b.b, b.miss_b, b.raw_b)
            for b in brackets]
    done = np.array([abs(m) <= tol for _, m, _ in best], dtype=bool)
    for _ in range(MAX_STEPS):
        live = np.flatnonzero(~done)
        if live.size == 0:
            break
        with np.errstate(invalid="ignore", divide="ignore"):
            u = (ua * fb - ub * fa) / (fb - fa)
        inside = np.isfinite(u) & (u > np.minimum(ua, ub)) & (u < np.maximum(ua, ub))
        u = np.where(inside, u, (ua + ub) / 2)
        params = [np.array([math.exp(u[i]) if log[i] else u[i]]) for i in live]
        miss, raw = evaluate(engine, [lines[i] for i in live], params)
        for i, m, r, p in zip(live, miss, raw, params):
            m, r, p = float(m[0]), float(r[0]), float(p[0])
            if not math.isfinite(m):  # did not solve inside the bracket: keep the best so far
                done[i] = True
                continue
            if abs(m) <= abs(best[i][1]):
                best[i] = (p, m, r)
            if m * fb[i] < 0:
                ua[i], fa[i] = ub[i], fb[i]
            else:
                fa[i] *= 0.5  # Illinois: the end kept again counts half
            ub[i], fb[i] = u[i], m
            narrow = abs(ub[i] - ua[i]) <= BRACKET_RELATIVE * max(1.0, abs(ub[i]))
            done[i] = abs(m) <= tol or narrow
    return best


def neighbours(key: str, value: float, series: str) -> tuple:
    """The preferred values just below and above ``value`` (one if it is
    one): the series for parts and positive quantities, the stepping
    increment (LINEAR_STEPS) for plain numbers such as the supply."""
    if value <= 0:
        return (0.0,)
    if key in LINEAR_STEPS:
        q = LINEAR_STEPS[key]
        lo, hi = round(math.floor(value / q + 1e-9) * q, 10), round(math.ceil(value / q - 1e-9) * q, 10)
        return tuple(dict.fromkeys((lo, hi)))
    near = eseries.nearest(value, series)
    if math.isclose(near, value, rel_tol=1e-9):
        return (near,)
    return (eseries.step(value, series, -1), eseries.step(value, series, 1))


def snap_rows(design: Design, keys: tuple, exact: dict, series: str) -> list:
    """Every combination of each key's neighbours that its rule allows."""
    options = []
    for k in keys:
        allowed = []
        for v in neighbours(k, float(exact[k]), series):
            try:
                check_value(k, design.topology, v)
            except DesignError:
                continue
            allowed.append(v)
        options.append(allowed or [float(get_value(design, k))])
    return [dict(zip(keys, combo)) for combo in itertools.product(*options)]
