"""Advisor benchmark: prints `name: value unit` lines; never fails.

The three advisor benchmarks side by side in one run, on the same machine
state: the sensitivity matrix (target 30 ms), aim with one knob (target
100 ms) and options, and propose for a common-emitter stage (target 10 s,
with the search size).  Each can also be run alone.
"""

from __future__ import annotations

import pathlib
import sys

sys.path.insert(0, str(pathlib.Path(__file__).resolve().parent))

import bench_aim  # noqa: E402
import bench_propose  # noqa: E402
import bench_sensitivity  # noqa: E402

if __name__ == "__main__":
    for bench in (bench_sensitivity, bench_aim, bench_propose):
        bench.main()
