"""The ledger commands: new, set, undo, redo, history and diff.

Each prints a clear result and returns 0; a StageledgerError raised here
becomes one line on stderr and exit status 2 in :mod:`tui.cli`.
"""

from __future__ import annotations

from model import analyse
from model.design.fields import with_article
from model.design.stage import TOPOLOGIES, default_design, with_values
from model.errors import StageledgerError
from model.files.ledger import changes_between, headline, warning_codes
from model.files.session import NOTHING_TO_COMMIT, DesignSession, create, design_at

from .consequences import render_changes, render_consequences, render_entry
from .safe_text import visible


def parse_assignments(items: list) -> dict:
    """``["stage.rc=10k", ...]`` → ``{"stage.rc": "10k"}``; bad items are refused."""
    values = {}
    for item in items:
        key, sep, value = item.partition("=")
        if not sep or not key.strip():
            raise StageledgerError(f"{item!r}: expected KEY=VALUE, for example stage.rc=10k")
        values[key.strip()] = value.strip()
    return values


def cmd_new(path: str, topology: str | None, origin: str | None, items: list = ()) -> int:
    """Create ``path`` from the defaults of ``topology`` or from ``origin``,
    with the starting values ``items`` (KEY=VALUE, validated as by set and
    logged as the start entry's changes). Nothing is written if one is bad."""
    if origin:
        design, label = design_at(origin)
        if topology and topology != design.topology:
            raise StageledgerError(f"--topology {topology} conflicts with {origin}, {with_article(design.topology)} design")
    else:
        design, label = default_design(topology or TOPOLOGIES[0]), None
    values = parse_assignments(list(items))
    if "topology" in values:
        raise StageledgerError(f"topology = {values['topology']!r}: a new design takes its topology from "
                               "--topology, not KEY=VALUE")
    start = with_values(design, values)
    changes = changes_between(design, start)
    create(path, start, origin=label, changes=changes)
    print(f"created {visible(path)}: {with_article(design.topology)} design"
          + (f" from {visible(label)}" if label else " from defaults"))
    if changes:
        print("\n".join(render_changes(changes)))
    return 0


def cmd_set(path: str, items: list, note: str, dry_run: bool, drop_comments: bool) -> int:
    values = parse_assignments(items)
    if dry_run:
        with DesignSession(path, lock=False) as s:
            p = s.preview(values)
            if not p.changes:
                raise StageledgerError(NOTHING_TO_COMMIT)
            lines = ["preview (not saved):", *render_changes(p.changes)]
            before, after = headline(p.before, p.yields[0]), headline(p.after, p.yields[1])
            old, new = set(warning_codes(p.before)), set(warning_codes(p.after))
            lines += render_consequences(before, after, sorted(new - old), sorted(old - new))
        print("\n".join(lines))
        return 0
    with DesignSession(path, drop_comments=drop_comments) as s:
        entry = s.commit(values, note)
    _print_entry(path, entry)
    return 0


def cmd_reverse(path: str, which: str, note: str, drop_comments: bool) -> int:
    with DesignSession(path, drop_comments=drop_comments) as s:
        entry = s.undo(note) if which == "undo" else s.redo(note)
    _print_entry(path, entry)
    return 0


def _print_entry(path: str, entry) -> None:
    print("\n".join(render_entry(entry)))
    print(f"saved {visible(path)} (entry {entry.number})")


def cmd_diff(a: str, b: str) -> int:
    design_a, label_a = design_at(a)
    design_b, label_b = design_at(b)
    lines = [f"{visible(label_a)} → {visible(label_b)}"]
    if design_a.topology != design_b.topology:
        lines.append(f"  topology: {design_a.topology} → {design_b.topology}")
        lines.append("  (different topologies: parameters are not compared key by key)")
    else:
        changes = changes_between(design_a, design_b)
        lines += render_changes(changes) or ["  parameters: identical"]
    fa, fb = analyse(design_a), analyse(design_b)
    old, new = set(warning_codes(fa)), set(warning_codes(fb))
    lines += render_consequences(headline(fa), headline(fb), sorted(new - old), sorted(old - new))
    print("\n".join(lines))
    return 0
