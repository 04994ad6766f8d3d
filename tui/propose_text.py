"""``stageledger propose``: read the --spec arguments, run the search, write
the best design (only if it meets every spec) and print the three best."""

from __future__ import annotations

import math
import os

from model.advisor.propose import Candidate, propose, resistor_keys
from model.design.eseries import series_names
from model.design.spread_tables import check_spread_value, file_value
from model.design.stage import default_design, with_article, with_values
from model.design.units import format_si
from model.errors import DesignError, StageledgerError
from model.files.session import create, design_at

from .safe_text import visible

SPEC_FORMS = "KEY=MIN..MAX or KEY=[MIN,MAX] (either end 'none'; gains may be in dB, e.g. 20dB)"
_CAPACITORS = ("stage.ce", "stage.cin", "stage.cout")
NONE_WORD = "none"


def parse_specs(items: list, topology: str) -> tuple:
    """``["av_loaded=-40..-30", "rin=[10k,none]"]`` → Limits, read by the [spec] table's own rules."""
    seen, out = set(), []
    for item in items:
        key, sep, value = item.partition("=")
        key = key.strip()
        if not sep or not key:
            raise DesignError("--spec", item, f"must be {SPEC_FORMS}")
        key = key if key.startswith("spec.") else f"spec.{key}"
        if key in seen:
            raise DesignError(key, value, "is given twice; give each spec once")
        seen.add(key)
        text = value.strip()
        if text.startswith("[") and text.endswith("]"):
            text = [end.strip() for end in text[1:-1].split(",")]
        limit = check_spread_value(key, topology, text)
        if limit is None:
            raise DesignError(key, value, f"must be a range, not 'none': {SPEC_FORMS}")
        out.append(limit)
    return tuple(out)


def cmd_propose(path: str, topology: str, items: list, supply: float | None, series: str,
                origin: str | None) -> int:
    if os.path.lexists(path):
        raise StageledgerError(f"{path}: already exists; propose writes a new design file and never overwrites one")
    if series.upper() not in series_names():
        raise DesignError("--series", series, "must be one of " + ", ".join(series_names()))
    base = design_at(origin)[0] if origin else default_design(topology)
    if base.topology != topology:
        raise StageledgerError(f"--topology {topology} conflicts with {origin}, {with_article(base.topology)} design")
    specs = parse_specs(items, topology)
    vcc = base.supply.vcc if supply is None else supply
    found = propose(topology, specs, vcc, series.upper(), base.tolerance if origin else None, base=base)
    best = found[0]
    lines = render_candidates(found)
    if not best.meets:
        print("\n".join(lines))
        raise StageledgerError(
            f"{path}: not written: no design in {best.search.evaluated:,} meets every spec; the best misses "
            f"{best.binding} by {-best.worst:.1%} (margin {best.worst:+.1%})")
    s = best.search
    note = (f"proposed from {len(specs)} spec(s) on {vcc:g} V, {series.upper()} values: grid of {s.grid:,} designs, "
            f"{s.evaluated:,} evaluated in all ({s.full:,} in full), {s.rounds} refinement round(s); best worst-case margin "
            f"{best.worst:+.1%} ({best.binding})")
    design = best.design
    design = with_values(design, {"name": "proposed from specs" if design.name == "untitled" else design.name})
    create(path, design, origin=origin, note=note)
    print(f"created {visible(path)}: the best of {s.evaluated:,} designs ({s.grid:,} on the grid, "
          f"{s.full:,} analysed in full, {s.rounds} refinement round(s))")
    print("\n".join(lines))
    return 0


def render_candidates(found: list) -> list:
    """The candidates' parts and each spec's figure, limit and margin."""
    lines = []
    for n, c in enumerate(found, 1):
        verdict = "meets every spec" if c.meets else f"short on {c.binding}"
        yield_ = "" if c.yield_ is None else f", yield {c.yield_:.1%}"
        lines.append(f"{n}. worst margin {c.worst:+.1%} ({c.binding}){yield_}: {verdict}")
        lines.append("   " + "  ".join(_part(c, k) for k in resistor_keys(c.design.topology) + _used(c)))
        for limit in c.design.spec:
            lines.append(f"   {limit.key:<12} {_figure(limit, c.figures[limit.key]):>12}  "
                         f"in {_limit_text(limit):<22} margin {c.margins[limit.key]:+.1%}")
    return lines


def _used(c: Candidate) -> tuple:
    return tuple(k for k in _CAPACITORS if k != "stage.ce" or c.design.topology == "common-emitter")


def _part(c: Candidate, key: str) -> str:
    table, name = key.split(".")
    value = getattr(getattr(c.design, table), name)
    return f"{name}={format_si(value, 'F' if key in _CAPACITORS else 'Ω')}"


_UNITS = {"ic": "A", "ib": "A", "i_supply": "A", "p_supply": "W", "p_transistor": "W", "rin": "Ω", "rout": "Ω",
          "rin_base": "Ω", "ro": "Ω", "r_pi": "Ω", "f_low": "Hz", "f_high": "Hz", "bandwidth": "Hz", "tj": "°C"}


def _figure(limit, value: float) -> str:
    if limit.db:
        return f"{20 * math.log10(abs(value)):.2f} dB" if value == value and value != 0 else "none"
    unit = _UNITS.get(limit.key, "V" if limit.key.startswith(("v", "swing")) else "")
    return format_si(value, unit) if value == value else "none"


def _limit_text(limit) -> str:
    if limit.db:
        low, high = file_value(limit)
    else:
        low, high = (NONE_WORD if x is None else _figure(limit, x) for x in (limit.low, limit.high))
    return f"[{low}, {high}]"
