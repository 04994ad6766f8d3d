"""``options``: every usual way of reaching a target, ranked by what it costs.

The ways tried: each of the board's parts alone (bias.r1, bias.r2,
stage.rc, stage.re1, stage.re2 or stage.re, the capacitors) and the supply,
plus the pairs a designer moves together: r1 and r2 at a fixed ratio (the
divider's impedance, its bias point kept) and re1 and re2 at a fixed sum
(the gain-setting share of an emitter resistance, its DC kept).  The
source and the load are left out: they are the sensor and the next stage,
given to the designer, not chosen; so are the transistor's own values.

Every line is scanned in ONE batched call, all bracketed lines narrowed
together (one call per step), every line's series neighbours solved in one
call; only then is each chosen design analysed in full with
:func:`model.analyse` (and its yield drawn, when the design has specs).

Cost: the sum, over the figures that get worse, of |ln(after/before)| --
equal weights, since the advisor cannot know which the designer values
most, and a log ratio so that halving and doubling weigh alike.  The
figures watched (COST_FIGURES) are the headroom (swing_up, swing_down),
rin, rout, p_supply, f_high, thd, the input-referred noise density
en_total (a front-end's first figure: a way that buys gain with a noisier
emitter resistance must show it) and the yield; the aimed figure itself is
never a cost, nor is a change under NEGLIGIBLE (about 0.5 %).  Ratios
are clipped to [1e-3, 1e3] (a swing that falls to 0 costs ln 1000 ≈ 6.9),
and a figure that is not finite before or after (f_high with no upper
corner) is left out.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from model.advisor import search
from model.advisor.aim import Snap, solve_rows
from model.advisor.search import Engine, Line, Target
from model.analyses.figures import Figures, analyse
from model.design.fields import FIELDS
from model.design.stage import Design, get_value, keys_for, with_values
from model.design.units import format_si
from model.errors import DesignError
from model.files.session import ledger_yield

#: The figures a way may give up, and the direction that is better for each (+1 higher).
COST_FIGURES = {"swing_up": 1, "swing_down": 1, "rin": 1, "rout": -1, "p_supply": -1,
                "f_high": 1, "thd": -1, "en_total": -1, "yield": 1}
#: Each figure's weight in the cost (equal: see the module's docstring).
WEIGHTS = {k: 1.0 for k in COST_FIGURES}
RATIO_CLIP = 1e3
#: A change smaller than this (in |ln ratio|, about 0.5 %) is no loss: it is
#: below what the figures are shown to, and would only clutter the words.
NEGLIGIBLE = 0.005
#: The single knobs tried, where the topology has them.
SINGLE_KNOBS = ("bias.r1", "bias.r2", "bias.rf", "bias.rb", "stage.rc", "stage.re1", "stage.re2", "stage.re",
                "stage.ce", "stage.cb", "stage.cin", "stage.cout", "supply.vcc", "supply.vee")


@dataclass(frozen=True)
class Loss:
    """One figure a way gives up: before and after (SI; yield a fraction) and its cost."""

    figure: str
    before: float
    after: float
    cost: float


@dataclass(frozen=True)
class Option:
    """One way to the target.  reached: it gets there within its range;
    values: the snapped keys; figure: the aimed figure there (SI, from
    analyse); losses: the watched figures that get worse, worst first;
    cost: their sum; why: for an unreachable way, the reason in words."""

    name: str
    keys: tuple
    reached: bool
    values: dict
    design: Design | None
    figure: float
    losses: tuple
    cost: float
    why: str = ""

    def words(self, before: Design) -> str:
        """e.g. "raise stage.rc to 15.0 kΩ: swing_down −1.80 V, rout +84 %"."""
        moves = ", ".join(_move(k, float(get_value(before, k)), v) for k, v in self.values.items())
        if not self.reached:
            return f"{self.name}: {self.why}"
        costs = ", ".join(_loss_words(x) for x in self.losses) or "gives up none of the watched figures"
        return f"{moves}: {costs}"

    def to_dict(self) -> dict:
        return {"name": self.name, "keys": list(self.keys), "reached": self.reached,
                "values": self.values, "figure": self.figure, "cost": self.cost, "why": self.why,
                "losses": [{"figure": x.figure, "before": x.before, "after": x.after, "cost": x.cost}
                           for x in self.losses]}


def _move(key: str, old: float, new: float) -> str:
    verb = "raise" if new > old else "lower" if new < old else "keep"
    return f"{verb} {key} to {_shown(key, new)}"


def _shown(key: str, value: float) -> str:
    unit = FIELDS[key].unit
    return format_si(value, unit, 3) if unit else f"{value:.3g}"


def _loss_words(loss: Loss) -> str:
    """One loss in words, ASCII signs (the command line's; the workbench
    draws its own minus)."""
    if loss.figure in ("swing_up", "swing_down"):
        return f"{loss.figure} {loss.after - loss.before:+.2f} V"
    if loss.figure in ("thd", "yield"):
        before, after = _distinct_percent(loss.before, loss.after)
        return f"{loss.figure} {before} % → {after} %"
    return f"{loss.figure} {100 * (loss.after / loss.before - 1):+.0f} %"


def _distinct_percent(before: float, after: float) -> tuple[str, str]:
    """Two fractions in per cent to three figures, or to as many more (up to
    five) as it takes to tell them apart: a loss over NEGLIGIBLE never reads
    "0.136 % → 0.136 %"."""
    for digits in (3, 4, 5):
        pair = f"{100 * before:.{digits}g}", f"{100 * after:.{digits}g}"
        if pair[0] != pair[1]:
            break
    return pair


def lines_for(design: Design) -> tuple[list, list]:
    """(lines, refused): the ways tried, and (name, why) for knobs that cannot be."""
    used = keys_for(design.topology)
    lines, refused = [], []

    def add(make, name):
        try:
            lines.append(make())
        except DesignError as err:
            refused.append((name, err.rule))

    for key in (k for k in SINGLE_KNOBS if k in used):
        add(lambda key=key: search.scale_line(design, (key,), (1.0,), key), key)
    if "bias.r1" in used:
        add(lambda: search.scale_line(design, ("bias.r1", "bias.r2"), (1.0, 1.0),
                                      "bias.r1 and bias.r2 at a fixed ratio"), "bias.r1 and bias.r2 at a fixed ratio")
    if "stage.re1" in used and design.stage.re1 + design.stage.re2 > 0:
        lines.append(search.share_line(design, "stage.re1", "stage.re2"))
    return lines, refused


def options(design: Design, figure: str | Target, target: float | str | None = None,
            series: str | None = None, yield_of=None) -> list:
    """Every way to bring ``figure`` to ``target``: the reachable ones by
    cost (cheapest first), then the unreachable ones with why.

    ``yield_of(design) -> fraction | None`` gives the yield cost (the ledger's
    :func:`model.files.session.ledger_yield` by default, when the design has specs).
    """
    tgt = search.as_target(figure, target)
    if tgt.db:
        search.check_sense(tgt, getattr(analyse(design, large_signal=tgt.large_signal), tgt.figure))
    series = series or design.parts.series
    yield_of = yield_of or ledger_yield
    engine = Engine(design, tgt)
    lines, refused = lines_for(design)
    grids = [ln.grid() for ln in lines]
    misses, raws = search.evaluate(engine, lines, grids)
    brackets = [search.bracket(ln, g, m, r) for ln, g, m, r in zip(lines, grids, misses, raws)]
    found = [i for i, b in enumerate(brackets) if b.found]
    found_roots = search.roots(engine, [lines[i] for i in found], [brackets[i] for i in found])
    exact = {i: {k: float(v[0]) for k, v in lines[i].values(p).items()} for i, (p, _, _) in zip(found, found_roots)}
    chosen = _snap_all(engine, lines, found, exact, series)
    base = analyse(design)
    base_yield = yield_of(design) if design.spec else None
    out = []
    for i, line in enumerate(lines):
        if i not in chosen:
            out.append(_unreachable(line, brackets[i], tgt))
            continue
        values = {k: v for k, v in chosen[i].values.items() if v != float(get_value(design, k))}
        if not values:
            out.append(Option(line.name, line.keys, False, {}, None, math.nan, (), math.inf,
                              "the series values around the target are the present ones"))
            continue
        new = with_values(design, values)
        after = analyse(new)
        new_yield = yield_of(new) if base_yield is not None else None
        losses = _losses(base, after, base_yield, new_yield, tgt.figure)
        out.append(Option(line.name, line.keys, True, values, new, float(getattr(after, tgt.figure)), losses,
                          sum(x.cost for x in losses)))
    out += [Option(name, (name,), False, {}, None, math.nan, (), math.inf, why) for name, why in refused]
    reached, seen = [], set()
    for o in sorted((o for o in out if o.reached), key=lambda o: (o.cost, len(o.keys), o.name)):
        # A pair whose snap moves only one of its keys is that key's own way again.
        if o.design not in seen:
            seen.add(o.design)
            reached.append(o)
    return reached + [o for o in out if not o.reached]


def _snap_all(engine: Engine, lines: list, found: list, exact: dict, series: str) -> dict:
    """Each bracketed line's series combination closest to the target, every
    line's combinations solved in one call (the keys a line leaves alone at
    their present values)."""
    rows, owner = [], []
    for i in found:
        for r in search.snap_rows(engine.design, lines[i].keys, exact[i], series):
            rows.append(r)
            owner.append(i)
    if not rows:
        return {}
    keys = tuple(dict.fromkeys(k for r in rows for k in r))
    full = {k: float(get_value(engine.design, k)) for k in keys}
    chosen = {}
    for i, s, r in zip(owner, solve_rows(engine, [{**full, **r} for r in rows]), rows):
        if math.isfinite(s.miss) and (i not in chosen or abs(s.miss) < abs(chosen[i].miss)):
            chosen[i] = Snap(r, s.figure, s.miss)
    return chosen


def _unreachable(line: Line, br, tgt: Target) -> Option:
    if not math.isfinite(br.raw_a):
        why = "no design along it solved in the active region"
    else:
        ends = line.values([line.low, line.high])
        span = "; ".join(f"{k} {_shown(k, float(v[0]))} to {_shown(k, float(v[1]))}" for k, v in ends.items())
        why = f"cannot reach {tgt.words()} within {span}; the closest is {tgt.shown(br.raw_a)}"
    return Option(line.name, line.keys, False, {}, None, math.nan, (), math.inf, why)


def _losses(before: Figures, after: Figures, y0, y1, aimed: str) -> tuple:
    pairs = {k: (getattr(before, k), getattr(after, k)) for k in COST_FIGURES if k != "yield"}
    if y0 is not None and y1 is not None:
        pairs["yield"] = (y0, y1)
    losses = []
    for k, (b, a) in pairs.items():
        if k == aimed or not (math.isfinite(b) and math.isfinite(a)):
            continue
        ratio = _clip(a, b)
        cost = WEIGHTS[k] * max(0.0, -COST_FIGURES[k] * math.log(ratio))
        if cost > WEIGHTS[k] * NEGLIGIBLE:
            losses.append(Loss(k, float(b), float(a), cost))
    return tuple(sorted(losses, key=lambda x: -x.cost))


def _clip(after: float, before: float) -> float:
    """after/before clipped to [1/RATIO_CLIP, RATIO_CLIP] (0 and sign flips included)."""
    if before <= 0 and after <= 0:
        return 1.0
    if before <= 0:
        return RATIO_CLIP
    if after <= 0:
        return 1 / RATIO_CLIP
    return min(max(after / before, 1 / RATIO_CLIP), RATIO_CLIP)
