"""Spread benchmark: prints `name: value unit` lines; never fails.

On the geophone demo with its own [tolerance] and [spec], side by side in
one run: 100,000 builds of DC + midband + yield (specs on DC and midband
figures only), 10,000 builds with swing, distortion and the response, the
whole `stageledger spread` report at 10,000 builds (worst-case corners and
the temperature table included), and the Spread picture's histogram at
2,000 builds drawn into a 60×20 picture, as the workbench does after a
keystroke.  Targets (one core): 0.25 s, 1 s and 150 ms.
"""

from __future__ import annotations

import pathlib
import sys
import time

sys.path.insert(0, str(pathlib.Path(__file__).resolve().parents[2]))

from model import analyse, read_design  # noqa: E402
from model.design.stage import with_values  # noqa: E402
from model.spread.analysis import sample, spread_report, yield_of  # noqa: E402
from tui.chart import render_stack  # noqa: E402
from tui.spread_picture import spread_chart  # noqa: E402

DEMO = pathlib.Path(__file__).resolve().parents[2] / "saved_designs" / "geophone_preamp.toml"


def best_of(fn, repeats: int = 3) -> float:
    """Best wall time of ``fn()`` over ``repeats`` calls (s): the machine is shared."""
    times = []
    for _ in range(repeats):
        t = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t)
    return min(times)


def main() -> None:
    demo = read_design(DEMO)
    # The same tolerances with specs on figures the DC and midband solve gives.
    quick = with_values(demo, {f"spec.{s.key}": "none" for s in demo.spec}
                        | {"spec.av_loaded": "-38..-34.5", "spec.ic": "300u..500u", "spec.rin": "15k..none"})
    t = best_of(lambda: yield_of(quick, sample(quick, 100_000, large_signal=False)))
    print(f"spread dc+midband+yield 100,000 builds: {t:.3f} s (target 0.25 s)")
    t = best_of(lambda: sample(demo, 10_000))
    print(f"spread with swing, distortion and response 10,000 builds: {t:.3f} s (target 1 s)")
    t = best_of(lambda: spread_report(demo, 10_000), repeats=1)
    print(f"spread report (all figures, 2,048 corners, temperature) 10,000 builds: {t:.3f} s")
    fig = analyse(demo)
    t = best_of(lambda: render_stack(spread_chart(demo, fig, "f_low"), 60, 20))
    print(f"spread picture 2,000 builds, drawn 60x20: {1e3 * t:.0f} ms (target 150 ms)")


if __name__ == "__main__":
    main()
