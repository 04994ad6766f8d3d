"""The plain-text and CSV `stageledger spread`: readable without colour, 80 columns wide."""

from __future__ import annotations

import math

from model.design.spread_tables import FRACTIONS, figure_unit
from model.design.units import format_si
from model.spread.analysis import SpreadReport

from .safe_text import visible
from .wrapping import units_kept, wrap

#: Figures in the summary table, in the report's order; the others are in --json.
TABLE = ("ic", "vce", "av_loaded", "av_source", "rin", "rout", "swing_up", "swing_down",
         "thd", "p_transistor", "tj", "f_low", "f_high", "nf_db", "snr_db")
#: Drivers listed per figure in the text.
DRIVERS_SHOWN = 3


def _wrapped(text: str) -> list:
    """``text`` wrapped to 78 columns under a two-space indent, never between
    a number and its per cent sign."""
    return wrap(units_kept(text), 78, indent="    ", first="  ")


def _unit(key: str) -> str:
    """As the text shows a figure: distortions in per cent."""
    return "%" if key in FRACTIONS else figure_unit(key)


def number(key: str, x: float) -> str:
    """One figure value, three figures, its prefix but not its unit."""
    if not math.isfinite(x):
        return "none" if math.isnan(x) or key in ("f_low", "f_high", "bandwidth") else ("∞" if x > 0 else "-∞")
    if key in FRACTIONS:
        return f"{100.0 * x:.3g}"
    if key == "tj":
        return f"{x:.1f}"
    return format_si(x, "")


def with_unit(key: str, x: float) -> str:
    if not math.isfinite(x) or key in FRACTIONS or key == "tj":
        return number(key, x) + (f" {_unit(key)}" if math.isfinite(x) else "")
    return format_si(x, _unit(key))


def percent(x: float) -> str:
    """A fraction in per cent; two places near 0 and 1, so 99.96 % does not read as 100 %."""
    if not math.isfinite(x):
        return "none"
    places = 2 if 0 < x < 0.01 or 0.99 < x < 1 else 1
    return f"{100.0 * x:.{places}f} %"


def render_spread(report: SpreadReport, path: str) -> str:
    """The whole text report."""
    design, ev = report.design, report.evaluated
    lines = [f"{visible(path)}: spread of {report.samples:,} builds (seed {report.seed}, "
             f"{design.tolerance.shape} distribution)"]
    if not ev.spread.keys:
        lines.append("  no tolerance in the file: every build is the nominal design "
                     "(add a [tolerance] table; see README \"Spread\")")
    else:
        lines += _wrapped("varied: " + ", ".join(ev.spread.keys))
    counts = report.counts
    off = [f"{counts[r]:,} of {report.samples:,} {word}" for r, word in
           (("saturation", "saturated"), ("cutoff", "cut off"), ("unsolved", "unsolved")) if counts[r]]
    if off:
        lines.append("  " + "; ".join(off) + " (they fail every spec that needs the active region)")
    lines += _yield_lines(report)
    lines += ["", "figures over the builds (unit in brackets; --json has every figure):",
              f"  {'figure':<17}" + "".join(f"{h:>8}" for h in ("mean", "std", "min", "p01", "p50", "p99", "max"))]
    for key in TABLE:
        s = report.summaries.get(key)
        if s is None:
            continue
        label = f"{key} ({_unit(key)})" if _unit(key) else key
        cells = (s.mean, s.std, s.min, s.p01, s.p50, s.p99, s.max)
        lines.append(f"  {label:<17}" + "".join(f"{' ' + number(key, c):>8}" for c in cells))
    lines += _worst_lines(report, path)
    lines += _driver_lines(report)
    lines += _temperature_lines(report)
    return "\n".join(lines) + "\n"


def _yield_lines(report: SpreadReport) -> list:
    y = report.yields
    if y is None:
        return ["", "yield: no [spec] table in the file, so there is nothing to pass or fail"]
    low, high = y.all.interval
    lines = [""] + wrap(units_kept(f"yield {percent(y.all.value)} (95 % interval {percent(low)} to {percent(high)}), "
                                   f"{y.all.passed:,} of {y.all.total:,} builds pass"), 80)
    for limit in report.design.spec:
        one = y.per_spec[limit.key]
        lo, hi = one.interval
        bound = _limit_text(limit)
        lines.append(f"  {limit.key:<14} {bound:<24} {percent(one.value):>8}  ({percent(lo)} to {percent(hi)})")
    if y.most_failing:
        lines.append(f"  fails most often: {y.most_failing}")
    return lines


def _limit_text(limit) -> str:
    def end(x):
        if x is None:
            return None
        return f"{x:g} dB" if limit.db else with_unit(limit.key, x)
    lo, hi = end(limit.low), end(limit.high)
    if lo and hi:
        return f"{lo} to {hi}"
    return f"at least {lo}" if lo else f"at most {hi}"


def _worst_lines(report: SpreadReport, path: str) -> list:
    if not report.worst:
        return []
    exact = 2 ** report.evaluated.spread.count
    how = f"all {exact:,} corners" if exact <= 4096 else "a corner search, a local extreme (see README)"
    lines = ["", f"worst cases ({how}); its set line rebuilds each:"]
    for key, (lo, hi) in report.worst.items():
        for side, corner in (("lowest", lo), ("highest", hi)):
            if corner is None:
                lines.append(f"  {key} {side}: no corner solves")
                continue
            region = "" if corner.region == "active" else f" ({corner.region})"
            lines.append(f"  {key} {side}: {with_unit(key, corner.value)}{region}")
            lines.append(f"    stageledger set {visible(path)} --dry-run "
                         + " ".join(f"{k}={_part(k, v)}" for k, v in corner.parts.items()))
    return lines


def _part(key: str, value: float) -> str:
    if key == "environment.ambient":
        return f"{value:g}"
    return format_si(value, "", 4).replace(" ", "").replace("µ", "u")


def _driver_lines(report: SpreadReport) -> list:
    keys = [s.key for s in report.design.spec] or ["ic", "av_loaded"]
    lines = ["", "drivers (share of the variance, first order, from a straight-line fit):"]
    any_shown = False
    for key in keys:
        shares = report.drivers.get(key, [])[:DRIVERS_SHOWN]
        if not shares:
            continue
        any_shown = True
        fit = report.fits.get(key, math.nan)
        text = ", ".join(f"{p} {100 * s:.0f} %" for p, s in shares)
        text += f" (fit explains {100 * fit:.0f} %)" if math.isfinite(fit) else ""
        lines += _wrapped(f"{key}: {text}")
    return lines if any_shown else []


def _temperature_lines(report: SpreadReport) -> list:
    if not report.temperature:
        return ["", "temperature: no tolerance.ambient range in the file"]
    keys = ("ic", "vce", "av_loaded", "swing_down", "tj")
    lines = ["", "temperature (parts nominal):", "  " + f"{'ambient':>8}" + "".join(f"{k:>13}" for k in keys),
             "  " + f"{'(°C)':>8}" + "".join(f"{'(' + _unit(k) + ')':>13}" for k in keys)]
    for row in report.temperature:
        cells = "".join(f"{number(k, row[k]):>13}" for k in keys)
        lines.append(f"  {row['ambient']:>8.1f}{cells}" + ("" if row["region"] == "active" else f"  {row['region']}"))
    return lines


def render_csv(report: SpreadReport) -> str:
    """One row per build: the varied values, then region and every figure (SI units)."""
    ev = report.evaluated
    figures = list(ev.figures)
    lines = [",".join(["build", *ev.spread.keys, "region", *figures])]
    for i in range(ev.table.shape[0]):
        region = str(ev.region[i]) if ev.converged[i] else "unsolved"
        cells = [repr(float(v)) for v in ev.table[i]]
        values = [repr(float(ev.figures[k][i])) if math.isfinite(ev.figures[k][i]) else "" for k in figures]
        lines.append(",".join([str(i + 1), *cells, region, *values]))
    return "\n".join(lines) + "\n"
