"""Advisor benchmark (aim and options): prints `name: value unit` lines; never fails.

On the geophone demo, side by side in one run: aim with one knob on a
midband figure (av_loaded by stage.rc) and on a large-signal one
(swing_down by stage.rc), aim with two knobs, one model.analyse for scale,
and options on av_loaded with and without the yield (the demo has specs,
so each way's yield is 2,000 builds).  Target: aim with one knob ≤ 100 ms.
"""

from __future__ import annotations

import pathlib
import sys
import time

sys.path.insert(0, str(pathlib.Path(__file__).resolve().parents[2]))

from model import analyse, read_design  # noqa: E402
from model.advisor.aim import aim  # noqa: E402
from model.advisor.options import options  # noqa: E402

DEMO = pathlib.Path(__file__).resolve().parents[2] / "saved_designs" / "geophone_preamp.toml"


def best_of(fn, repeats: int = 3):
    """(best wall time over ``repeats`` calls in s, the last result): the machine is shared."""
    times, out = [], None
    for _ in range(repeats):
        t = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t)
    return min(times), out


def main() -> None:
    demo = read_design(DEMO)
    aim(demo, "av_loaded", "33dB", ("stage.rc",))  # warm the plan caches
    t, _ = best_of(lambda: analyse(demo))
    print(f"analyse (one design, full): {1e3 * t:.1f} ms")
    for label, fig, target, vary in (("aim av_loaded by stage.rc", "av_loaded", "33dB", ("stage.rc",)),
                                     ("aim swing_down by stage.rc", "swing_down", "3.5", ("stage.rc",)),
                                     ("aim av_loaded by stage.rc and stage.re1", "av_loaded", "30dB",
                                      ("stage.rc", "stage.re1"))):
        t, r = best_of(lambda: aim(demo, fig, target, vary))
        print(f"{label}: {1e3 * t:.1f} ms ({r.rows} designs solved; target 100 ms for one knob)")
    t, ways = best_of(lambda: options(demo, "av_loaded", "-40", yield_of=lambda d: None))
    print(f"options av_loaded=-40 without yield: {1e3 * t:.0f} ms ({sum(o.reached for o in ways)} of {len(ways)} ways reached)")
    t, _ = best_of(lambda: options(demo, "av_loaded", "-40"), repeats=1)
    print(f"options av_loaded=-40 with yield (2,000 builds a way): {1e3 * t:.0f} ms")


if __name__ == "__main__":
    main()
