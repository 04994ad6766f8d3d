"""History entries to and from the ``[[history]]`` tables of a design file.

The layout is meant to be read by a person following the story of a design::

    [[history]]
    entry = 2
    time = 2026-12-01 20:31:00+00:00
    action = "set"
    note = "more gain for the quieter sensor"
    changes = [
        { key = "stage.rc", old = 6800.0, new = 10000.0 },
    ]
    raised = ["HEADROOM-SHORT"]

    [history.before]
    ic = 0.000408
    ...
    [history.after]
    ...

Reading validates every field, so a hand-edited or damaged history is
refused with the entry and field named, never half-loaded.
"""

from __future__ import annotations

import datetime as _dt
import math

import tomli_w

from model.analyses.checks import CODES
from model.analyses.regions import REGIONS
from model.design.spread_tables import is_spread_key
from model.design.stage import CE, NONE, check_key, check_known, check_value, design_from_dict, knows, with_article
from model.errors import DesignError
from model.files.ledger import ACTIONS, HEADLINE, REDO, START, UNDO, Change, Entry

_ENTRY_KEYS = ("entry", "time", "action", "from", "reverses", "note", "changes", "raised",
               "cleared", "before", "after", "design")


def entry_to_dict(e: Entry) -> dict:
    d: dict = {"entry": e.number, "time": e.time, "action": e.action}
    if e.origin:
        d["from"] = e.origin
    if e.reverses is not None:
        d["reverses"] = e.reverses
    if e.note:
        d["note"] = e.note
    if e.changes:
        d["changes"] = [{"key": c.key, "old": c.old, "new": c.new} for c in e.changes]
    if e.raised:
        d["raised"] = list(e.raised)
    if e.cleared:
        d["cleared"] = list(e.cleared)
    if e.before:
        d["before"] = dict(e.before)
    d["after"] = dict(e.after)
    if e.snapshot is not None:
        d["design"] = e.snapshot
    return d


def entry_text(e: Entry) -> str:
    """The TOML of one entry; entries never change, so callers may cache it."""
    return tomli_w.dumps({"history": [entry_to_dict(e)]})


def history_from_list(items: object, path: str | None = None) -> list:
    """Validated entries from the parsed ``history`` array."""
    try:
        return _history(items)
    except DesignError as err:
        raise (err.in_file(path) if path else err) from None


def _history(items: object) -> list:
    if not isinstance(items, list):
        raise DesignError("history", _short(items), "must be an array of [[history]] tables")
    out: list = []
    topology = CE
    for i, item in enumerate(items, start=1):
        out.append(_entry(item, i, out, topology))
        topology = topology_after(out[-1], topology)
    return out


def topology_after(entry: Entry, topology: str) -> str:
    """The topology after ``entry``, from the one before it: the start
    snapshot's, or the last change of the ``topology`` key."""
    if entry.snapshot is not None:
        return entry.snapshot.get("topology", CE)
    for c in entry.changes:
        if c.key == "topology":
            topology = c.new
    return topology


def _entry(item: object, number: int, earlier: list, topology: str) -> Entry:
    where = f"history[{number}]"
    if not isinstance(item, dict):
        raise DesignError(where, _short(item), "must be a table")
    for key in item:
        if key not in _ENTRY_KEYS:
            raise DesignError(f"{where}.{key}", _short(item[key]),
                              f"is not a history key; expected {', '.join(_ENTRY_KEYS)}")
    if item.get("entry") != number or type(item.get("entry")) is not int:
        raise DesignError(f"{where}.entry", _short(item.get("entry")), f"must be {number}: entries count up from 1")
    time = item.get("time")
    if not isinstance(time, _dt.datetime) or time.utcoffset() is None:
        raise DesignError(f"{where}.time", _short(time), "must be a date and time with its UTC offset")
    if earlier and time < earlier[-1].time:
        # Entries are appended as they happen: an earlier time is an edit.
        raise DesignError(f"{where}.time", time.isoformat(),
                          f"must not be earlier than entry {number - 1}'s ({earlier[-1].time.isoformat()})")
    action = item.get("action")
    if action not in ACTIONS or (action == START) != (number == 1):
        rule = "must be 'start'" if number == 1 else f"must be one of {', '.join(ACTIONS[1:])}"
        raise DesignError(f"{where}.action", _short(action), rule)
    reverses = item.get("reverses")
    if action in (UNDO, REDO):
        if type(reverses) is not int or not 1 <= reverses < number:
            raise DesignError(f"{where}.reverses", _short(reverses), "must name an earlier entry")
        wanted = (UNDO,) if action == REDO else tuple(a for a in ACTIONS if a not in (START, UNDO))
        if earlier[reverses - 1].action not in wanted:
            raise DesignError(f"{where}.reverses", reverses, f"must name an entry of kind {' or '.join(wanted)}")
    elif reverses is not None:
        raise DesignError(f"{where}.reverses", _short(reverses), "belongs only to undo and redo entries")
    snapshot = item.get("design")
    if action == START:
        if not isinstance(snapshot, dict):
            raise DesignError(f"{where}.design", _short(snapshot), "a start entry must hold the whole design")
        try:
            topology = design_from_dict({"format": 1, **snapshot}).topology  # validates the snapshot
        except DesignError as err:
            # Name the snapshot's key, not the design key of the same name above it.
            raise DesignError(f"{where}.design.{err.field}", err.value, err.rule) from None
    elif snapshot is not None:
        raise DesignError(f"{where}.design", "...", "only the start entry holds a design snapshot")
    if action != START and not item.get("changes"):
        raise DesignError(f"{where}.changes", _short(item.get("changes", [])),
                          f"must hold at least one change: {with_article(action)} entry records what it changed")
    return Entry(
        number=number, time=time.astimezone(_dt.timezone.utc), action=action,
        changes=_changes(item.get("changes", []), where, topology),
        note=_text(item.get("note", ""), f"{where}.note"),
        before=_figures(item.get("before", {}), f"{where}.before"),
        after=_figures(item.get("after", {}), f"{where}.after"),
        raised=_codes(item.get("raised", []), f"{where}.raised"),
        cleared=_codes(item.get("cleared", []), f"{where}.cleared"),
        reverses=reverses,
        origin=_text(item["from"], f"{where}.from") if "from" in item else None,
        snapshot=snapshot,
    )


def _changes(items, where, topology) -> tuple:
    """The entry's changes, each side checked against the rules of the
    topology it belongs to: a change of topology comes first, so the keys
    after it step from the old topology's values to the new one's ("none"
    where a topology lacks the key)."""
    if not isinstance(items, list):
        raise DesignError(f"{where}.changes", _short(items), "must be an array of {key, old, new} tables")
    out = []
    old_topology = new_topology = topology
    for k, c in enumerate(items, start=1):
        here = f"{where}.changes[{k}]"
        if not isinstance(c, dict) or set(c) != {"key", "old", "new"}:
            raise DesignError(here, _short(c), "must be a table with exactly key, old and new")
        if not isinstance(c["key"], str):
            raise DesignError(f"{here}.key", _short(c["key"]), "must be a design key such as stage.rc")
        # Checked here, against the design's rules, so that a history that
        # would not replay is refused with its entry named, not later by replay.
        if c["key"] == "topology":
            if k != 1:
                raise DesignError(f"{here}.key", c["key"], "a change of topology must be the entry's first change")
            for side in ("old", "new"):
                try:
                    check_value("topology", CE, c[side])
                except DesignError as err:
                    raise DesignError(f"{here}.{side}", err.value, err.rule) from None
            if c["old"] != topology:
                raise DesignError(f"{here}.old", c["old"], f"must be {topology!r}, the topology the entry changes")
            new_topology = c["new"]
            out.append(Change("topology", c["old"], c["new"]))
            continue
        known = [t for t in dict.fromkeys((old_topology, new_topology)) if knows(c["key"], t)]
        if not known:
            try:
                check_known(c["key"], topology)
            except DesignError as err:
                raise DesignError(f"{here}.key", _short(c["key"]), err.rule) from None
        for side, side_topology in (("old", old_topology), ("new", new_topology)):
            # A tolerance or spec range is an array [min, max], as in its table.
            kinds = (int, float, str, list) if is_spread_key(c["key"]) else (int, float, str)
            if not isinstance(c[side], kinds) or isinstance(c[side], bool):
                raise DesignError(f"{here}.{side}", _short(c[side]), "must be a number or text")
            if not knows(c["key"], side_topology):
                if c[side] != NONE:
                    raise DesignError(f"{here}.{side}", _short(c[side]),
                                      f"must be {NONE!r}: {with_article(side_topology)} design has no {c['key']}")
                continue
            try:
                check_key(c["key"], side_topology, c[side])
            except DesignError as err:
                raise DesignError(f"{here}.{side}", err.value, err.rule) from None
        out.append(Change(c["key"], c["old"], c["new"]))
    return tuple(out)



def _figures(table, where) -> dict:
    if not isinstance(table, dict):
        raise DesignError(where, _short(table), "must be a table of figures")
    for key, value in table.items():
        if key not in HEADLINE:
            raise DesignError(f"{where}.{key}", _short(value), f"is not a recorded figure; expected {', '.join(HEADLINE)}")
        ok = value in REGIONS if key == "region" else (
            isinstance(value, (int, float)) and not isinstance(value, bool) and not math.isnan(value))
        if not ok:
            raise DesignError(f"{where}.{key}", _short(value),
                              "must be a number" if key != "region" else f"must be one of {', '.join(REGIONS)}")
    return dict(table)


def _codes(items, where) -> tuple:
    if not isinstance(items, list) or not all(isinstance(c, str) for c in items):
        raise DesignError(where, _short(items), "must be an array of warning codes")
    unknown = [c for c in items if c not in CODES]
    if unknown:
        raise DesignError(where, _short(unknown[0]), "is not a warning code (README, Warnings)")
    return tuple(items)


def _text(value, where) -> str:
    if not isinstance(value, str):
        raise DesignError(where, _short(value), "must be text")
    return value


def _short(value: object) -> object:
    text = repr(value)
    return value if len(text) <= 60 else text[:57] + "..."
