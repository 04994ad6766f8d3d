"""``propose``: a complete design in preferred values from specs and a supply.

The search, a design centring on the exact batched engine:

1. a starting point by rules of thumb (:mod:`model.advisor.start`);
2. a coarse full-factorial grid over the main resistors (rc, re1, re2, r1,
   r2 of a common emitter; re, r1, r2 of a follower), each on the E6 ladder
   a few steps either side of its starting value and snapped to the
   requested series, evaluated with one quick ``analyse_many`` call (DC and
   midband; swing judged by its load-line estimate);
3. the best SHORTLIST rows, with capacitors sized for f_low, evaluated in
   full (swing, distortion, corners, and the noise when a spec asks for it)
   in one call;
4. local refinement: the neighbours of the best few on the series (each
   resistor one step up or down, r1 and r2 together), evaluated in full,
   until a round improves nothing;
5. with a tolerance, the yield of the best few by a small Monte Carlo.

Designs are ranked by their worst-case margin to the specs (see
:mod:`model.advisor.margins`), each margin capped at MARGIN_CAP so that a
figure already comfortably inside its spec does not outweigh the others;
worst margins within 1 % count as tied, and
ties go to the design nearest the rules of thumb (VE at 10 % of VCC, VCE
at 45 %), then to the larger mean margin.  With a tolerance the yield ranks first among designs that meet
every spec.  f_high is checked, not designed: the capacitors are sized for
the low corner, and the upper one follows from the transistor and the load.
The transistor, source, load and environment are those of ``base``
(``default_design(topology)`` when none is given).
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass

import numpy as np

from model.advisor.margins import margins
from model.advisor.start import (
    COUPLING_BELOW,
    EMITTER_SHARE,
    capacitor,
    grid_axes,
    grid_rows,
    low_corner,
    starting_point,
)
from model.analyses.batch_figures import LARGE_FIGURES, NOISE_FIGURES, analyse_many
from model.analyses.figures import design_values
from model.design.eseries import step
from model.design.spread_tables import Limit, Tolerance, check_spread_value, file_value
from model.design.stage import CE, EF, Design, default_design, validate, with_article, with_values
from model.errors import DesignError
from model.spread.analysis import quick_yield

#: E6 steps either side of each starting value in the coarse grid.
GRID_STEPS = 5
#: Grid rows evaluated in full after the quick pass.
SHORTLIST = 300
#: Designs whose neighbours each refinement round evaluates.
REFINE_SEEDS = 4
MAX_ROUNDS = 10
#: A margin above this (a fraction) counts as no better than it.
MARGIN_CAP = 0.5
#: Candidates judged by yield when a tolerance is given, and their builds.
YIELD_CANDIDATES = 5
YIELD_SAMPLES = 200
#: The collector–emitter voltage at the saturation edge, for the swing estimate (V; about VBE − 0.4 V).
VCE_EDGE = 0.3


@dataclass(frozen=True)
class Search:
    """The size of a search: grid rows (quick figures), distinct designs
    evaluated in all (the grid and the refinement's neighbours), designs
    analysed in full (the shortlist and the neighbours), refinement rounds run."""

    grid: int
    evaluated: int
    full: int
    rounds: int


@dataclass(frozen=True)
class Candidate:
    """One proposed design: its figure and margin (a fraction) per spec key,
    the worst margin and the spec that binds there, the yield (a fraction,
    None without a tolerance) and the search that found it."""

    design: Design
    figures: dict
    margins: dict
    worst: float
    binding: str
    yield_: float | None
    search: Search

    @property
    def meets(self) -> bool:
        return self.worst >= 0.0


def resistor_keys(topology: str) -> tuple:
    return (("stage.rc", "stage.re1", "stage.re2") if topology == CE else ("stage.re",)) + ("bias.r1", "bias.r2")


def propose(topology: str, specs: tuple[Limit, ...], vcc: float, series: str = "E24",
            tolerance: Tolerance | None = None, *, base: Design | None = None,
            grid_steps: int = GRID_STEPS, shortlist: int = SHORTLIST, keep: int = 3) -> list[Candidate]:
    """The ``keep`` best designs for ``specs`` on a supply of ``vcc`` (V), in
    ``series`` values, best first (see the module for the search).

    Every returned design carries ``specs`` as its [spec] table and
    ``tolerance`` as its [tolerance] table.  Raises DesignError for a bad
    topology, supply, series or spec.
    """
    if not specs:
        raise DesignError("spec", "none", "give at least one spec, such as av_loaded=-12..-8")
    design = _base(topology, specs, vcc, series, tolerance, base)
    specs = design.spec
    axes = grid_axes(starting_point(design, specs), grid_steps, series)
    rows = grid_rows(axes)
    grid = len(next(iter(rows.values())))
    quick = analyse_many(topology, _values(design, rows), large_signal=False)
    order = _rank(_quick_scores(design, rows, quick))
    pool = _Pool(design)
    shortlisted = pool.add({k: v[order[:shortlist]] for k, v in rows.items()})
    rounds = 0
    seeds = pool.best(REFINE_SEEDS)
    while rounds < MAX_ROUNDS:
        rounds += 1
        fresh = pool.add(_neighbours(design, [pool.resistors(i) for i in seeds], series))
        new = pool.best(REFINE_SEEDS)
        if not fresh or new == seeds:
            break
        seeds = new
    ranked = pool.best(max(keep, YIELD_CANDIDATES if design.tolerance != Tolerance() else keep))
    search = Search(grid, grid + pool.count - shortlisted, pool.count, rounds)
    out = [pool.candidate(i, search) for i in ranked]
    if design.tolerance != Tolerance():
        out = [dataclasses.replace(c, yield_=quick_yield(c.design, YIELD_SAMPLES).value) for c in out]
        out.sort(key=lambda c: (c.meets, c.yield_ if c.meets else 0.0, c.worst), reverse=True)
    return out[:keep]


#: The topologies whose rules of thumb the starting point knows; the others
#: are tuned from their own starting design (aim, options) instead.
PROPOSED = (CE, EF)


def _base(topology, specs, vcc, series, tolerance, base) -> Design:
    if topology not in PROPOSED:
        raise DesignError("topology", topology, "propose starts only common-emitter and emitter-follower "
                          f"designs; start {with_article(topology)} with `new --topology {topology}` and tune it with "
                          "aim or options")
    design = base if base is not None else default_design(topology)
    if design.topology != topology:
        raise DesignError("topology", topology, f"differs from the base design's {design.topology}")
    values = {"supply.vcc": vcc, "parts.series": series}
    for s in design.spec:
        values[f"spec.{s.key}"] = "none"
    for s in specs:
        # Re-read through the [spec] table's own rules, so a Limit built by hand is held to them.
        values[f"spec.{s.key}"] = file_value(check_spread_value(f"spec.{s.key}", topology, file_value(s)))
    design = with_values(design, values)
    if tolerance is not None:
        design = validate(dataclasses.replace(design, tolerance=tolerance))
    return design


def _values(design: Design, rows: dict) -> dict:
    """design_values of ``design`` repeated once per row, with the rows' columns in place."""
    n = len(next(iter(rows.values())))
    values = {k: np.repeat(v, n) for k, v in design_values([design]).items()}
    values.update({k: np.asarray(v, dtype=float) for k, v in rows.items()})
    return values


def _swing_estimate(design: Design, rows: dict, fig: dict) -> dict:
    """Load-line estimates of the swings from the operating point (ranking
    only): to saturation the output moves (VCE − VCE_EDGE) shared between
    the ac load and the unbypassed emitter; to cut-off it moves IC times the
    ac load."""
    rl = design.load.rl
    par = (lambda r: r if not math.isfinite(rl) else r * rl / (r + rl))
    vce, ic = fig["vce"], fig["ic"]
    with np.errstate(invalid="ignore", divide="ignore"):
        if design.topology == CE:
            rac = par(rows["stage.rc"])
            down = (vce - VCE_EDGE) * rac / (rac + rows["stage.re1"])
            up = ic * rac
        else:
            up, down = vce - VCE_EDGE, ic * par(rows["stage.re"])
    return {"swing_up": np.maximum(up, 0.0), "swing_down": np.maximum(down, 0.0)}


def _quick_scores(design: Design, rows: dict, fig: dict) -> tuple:
    # The noise needs the sweep, which the quick grid does not run: its specs
    # are judged from the shortlist on, like distortion and the corners.
    quick_specs = tuple(s for s in design.spec if s.key.startswith("swing")
                        or s.key not in LARGE_FIGURES + NOISE_FIGURES)
    figures = {**fig, **_swing_estimate(design, rows, fig)}
    return _scores(design, rows, figures, quick_specs)


def _scores(design: Design, rows: dict, fig: dict, specs: tuple) -> tuple:
    """(worst, mean, rule-of-thumb closeness, margins) per row."""
    active = np.asarray(fig["region"]) == "active"
    n = active.size
    m = margins(specs, fig, active) if specs else np.zeros((n, 1))
    m = np.where(active[:, None], m, -np.inf)
    capped = np.minimum(m, MARGIN_CAP)
    with np.errstate(invalid="ignore", divide="ignore"):
        vcc = design.supply.vcc
        near = -np.abs(np.log(fig["ve"] / (EMITTER_SHARE * vcc))) if design.topology == CE else 0.0
        near = np.nan_to_num(near - np.abs(np.log(np.maximum(fig["vce"], 1e-3) / (0.45 * vcc))), nan=-np.inf)
    return capped.min(axis=1), capped.mean(axis=1), np.broadcast_to(near, (n,)), m


def _rank(scores: tuple) -> np.ndarray:
    """Row indices best first: meeting every spec, worst margin (to 1 %), closeness, then mean."""
    worst, mean, near, _ = scores
    coarse = np.round(np.nan_to_num(worst, nan=-np.inf, neginf=-1e300), 2)
    meets = worst >= 0.0  # first, so that rounding never ranks a shortfall beside a pass
    return np.lexsort((-np.nan_to_num(mean, neginf=-1e300), -np.nan_to_num(near, neginf=-1e300), -coarse, ~meets))


def _neighbours(design: Design, seeds: list, series: str) -> dict:
    """Each seed with one resistor a series step up or down, and with r1 and r2 moved together."""
    moves = [(k,) for k in resistor_keys(design.topology)] + [("bias.r1", "bias.r2")]
    out = []
    for seed in seeds:
        for keys in moves:
            for n in (-1, 1):
                row = dict(seed)
                for k in keys:
                    row[k] = _step(row[k], series, n)
                out.append(row)
    return {k: np.array([r[k] for r in out]) for k in out[0]}


def _step(value: float, series: str, n: int) -> float:
    """One series step; re1 steps between 0 (fully bypassed) and 10 Ω."""
    if value == 0.0:
        return 10.0 if n > 0 else 0.0
    return 0.0 if n < 0 and value <= 10.0 else step(value, series, n)


class _Pool:
    """Every design evaluated in full: resistors, capacitors, figures and scores."""

    def __init__(self, design: Design):
        self.design = design
        self.keys = resistor_keys(design.topology)
        self.rows: list = []
        self.seen: set = set()
        self.figures: dict = {}
        self.scores = None

    @property
    def count(self) -> int:
        return len(self.rows)

    def add(self, rows: dict) -> int:
        """Evaluate the rows not seen yet (capacitors sized, then in full); returns how many."""
        n = len(next(iter(rows.values())))
        keep = []
        for i in range(n):
            key = tuple(float(rows[k][i]) for k in self.keys)
            if key not in self.seen:
                self.seen.add(key)
                keep.append(i)
        if not keep:
            return 0
        rows = {k: np.asarray(v, dtype=float)[keep] for k, v in rows.items()}
        quick = analyse_many(self.design.topology, _values(self.design, rows), large_signal=False)
        rows.update(_capacitors(self.design, rows, quick))
        noise = any(s.key in NOISE_FIGURES for s in self.design.spec)
        full = analyse_many(self.design.topology, _values(self.design, rows), noise=noise)
        self.rows += [{k: float(v[i]) for k, v in rows.items()} for i in range(len(keep))]
        for k, v in full.items():
            self.figures[k] = np.concatenate([self.figures[k], v]) if k in self.figures else np.asarray(v)
        table = {k: np.array([r[k] for r in self.rows]) for k in self.rows[0]}
        self.scores = _scores(self.design, table, self.figures, self.design.spec)
        return len(keep)

    def resistors(self, i: int) -> dict:
        return {k: self.rows[i][k] for k in self.keys}

    def best(self, n: int) -> list:
        return [int(i) for i in _rank(self.scores)[:n]]

    def candidate(self, i: int, search: Search) -> Candidate:
        specs = self.design.spec
        m = self.scores[3][i]
        j = int(np.argmin(m))
        design = with_values(self.design, self.rows[i])
        return Candidate(design, {s.key: float(self.figures[s.key][i]) for s in specs},
                         {s.key: float(m[k]) for k, s in enumerate(specs)}, float(m[j]), specs[j].key, None, search)


def _capacitors(design: Design, rows: dict, fig: dict) -> dict:
    """cin, cout (and ce) per row from the resistance each sees (short-circuit
    time constants, the hand method): for a common emitter the bypass takes
    the low corner (common practice), the coupling capacitors sit
    COUPLING_BELOW under it; a follower's output coupling takes it."""
    corner = low_corner(design.spec)
    rs, rl = design.source.rs, design.load.rl
    load = rl if math.isfinite(rl) else 0.0
    coupling = corner / COUPLING_BELOW
    main = corner * (1.0 - (2.0 if design.topology == CE else 1.0) / COUPLING_BELOW)
    out = {"stage.cin": capacitor(rs + fig["rin"], coupling)}
    if design.topology == CE:
        with np.errstate(invalid="ignore", divide="ignore"):
            thevenin = 1.0 / (1.0 / rows["bias.r1"] + 1.0 / rows["bias.r2"] + (1.0 / rs if rs > 0 else math.inf))
            looking = rows["stage.re1"] + (thevenin + fig["r_pi"]) / (fig["beta_ac"] + 1.0)
            seen = rows["stage.re2"] * looking / (rows["stage.re2"] + looking)
        out["stage.ce"] = capacitor(seen, main)
        out["stage.cout"] = capacitor(fig["rout"] + load, coupling)
    else:
        out["stage.cout"] = capacitor(fig["rout"] + load, main)
    for key, values in out.items():
        fallback = getattr(design.stage, key.split(".")[1])
        out[key] = np.where(np.isfinite(values), values, fallback)
    return out
