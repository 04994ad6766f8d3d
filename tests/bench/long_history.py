"""Design files with long, realistic histories, for the ledger benchmark and tests.

The entries are made by the ledger's own constructors (start_entry,
change_entry) from real analyses of the designs they record, and serialised by
the session's writer, so the file is what thousands of commits would leave;
only the analyses are shared between entries that reach the same design,
so that building 10,000 entries takes seconds, not the hour of real commits.

The story repeats every five entries: a set of stage.rc with a note, a set
of stage.rc and stage.re1 together, an undo of that, a redo of the undo,
and a set of source.rs.
"""

from __future__ import annotations

import dataclasses
import datetime as _dt
import pathlib
import shutil
import sys

sys.path.insert(0, str(pathlib.Path(__file__).resolve().parents[2]))

from model.analyses.figures import analyse  # noqa: E402
from model.design.stage import with_values  # noqa: E402
from model.files import ledger  # noqa: E402
from model.files.designfile import dumps_checked_document, read_document  # noqa: E402
from model.files.historyfile import entry_text  # noqa: E402
from model.files.session import ledger_yield  # noqa: E402

DEMO = pathlib.Path(__file__).resolve().parents[2] / "saved_designs" / "geophone_preamp.toml"
RC = (8.2e3, 9.1e3, 10e3, 11e3)
RE1 = (150.0, 180.0)
RS = (470.0, 560.0, 680.0)


class _Analyses:
    """Figures and yield of each design met, worked out once."""

    def __init__(self):
        self._seen: dict = {}

    def __call__(self, design):
        if design not in self._seen:
            self._seen[design] = (analyse(design), ledger_yield(design))
        return self._seen[design]


def long_history(start, entries: int) -> list:
    """``entries`` ledger Entries from the design ``start`` (the first is its start entry)."""
    figures = _Analyses()
    design = start
    fig, y = figures(design)
    history = [ledger.start_entry(design, fig, note="the station's first build", yield_=y)]
    # Three minutes apart, ending now: a commit made next must not go back in time.
    time = history[0].time - _dt.timedelta(minutes=3 * entries)
    history[0] = _at(history[0], time)
    while len(history) < entries:
        n = len(history) + 1
        k = n // 5
        step = n % 5
        action, reverses, note = ledger.SET, None, ""
        if step == 2:
            values, note = {"stage.rc": RC[k % len(RC)]}, f"rc for more gain, try {k}"
        elif step == 3:
            values = {"stage.rc": RC[(k + 1) % len(RC)], "stage.re1": RE1[k % len(RE1)]}
        elif step == 4:
            action, reverses = ledger.UNDO, n - 1
            values = {c.key: c.old for c in history[n - 2].changes}
        elif step == 0:
            action, reverses = ledger.REDO, n - 1
            values = {c.key: c.old for c in history[n - 2].changes}
        else:
            values = {"source.rs": RS[k % len(RS)]}
        new = with_values(design, values)
        changes = ledger.changes_between(design, new)
        for rs in RS:
            if changes:
                break
            # The design already holds the value: a different change, as a person would make.
            new, action, reverses, note = with_values(design, {"source.rs": rs}), ledger.SET, None, ""
            changes = ledger.changes_between(design, new)
        (before, y0), (after, y1) = figures(design), figures(new)
        entry = ledger.change_entry(n, action, changes, before, after, note=note, reverses=reverses,
                                    yields=(y0, y1))
        time += _dt.timedelta(minutes=3)
        history.append(_at(entry, time))
        design = new
    return history


def _at(entry, time):
    return dataclasses.replace(entry, time=time)


def write_long_file(path: pathlib.Path, entries: int) -> pathlib.Path:
    """A copy of the geophone demo at ``path`` holding a history of ``entries`` entries."""
    shutil.copy(DEMO, path)
    start = read_document(path).design
    history = long_history(start, entries)
    design = ledger.replay(history)
    path.write_bytes(dumps_checked_document(design, [entry_text(e) for e in history]).encode("utf-8"))
    return path


def cached_long_file(folder: pathlib.Path, entries: int) -> pathlib.Path:
    """:func:`write_long_file` in ``folder``, reused when it is already there."""
    path = folder / f"history_{entries}.toml"
    if not path.exists():
        write_long_file(path, entries)
    return path
