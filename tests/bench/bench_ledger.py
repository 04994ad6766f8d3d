"""Ledger benchmark: prints `name: value unit` lines; never fails.

Two parts, side by side for histories of 1,000, 3,000 and 10,000 entries
(realistic ones, see long_history.py; built once and cached in the temp
folder, since 10,000 take half a minute):

* whole commands, as a person runs them: ``python -m tui report|set|
  history [--oneline]|undo|diff FILE`` in a subprocess, so interpreter start, reading,
  the work and the save are all in the figure; ``set`` and ``undo`` on a
  fresh copy each run.  The ratio 10,000/1,000 shows how they grow (10 x
  would be linear; start-up and the analysis are the same at every size,
  so loading that grows linearly gives far less).  A one-entry file gives
  what a command costs without any history to read.  ``report`` is also
  timed on the same files without their digest, as an older version (or
  a hand edit) leaves them: the full check of every entry.
* one committed change in process (recompute, history entry and durable
  save), with and without the design's full figures handed over, as the
  workbench hands over its background sweep's.
"""

from __future__ import annotations

import os
import pathlib
import re
import shutil
import statistics
import subprocess
import sys
import tempfile
import time

sys.path.insert(0, str(pathlib.Path(__file__).resolve().parents[2]))
sys.path.insert(0, str(pathlib.Path(__file__).resolve().parent))

from long_history import RC, cached_long_file  # noqa: E402

from model.analyses.figures import analyse  # noqa: E402
from model.design.stage import with_values  # noqa: E402
from model.files.session import DesignSession  # noqa: E402

ROOT = pathlib.Path(__file__).resolve().parents[2]
SIZES = (1000, 3000, 10_000)
COMMANDS = ("report", "set", "history", "history_oneline", "undo", "diff")
CACHE = pathlib.Path(tempfile.gettempdir()) / "stageledger_bench_ledger"
# As an installed tool runs: pip compiles the sources to bytecode when it
# installs them, so the commands must not compile every module on every run
# (a shell with PYTHONDONTWRITEBYTECODE set would make them).
COMMAND_ENV = {**{k: v for k, v in os.environ.items() if k != "PYTHONDONTWRITEBYTECODE"},
               "PYTHONPYCACHEPREFIX": str(CACHE / "bytecode")}
_DIGEST = re.compile(r"\n\[ledger_digest\]\n.*\Z", re.S)


def command_seconds(command: str, path: pathlib.Path, entries: int, scratch: pathlib.Path,
                    repeats: int) -> float | None:
    """Median wall time of one whole command on ``path`` (s); None if the command refused."""
    times = []
    for _ in range(repeats):
        target = path
        if command in ("set", "undo"):
            target = scratch / "copy.toml"
            shutil.copy(path, target)
        args = {"report": ["report", target], "history": ["history", target],
                "history_oneline": ["history", target, "--oneline"],
                "set": ["set", target, "stage.rc=12k", "--note", "bench"], "undo": ["undo", target],
                "diff": ["diff", f"{target}@{max(1, entries // 2)}", target]}[command]
        t = time.perf_counter()
        done = subprocess.run([sys.executable, "-m", "tui", *map(str, args)], cwd=ROOT, env=COMMAND_ENV,
                              stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        times.append(time.perf_counter() - t)
        if done.returncode:
            return None  # a benchmark reports, never fails: a one-entry file has nothing to undo
    return statistics.median(times)


def _shown(seconds: float | None) -> str:
    return "refused" if seconds is None else f"{seconds:.2f} s"


def commit_times(path: pathlib.Path, count: int, known: bool) -> list:
    """Seconds per commit; with ``known``, the commit is handed the design's
    full figures, as the workbench hands over its background sweep's."""
    times = []
    with DesignSession(str(path)) as s:
        for k in range(count):
            value = RC[(len(s.history) + 1) % len(RC)]
            if value == s.design.stage.rc:
                value = RC[(len(s.history) + 2) % len(RC)]
            pair = None
            if known:
                design = with_values(s.design, {"stage.rc": value})
                pair = (design, analyse(design))
            t = time.perf_counter()
            s.commit({"stage.rc": value}, note=f"bench {k}", known=pair)
            times.append(time.perf_counter() - t)
    return times


def main() -> None:
    CACHE.mkdir(exist_ok=True)
    files = {n: cached_long_file(CACHE, n) for n in (1, *SIZES)}
    with tempfile.TemporaryDirectory() as tmp:
        scratch = pathlib.Path(tmp)
        for command in COMMANDS:  # untimed: the first run of each writes its bytecode
            command_seconds(command, files[1], 1, scratch, 1)
        seconds = {}
        for n, path in files.items():
            print(f"file_size_{n}_entries: {path.stat().st_size / 1024:.0f} KiB")
            for command in COMMANDS:
                seconds[command, n] = command_seconds(command, path, n, scratch, 3 if n < 10_000 else 2)
                print(f"command_{command}_{n}_entries: {_shown(seconds[command, n])}")
            if n > 1:
                legacy = scratch / f"legacy_{n}.toml"
                legacy.write_text(_DIGEST.sub("\n", path.read_text(encoding="utf-8")), encoding="utf-8")
                print(f"command_report_{n}_entries_full_check: {_shown(command_seconds('report', legacy, n, scratch, 1))}")
        for command in COMMANDS:
            if seconds[command, 10_000] and seconds[command, 1000]:
                ratio = seconds[command, 10_000] / seconds[command, 1000]
                print(f"growth_{command}_10000_over_1000: {ratio:.2f} x (linear would be 10 x or less)")
        for n in SIZES:
            path = scratch / f"commit_{n}.toml"
            count = 9 if n < 10_000 else 5
            fresh, handed = [], []
            for _ in range(count):  # alternated, so both see the same machine load
                shutil.copy(files[n], path)
                fresh += commit_times(path, 1, known=False)
                handed += commit_times(path, 1, known=True)
            print(f"commit_median_{n}_entries: {1e3 * statistics.median(fresh):.1f} ms")
            print(f"commit_median_{n}_entries_figures_handed_over: {1e3 * statistics.median(handed):.1f} ms")


if __name__ == "__main__":
    main()
