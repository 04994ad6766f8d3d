"""Ledger benchmark: prints `name: value unit` lines; never fails.

Measures one committed change (recompute, history entry and durable save)
on design files that already hold 10, 1,000 and 10,000 history entries,
side by side in one run; and the same commit handed the design's full
figures, as the workbench hands over its background sweep's (no recompute).
A session is opened per commit in both, so the file is read each time too,
and that is outside the timing.
"""

from __future__ import annotations

import pathlib
import shutil
import statistics
import sys
import tempfile
import time

sys.path.insert(0, str(pathlib.Path(__file__).resolve().parents[2]))

from model import ledger  # noqa: E402
from model.analyses.figures import analyse  # noqa: E402
from model.design.stage import with_values  # noqa: E402
from model.files.designfile import dumps_document, read_document  # noqa: E402
from model.files.historyfile import entry_text  # noqa: E402
from model.files.session import DesignSession  # noqa: E402

DEMO = pathlib.Path(__file__).resolve().parents[2] / "saved_designs" / "geophone_preamp.toml"
VALUES = (8.2e3, 9.1e3, 10e3, 11e3)


def file_with_history(folder: pathlib.Path, entries: int) -> pathlib.Path:
    """A design file whose history alternates stage.rc through VALUES.

    The entries are built directly (their figures copied from one analysis),
    because only the cost of the *next* commit is being measured.
    """
    path = folder / f"h{entries}.toml"
    shutil.copy(DEMO, path)
    with DesignSession(str(path)) as s:
        s.commit({"stage.rc": VALUES[1]})
        first, second = s.history
    history, design = [first], s.design
    for n in range(2, entries + 1):
        old, new = VALUES[(n - 1) % len(VALUES)], VALUES[n % len(VALUES)]
        history.append(ledger.Entry(n, second.time, ledger.SET, (ledger.Change("stage.rc", old, new),),
                                    before=second.before, after=second.after))
    design = ledger.replay(history)
    path.write_text(dumps_document(design, [entry_text(e) for e in history]), encoding="utf-8")
    assert len(read_document(path).history) == entries
    return path


def commit_times(path: pathlib.Path, count: int, known: bool) -> list:
    """Seconds per commit; with ``known``, the commit is handed the design's
    full figures, as the workbench hands over its background sweep's."""
    times = []
    with DesignSession(str(path)) as s:
        for k in range(count):
            value = VALUES[(len(s.history) + 1) % len(VALUES)]
            if value == s.design.stage.rc:
                value = VALUES[(len(s.history) + 2) % len(VALUES)]
            pair = None
            if known:
                design = with_values(s.design, {"stage.rc": value})
                pair = (design, analyse(design))
            t = time.perf_counter()
            s.commit({"stage.rc": value}, note=f"bench {k}", known=pair)
            times.append(time.perf_counter() - t)
    return times


def main() -> None:
    with tempfile.TemporaryDirectory() as tmp:
        folder = pathlib.Path(tmp)
        results = {}
        for entries in (10, 1000, 10_000):
            path = file_with_history(folder, entries)
            count = 15 if entries < 10_000 else 7
            # Alternated, so both see the same machine load.
            fresh, handed = [], []
            for _ in range(count):
                fresh += commit_times(path, 1, known=False)
                handed += commit_times(path, 1, known=True)
            results[entries] = statistics.median(fresh)
            size = path.stat().st_size
            print(f"commit_median_{entries}_entries: {1e3 * results[entries]:.1f} ms")
            print(f"commit_median_{entries}_entries_figures_handed_over: {1e3 * statistics.median(handed):.1f} ms")
            print(f"file_size_{entries}_entries: {size / 1024:.0f} KiB")
        print(f"growth_10000_over_1000: {results[10_000] / results[1000]:.2f} x (linear would be 10 x or less)")


if __name__ == "__main__":
    main()
