"""Propose benchmark: prints `name: value unit` lines; never fails.

A common-emitter stage for a geophone preamp on 12 V: loaded gain −30 to
−20, rin at least 4 kΩ, f_low at most 20 Hz, swing_down at least 2 V and a
2 mA supply budget, proposed in E24 values with the production grid, on one
core (the budget of issue 12 is 10 s).  Best of three runs; the search size
is printed beside the time.
"""

from __future__ import annotations

import os
import pathlib
import sys
import time

# One core, as the budget is stated; set before numpy loads its BLAS.
for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

sys.path.insert(0, str(pathlib.Path(__file__).resolve().parents[2]))

from model.advisor.propose import propose  # noqa: E402
from model.design.spread_tables import check_spread_value  # noqa: E402

CE = "common-emitter"
SPECS = {"av_loaded": "-30..-20", "rin": "4k..none", "f_low": "none..20", "swing_down": "2..none",
         "i_supply": "none..2m"}


def main() -> None:
    specs = tuple(check_spread_value(f"spec.{k}", CE, v) for k, v in SPECS.items())
    times, found = [], None
    for _ in range(3):
        t = time.perf_counter()
        found = propose(CE, specs, 12.0, "E24")
        times.append(time.perf_counter() - t)
    best = found[0]
    print(f"propose_common_emitter: {min(times):.2f} s")
    print(f"propose_grid: {best.search.grid} designs")
    print(f"propose_evaluated: {best.search.evaluated} designs")
    print(f"propose_full_analyses: {best.search.full} designs")
    print(f"propose_refinement_rounds: {best.search.rounds} rounds")
    print(f"propose_best_worst_margin: {100 * best.worst:.1f} % ({best.binding})")


if __name__ == "__main__":
    main()
