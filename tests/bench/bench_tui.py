"""Workbench benchmark: prints `name: value unit` lines; never fails.

* keypress → updated readout: Up/Down steps on a part, p50 and p95 over
  240 edits, driven headless with Pilot.  Each step previews a candidate, so
  the quick analysis and the readout redraw are inside the timing.  The time
  runs from just before the key is sent to the end of the first screen
  paint after the readout changed.  Pilot's own round trip for a key that
  does nothing is printed beside it for comparison.  The same edits are
  then timed with each key posted to the app the way the terminal driver
  posts it, without Pilot's wait for every widget's queue after a key;
* Tab → the editor on the next row and painted, p50 and p95, keys posted
  as the driver posts them;
* start → first frame: the installed command in tmux, polled until the
  readout is on screen, median of five starts; a bare Textual app with one
  line of text is started in turn with it, as the floor on this machine
  (skipped without tmux or the installed command).
"""

from __future__ import annotations

import asyncio
import pathlib
import shlex
import shutil
import statistics
import subprocess
import sys
import tempfile
import time

sys.path.insert(0, str(pathlib.Path(__file__).resolve().parents[2]))

# tui first: it sets Textual's frame rate before Textual is imported.
from textual import events  # noqa: E402

from tui.launch import make_app  # noqa: E402
from tui.widgets.knobs import Knobs  # noqa: E402

DEMO = pathlib.Path(__file__).resolve().parents[2] / "saved_designs" / "geophone_preamp.toml"
EDITS = 240


def _watch(app):
    """Times of every readout refresh and of every screen paint."""
    marks = {"readout": [], "painted": []}
    refresh = app._refresh_readout

    def refreshed():
        refresh()
        marks["readout"].append(time.perf_counter())

    app._refresh_readout = refreshed
    return marks


def _latency(marks, since):
    """From ``since`` to the first paint after the first readout refresh after it."""
    refreshed = next((t for t in marks["readout"] if t > since), None)
    if refreshed is None:
        return None
    return next((t - since for t in marks["painted"] if t >= refreshed), None)


async def keypress_times(path: str) -> tuple:
    app = make_app(path)
    marks = _watch(app)
    times, idle, direct, previewed = [], [], [], 0
    async with app.run_test(size=(80, 24)) as pilot:
        screen = app.screen
        paint = screen._compositor_refresh

        def painted():
            paint()
            marks["painted"].append(time.perf_counter())

        screen._compositor_refresh = painted
        await pilot.press("tab", "tab", "tab")  # vcc → r1 → r2 → rc
        assert app.query_one("#knob-label").content == "rc"
        await pilot.pause()
        for k in range(EDITS):
            t = time.perf_counter()
            await pilot.press("up" if (k // 6) % 2 == 0 else "down")
            await pilot.pause()
            latency = _latency(marks, t)
            if latency is not None:
                times.append(latency)
            previewed += app.candidate is not None
        for _ in range(40):
            t = time.perf_counter()
            await pilot.press("right")
            await pilot.pause()
            idle.append(time.perf_counter() - t)
        # The same edits with each key posted to the app as the terminal
        # driver posts it, and nothing else waiting in between: Pilot's
        # press() also makes every widget drain its queue before it returns.
        for k in range(EDITS):
            t = time.perf_counter()
            app.post_message(events.Key("up" if (k // 6) % 2 == 0 else "down", None))
            while _latency(marks, t) is None and time.perf_counter() - t < 2.0:
                await asyncio.sleep(0.0005)
            latency = _latency(marks, t)
            if latency is not None:
                direct.append(latency)
            await pilot.pause()
        moves = await _tab_times(app, marks)
    # Every sixth step returns to the committed value, which shows no candidate.
    assert previewed >= EDITS * 2 // 3, previewed
    return times, idle, direct, moves


async def _tab_times(app, marks) -> list:
    """Tab and Shift+Tab, posted as the driver posts them, from the key to the
    first paint after the editor has moved: down the panel and back, so every
    row (and the scrolling at 80×24) is crossed."""
    knobs = app.query_one(Knobs)
    select, moved = knobs.select, []

    def selecting(key):
        moved.append(time.perf_counter())
        return select(key)

    knobs.select = selecting
    knobs.select("supply.vcc")
    times = []
    for key in ["tab"] * (len(knobs.keys) - 2) + ["shift+tab"] * (len(knobs.keys) - 2):
        t = time.perf_counter()
        app.post_message(events.Key(key, "\t" if key == "tab" else None))
        latency = None
        while latency is None and time.perf_counter() - t < 2.0:
            await asyncio.sleep(0.0005)
            arrived = next((m for m in moved if m > t), None)
            if arrived is not None:
                latency = next((p - t for p in marks["painted"] if p >= arrived), None)
        if latency is not None:
            times.append(latency)
    return times


#: A Textual app with one line of text: the floor any Textual program starts from.
BARE = ("from textual.app import App; from textual.widgets import Static\n"
        "class Bare(App):\n    def compose(self): yield Static('operating point')\n"
        "Bare().run()")
STARTS = 5


def first_frame(command: str) -> float | None:
    """Seconds from starting ``command`` in a 100×30 tmux to "operating point" on screen."""
    sock = "stageledger-bench"
    t = time.perf_counter()
    subprocess.run(["tmux", "-L", sock, "new-session", "-d", "-x", "100", "-y", "30", command], check=True)
    try:
        while time.perf_counter() - t < 20:
            screen = subprocess.run(["tmux", "-L", sock, "capture-pane", "-p"], capture_output=True,
                                    text=True).stdout
            if "operating point" in screen:
                return time.perf_counter() - t
            time.sleep(0.01)
        return None
    finally:
        subprocess.run(["tmux", "-L", sock, "kill-server"], capture_output=True)
        time.sleep(0.2)  # the server's socket must be gone before the next start


def first_frames(path: str) -> dict | None:
    """Median first frame of the workbench and of the bare app, started in turn
    so that both see the same machine load."""
    if not (shutil.which("tmux") and shutil.which("stageledger")):
        return None
    commands = {"workbench": f"stageledger {path}", "bare": f"{sys.executable} -c {shlex.quote(BARE)}"}
    times = {name: [] for name in commands}
    for _ in range(STARTS):
        for name, command in commands.items():
            times[name].append(first_frame(command))
    if any(t is None for runs in times.values() for t in runs):
        return None
    return {name: statistics.median(runs) for name, runs in times.items()}


def main() -> None:
    with tempfile.TemporaryDirectory() as tmp:
        path = str(pathlib.Path(tmp) / "bench.toml")
        shutil.copy(DEMO, path)
        times, idle, direct, moves = asyncio.run(keypress_times(path))
        cuts = statistics.quantiles(times, n=20)
        print(f"keypress_to_readout_edits: {len(times)} edits")
        print(f"keypress_to_readout_p50: {1e3 * statistics.median(times):.1f} ms")
        print(f"keypress_to_readout_p95: {1e3 * cuts[18]:.1f} ms")
        cuts = statistics.quantiles(direct, n=20)
        print(f"driver_key_to_readout_edits: {len(direct)} edits")
        print(f"driver_key_to_readout_p50: {1e3 * statistics.median(direct):.1f} ms")
        print(f"driver_key_to_readout_p95: {1e3 * cuts[18]:.1f} ms")
        print(f"pilot_round_trip_noop_key_p50: {1e3 * statistics.median(idle):.1f} ms")
        cuts = statistics.quantiles(moves, n=20)
        print(f"tab_to_next_row_moves: {len(moves)} moves")
        print(f"tab_to_next_row_p50: {1e3 * statistics.median(moves):.1f} ms")
        print(f"tab_to_next_row_p95: {1e3 * cuts[18]:.1f} ms")
        starts = first_frames(path)
        if starts is None:
            print("start_to_first_frame: skipped (needs tmux and the installed command)")
        else:
            print(f"start_to_first_frame: {starts['workbench']:.2f} s (median of {STARTS})")
            print(f"bare_textual_first_frame: {starts['bare']:.2f} s (median of {STARTS}, same runs)")

if __name__ == "__main__":
    main()
