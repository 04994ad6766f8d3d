"""``spread_report(design)``: Monte Carlo over the design's tolerances, its
yield against its specs, worst-case corners, variance drivers and a
temperature table, all on the batched engine."""

from __future__ import annotations

import itertools
from dataclasses import dataclass

import numpy as np

from model.analyses.batch_figures import NOISE_FIGURES, analyse_many
from model.design.stage import Design
from model.files.plain_json import plain
from model.spread.builds import (
    DEFAULT_SEED,
    Spread,
    corner_values,
    draw,
    engine_values,
    spread_of,
)
from model.spread.statistics import Yield, drivers, passes, summarise, usable

DEFAULT_SAMPLES = 10_000
#: Builds behind the yield the ledger records and the Readout shows.
LEDGER_SAMPLES = 2_000
#: Corners searched one by one up to this many (2^12); a larger box uses the heuristic.
EXACT_CORNERS = 4096
#: Ambients of the temperature table, across the tolerance's range.
TEMPERATURE_POINTS = 7


@dataclass(frozen=True)
class Evaluated:
    """Builds and their figures: ``table`` (rows, columns) of drawn values
    and, per figure key, one array over the rows."""

    spread: Spread
    table: np.ndarray
    figures: dict
    converged: np.ndarray
    region: np.ndarray

    @property
    def active(self) -> np.ndarray:
        return self.converged & (self.region == "active")


#: Figures that need the swing, distortion and response sweeps.
LARGE_SIGNAL = ("swing_up", "swing_down", "thd", "hd2", "hd3", "f_low", "f_high", "bandwidth", "gain_at_freq",
                *NOISE_FIGURES)


def needs_sweeps(design: Design) -> bool:
    """Whether a spec of ``design`` bounds a figure only the sweeps give."""
    return any(s.key in LARGE_SIGNAL for s in design.spec)


def evaluate(design: Design, spread: Spread, table: np.ndarray, large_signal: bool = True,
             noise: bool | None = None) -> Evaluated:
    """Every figure of each row of ``table`` (the design with those values);
    without ``large_signal`` only the DC, midband and power figures.  The
    noise figures with ``noise``, by default where a spec bounds one."""
    if noise is None:
        noise = any(s.key in NOISE_FIGURES for s in design.spec)
    out = analyse_many(design.topology, engine_values(design, spread, table), large_signal=large_signal,
                       noise=noise and large_signal)
    figures = {k: np.asarray(v, dtype=float) for k, v in out.items() if k not in ("converged", "region", "region2")}
    return Evaluated(spread, table, figures, np.asarray(out["converged"], bool), np.asarray(out["region"]))


def sample(design: Design, samples: int = DEFAULT_SAMPLES, seed: int = DEFAULT_SEED,
           large_signal: bool = True, noise: bool | None = None) -> Evaluated:
    """``samples`` builds of ``design`` drawn with ``seed``, evaluated."""
    spread = spread_of(design)
    return evaluate(design, spread, draw(spread, samples, seed), large_signal, noise)


@dataclass(frozen=True)
class YieldReport:
    """Yield against all specs together and each alone; ``most_failing`` is the
    spec key failed by most builds (None when nothing fails or no spec)."""

    all: Yield
    per_spec: dict
    most_failing: str | None


def yield_of(design: Design, ev: Evaluated) -> YieldReport | None:
    """The yield of evaluated builds against ``design.spec``; None without specs."""
    if not design.spec:
        return None
    n = ev.table.shape[0]
    ok_all = np.ones(n, dtype=bool)
    per = {}
    for limit in design.spec:
        ok = passes(limit, ev.figures[limit.key], ev.active) & ev.converged
        per[limit.key] = Yield(int(ok.sum()), n)
        ok_all &= ok
    worst = min(per, key=lambda k: per[k].passed)
    return YieldReport(Yield(int(ok_all.sum()), n), per, worst if per[worst].passed < n else None)


def quick_yield(design: Design, samples: int = DEFAULT_SAMPLES, seed: int = DEFAULT_SEED) -> Yield | None:
    """The yield against all specs (None without specs): what the ledger and
    the Readout show."""
    if not design.spec:
        return None
    return yield_of(design, sample(design, samples, seed, large_signal=needs_sweeps(design))).all


@dataclass(frozen=True)
class Corner:
    """One corner of the tolerance box: its values per column and the figure there."""

    value: float
    parts: dict
    region: str


def worst_cases(design: Design, spread: Spread, keys: tuple, samples: Evaluated | None = None) -> dict:
    """For each figure key, the (lowest, highest) Corner of the tolerance box.

    Exact up to EXACT_CORNERS corners: every corner is evaluated in one batch.
    Above that, a heuristic: from the corner the samples' straight-line fit
    points to (each column at the end that moves the figure the wanted way),
    flip the one column that improves the figure most, until no flip does
    (a local optimum over the vertices, not guaranteed global).
    """
    if spread.count == 0 or not keys:
        return {}
    large = any(k in LARGE_SIGNAL for k in keys)
    if 2 ** spread.count <= EXACT_CORNERS:
        ends = np.array(list(itertools.product((0, 1), repeat=spread.count)), dtype=np.int8)
        ev = evaluate(design, spread, corner_values(spread, ends), large)
        return {k: _extremes(ev, k, np.arange(ends.shape[0])) for k in keys}
    return {k: (_climb(design, spread, k, -1.0, samples, large), _climb(design, spread, k, 1.0, samples, large))
            for k in keys}


def _extremes(ev: Evaluated, key: str, rows: np.ndarray) -> tuple:
    values = ev.figures[key][rows]
    finite = np.isfinite(values)
    if not finite.any():
        return None, None
    idx = rows[finite]
    lo, hi = idx[np.argmin(values[finite])], idx[np.argmax(values[finite])]
    return _corner(ev, key, lo), _corner(ev, key, hi)


def _corner(ev: Evaluated, key: str, row: int) -> Corner:
    parts = {k: float(v) for k, v in zip(ev.spread.keys, ev.table[row])}
    region = str(ev.region[row]) if ev.converged[row] else "unsolved"
    return Corner(float(ev.figures[key][row]), parts, region)


def _climb(design: Design, spread: Spread, key: str, direction: float, samples: Evaluated | None, large: bool):
    k = spread.count
    ends = np.zeros(k, dtype=np.int8)
    if samples is not None:
        ok = usable(key, samples.figures[key], samples.active)
        if ok.sum() > k + 1:
            x = samples.table[ok] - samples.table[ok].mean(axis=0)
            coef, *_ = np.linalg.lstsq(x, samples.figures[key][ok], rcond=None)
            ends = (direction * coef > 0).astype(np.int8)
    best = None
    for _ in range(k + 1):
        flips = np.vstack([ends, ends ^ np.eye(k, dtype=np.int8)])
        ev = evaluate(design, spread, corner_values(spread, flips), large)
        score = direction * np.where(np.isfinite(ev.figures[key]), ev.figures[key], -direction * np.inf)
        i = int(np.argmax(score))
        best = _corner(ev, key, i)
        if i == 0:
            break
        ends = flips[i]
    return best


def temperature_table(design: Design) -> list:
    """Every figure at TEMPERATURE_POINTS ambients across the tolerance's
    range, parts nominal; [] when the tolerance gives no ambient range."""
    rng = design.tolerance.ambient
    if rng is None:
        return []
    ambients = np.linspace(rng[0], rng[1], TEMPERATURE_POINTS)
    nominal = Spread(("environment.ambient",), np.array([design.environment.ambient]),
                     np.array([rng[0]]), np.array([rng[1]]), False)
    ev = evaluate(design, nominal, ambients[:, None])
    rows = []
    for i, t in enumerate(ambients):
        row = {"ambient": float(t), "region": str(ev.region[i]) if ev.converged[i] else "unsolved"}
        row.update({k: float(v[i]) for k, v in ev.figures.items()})
        rows.append(row)
    return rows


@dataclass(frozen=True)
class SpreadReport:
    """Everything ``stageledger spread`` shows (see :func:`spread_report`)."""

    design: Design
    samples: int
    seed: int
    evaluated: Evaluated
    summaries: dict
    yields: YieldReport | None
    worst: dict
    drivers: dict
    fits: dict
    temperature: list

    @property
    def counts(self) -> dict:
        """Builds per outcome: active, saturation, cutoff, unsolved."""
        ev = self.evaluated
        out = {r: int(((ev.region == r) & ev.converged).sum()) for r in ("active", "saturation", "cutoff")}
        out["unsolved"] = int((~ev.converged).sum())
        return out

    def to_dict(self) -> dict:
        """The ``spread --json`` object; every number finite or None."""
        y = self.yields
        corner = (lambda c: None if c is None else {"value": c.value, "parts": c.parts, "region": c.region})
        return plain({
            "samples": self.samples,
            "seed": self.seed,
            "distribution": self.design.tolerance.shape,
            "varied": list(self.evaluated.spread.keys),
            "outcomes": self.counts,
            "figures": {k: s.to_dict() for k, s in self.summaries.items()},
            "yield": None if y is None else {
                "all": y.all.to_dict(), "per_spec": {k: v.to_dict() for k, v in y.per_spec.items()},
                "most_failing": y.most_failing},
            "worst_case": {k: {"low": corner(lo), "high": corner(hi)} for k, (lo, hi) in self.worst.items()},
            "drivers": {k: [[p, s] for p, s in v] for k, v in self.drivers.items()},
            "drivers_fit": self.fits,
            "temperature": self.temperature,
        })


def spread_report(design: Design, samples: int = DEFAULT_SAMPLES, seed: int = DEFAULT_SEED) -> SpreadReport:
    """Monte Carlo of ``samples`` builds drawn with ``seed``, and everything derived."""
    ev = sample(design, samples, seed, noise=True)  # the report shows the noise figures' spread
    summaries, shares, fits = {}, {}, {}
    for key, values in ev.figures.items():
        ok = usable(key, values, ev.active)
        summaries[key] = summarise(values[ok])
        share, r2 = drivers(ev.table[ok], values[ok])
        order = np.argsort(-np.nan_to_num(share, nan=-1.0))
        shares[key] = [(ev.spread.keys[j], float(share[j])) for j in order if np.isfinite(share[j])]
        fits[key] = r2
    keys = tuple(s.key for s in design.spec)
    worst = worst_cases(design, ev.spread, keys, ev)
    return SpreadReport(design, samples, seed, ev, summaries, yield_of(design, ev), worst, shares, fits,
                        temperature_table(design))
