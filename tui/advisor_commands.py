"""The advisor's commands: aim and options.

Each prints its result and returns 0; a StageledgerError (an unreachable
target among them) becomes one line on stderr and exit status 2 in
:mod:`tui.cli`, with the file untouched.
"""

from __future__ import annotations

from model.advisor.aim import AimResult, aim
from model.advisor.options import COST_FIGURES, options
from model.advisor.search import parse_target
from model.design.fields import FIELDS
from model.design.units import format_si
from model.errors import StageledgerError
from model.files import plain_json
from model.files.ledger import headline, warning_codes
from model.files.session import NOTHING_TO_COMMIT, DesignSession

from .consequences import render_changes, render_consequences, render_entry
from .safe_text import visible


def aim_lines(result: AimResult, series: str) -> list:
    """The search in words: the range, the exact value, the series values."""
    t = result.target
    ranges = "; ".join(f"{k} {_value(k, lo)} to {_value(k, hi)}" for k, lo, hi in result.ranges)
    lines = [f"aim {t.figure} at {t.words()} by {', '.join(result.keys)} "
             f"(now {t.shown(result.present)}; searched {ranges})"]
    exact = ", ".join(f"{k} = {_value(k, v, 5)}" for k, v in result.exact.items())
    lines.append(f"  exact: {exact} gives {t.shown(result.exact_figure)}")
    one = len(result.keys) == 1 and len(result.snaps) == 2
    for i, s in enumerate(result.snaps):
        label = ("below" if i == 0 else "above") if one else "value" if len(result.snaps) == 1 else "combination"
        mark = "  ← chosen (closest)" if s is result.chosen else ""
        values = ", ".join(f"{k} = {_value(k, v)}" for k, v in s.values.items())
        lines.append(f"  {series} {label}: {values} gives {t.shown(s.figure)}{mark}")
    return lines


def _value(key: str, value: float, digits: int = 3) -> str:
    unit = FIELDS[key].unit
    if unit and unit != "°C":
        return format_si(value, unit, digits)
    return f"{value:.{digits}g} {unit}".rstrip()


def cmd_aim(path: str, item: str, vary: list, series: str | None, dry_run: bool, note: str,
            drop_comments: bool) -> int:
    target = parse_target(item)
    with DesignSession(path, lock=not dry_run, drop_comments=drop_comments) as s:
        result = aim(s.design, target, vary=tuple(vary), series=series)
        if not result.reached:
            raise result.unreachable()
        lines = aim_lines(result, series or s.design.parts.series)
        values = result.changes(s.design)
        if not values:
            print("\n".join([*lines, "the present value is already the closest on the series: nothing to change"]))
            return 0
        if dry_run:
            p = s.preview(values)
            if not p.changes:
                raise StageledgerError(NOTHING_TO_COMMIT)
            lines += ["preview (not saved):", *render_changes(p.changes)]
            before, after = headline(p.before, p.yields[0]), headline(p.after, p.yields[1])
            old, new = set(warning_codes(p.before)), set(warning_codes(p.after))
            lines += render_consequences(before, after, sorted(new - old), sorted(old - new))
            print("\n".join(lines))
            return 0
        full_note = result.note() + (f"; {note}" if note else "")
        entry = s.commit(values, full_note)
    print("\n".join(lines))
    print("\n".join(render_entry(entry)))
    print(f"saved {visible(path)} (entry {entry.number})")
    return 0


def cmd_options(path: str, item: str, as_json: bool) -> int:
    target = parse_target(item)
    with DesignSession(path, lock=False) as s:
        design, present = s.design, getattr(s.figures, target.figure)
        ways = options(design, target, yield_of=s.yield_of)
    if as_json:
        data = {"figure": target.figure, "target": target.value, "db": target.db, "present": present,
                "options": [{**o.to_dict(), "words": o.words(design)} for o in ways]}
        print(plain_json.dumps(data))
        return 0
    print("\n".join(options_lines(design, target, present, ways)))
    return 0


def options_lines(design, target, present: float, ways: list) -> list:
    lines = [f"ways to bring {target.figure} to {target.words()} (now {target.shown(present)}), cheapest first:"]
    reached = [o for o in ways if o.reached]
    for n, o in enumerate(reached, 1):
        lines.append(f"  {n}. {o.words(design)}  (gives {target.shown(o.figure)}; cost {o.cost:.2f})")
    if not reached:
        lines.append("  none within the knobs' ranges")
    others = [o for o in ways if not o.reached]
    if others:
        lines.append("cannot:")
        lines += [f"  - {o.words(design)}" for o in others]
    lines.append("cost: the sum of |ln(after/before)| over the watched figures that get worse "
                 f"({', '.join(COST_FIGURES)})")
    return lines
