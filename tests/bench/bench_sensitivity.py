"""Sensitivity benchmark: prints `name: value unit` lines; never fails.

The sensitivity matrix of the geophone demo (every knob's ± pair in one
analyse_many call, swing, distortion and the response included), beside
one full analyse() of the same design, side by side in one run so the
ratio reads on a shared machine; and the yield column (a 2,000-build
Monte Carlo per knob side) once.  Target (one core): the matrix in 30 ms.
"""

from __future__ import annotations

import pathlib
import sys
import time

sys.path.insert(0, str(pathlib.Path(__file__).resolve().parents[2]))

from timing import median_ms  # noqa: E402

from model import analyse, read_design  # noqa: E402
from model.advisor.sensitivity import sensitivity_matrix  # noqa: E402

DEMO = pathlib.Path(__file__).resolve().parents[2] / "saved_designs" / "geophone_preamp.toml"


def main() -> None:
    demo = read_design(DEMO)
    sens = sensitivity_matrix(demo)  # warm: plans compiled, imports done
    analyse(demo)
    matrix = median_ms(lambda: sensitivity_matrix(demo), 15)
    single = median_ms(lambda: analyse(demo), 15)
    print(f"sensitivity rows: {len(sens.knobs)} knobs ({2 * len(sens.knobs)} designs in one batch)")
    print(f"sensitivity matrix (demo, 11 columns): {matrix:.1f} ms (target 30 ms)")
    print(f"one analyse() of the same design: {single:.1f} ms (matrix / analyse = {matrix / single:.1f})")
    t = time.perf_counter()
    sensitivity_matrix(demo, with_yield=True)
    print(f"sensitivity matrix with the yield column: {time.perf_counter() - t:.2f} s")


if __name__ == "__main__":
    main()
