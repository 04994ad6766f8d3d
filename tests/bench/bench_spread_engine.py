"""Spread-engine benchmark: prints `name: value unit` lines; never fails.

Rows are the geophone demo with resistors ±1 %, capacitors ±20 %, β 100–400
and ambient −10…50 °C (a seeded numpy Generator).  Side by side in one run:
100,000 rows of DC + midband + dissipation through analyse_many without the
large-signal figures, 10,000 rows with them (split into swing and
distortion, and the corners), each the best of three runs, and 200 of the
same rows through a loop of analyse() for the ratio and the largest
differences between the two.
"""

from __future__ import annotations

import pathlib
import sys
import time
from dataclasses import replace

import numpy as np

sys.path.insert(0, str(pathlib.Path(__file__).resolve().parents[2]))

from model import analyse, read_design  # noqa: E402
from model.analyses.batch_figures import analyse_many  # noqa: E402
from model.analyses.figures import design_values  # noqa: E402

DEMO = pathlib.Path(__file__).resolve().parents[2] / "saved_designs" / "geophone_preamp.toml"
RESISTORS = ("bias.r1", "bias.r2", "stage.rc", "stage.re1", "stage.re2", "source.rs", "load.rl")
CAPACITORS = ("stage.ce", "stage.cin", "stage.cout", "load.cl")


def spread_values(n: int, seed: int = 11) -> dict:
    """n sampled builds of the geophone demo (design_values form)."""
    rng = np.random.default_rng(seed)
    base = design_values([read_design(DEMO)])
    values = {k: np.repeat(v, n) for k, v in base.items()}
    for k in RESISTORS:
        values[k] = values[k] * rng.uniform(0.99, 1.01, n)
    for k in CAPACITORS:
        values[k] = values[k] * rng.uniform(0.8, 1.2, n)
    values["transistor.beta"] = rng.uniform(100.0, 400.0, n)
    values["environment.ambient"] = rng.uniform(-10.0, 50.0, n)
    return values


def designs_of(values: dict, rows: range) -> list:
    """The same rows as Design objects, for the analyse() loop."""
    demo = read_design(DEMO)
    out = []
    for k in rows:
        stage = replace(demo.stage, **{name.split(".")[1]: float(values[name][k])
                                       for name in RESISTORS + CAPACITORS if name.startswith("stage.")})
        out.append(replace(
            demo, stage=stage,
            bias=replace(demo.bias, r1=float(values["bias.r1"][k]), r2=float(values["bias.r2"][k])),
            source=replace(demo.source, rs=float(values["source.rs"][k])),
            load=replace(demo.load, rl=float(values["load.rl"][k]), cl=float(values["load.cl"][k])),
            transistor=replace(demo.transistor, beta=float(values["transistor.beta"][k])),
            environment=replace(demo.environment, ambient=float(values["environment.ambient"][k])),
        ))
    return out


def _timed(fn, repeats: int = 1):
    """(result, shortest wall time of ``repeats`` calls in s): the least
    disturbed run on a shared machine."""
    best = float("inf")
    for _ in range(repeats):
        t = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - t)
    return out, best


def split(values: dict) -> dict:
    """Seconds spent in swing + distortion and in the corners of the same rows."""
    from model.analyses import batch_corners, batch_transfer
    spent = {"large_signal_many": 0.0, "response_many": 0.0}
    originals = {"large_signal_many": batch_transfer.large_signal_many, "response_many": batch_corners.response_many}
    from model.analyses import batch_figures

    def wrap(name):
        def timed(*args, **kwargs):
            out, s = _timed(lambda: originals[name](*args, **kwargs))
            spent[name] += s
            return out
        return timed

    for name in originals:
        setattr(batch_figures, name, wrap(name))
    try:
        analyse_many("common-emitter", values)
    finally:
        for name, fn in originals.items():
            setattr(batch_figures, name, fn)
    return spent


def main() -> None:
    quick_n, full_n, loop_n = 100_000, 10_000, 200
    quick_values, full_values = spread_values(quick_n), spread_values(full_n, seed=12)
    analyse_many("common-emitter", {k: v[:500] for k, v in full_values.items()})  # warm caches and imports
    quick, quick_s = _timed(lambda: analyse_many("common-emitter", quick_values, large_signal=False), 3)
    full, full_s = _timed(lambda: analyse_many("common-emitter", full_values), 3)
    designs = designs_of(full_values, range(loop_n))
    loop, loop_s = _timed(lambda: [analyse(d) for d in designs])
    print(f"spread_quick_rows: {quick_n} rows, {int(quick['converged'].sum())} converged")
    print(f"spread_quick_wall_best_of_3: {quick_s:.3f} s")
    print(f"spread_full_rows: {full_n} rows, {int(full['converged'].sum())} converged")
    print(f"spread_full_wall_best_of_3: {full_s:.3f} s")
    parts = split(full_values)
    print(f"spread_full_swing_distortion: {parts['large_signal_many']:.3f} s")
    print(f"spread_full_corners: {parts['response_many']:.3f} s")
    print(f"analyse_loop_rows: {loop_n} rows")
    print(f"analyse_loop_wall: {loop_s:.3f} s ({1e3 * loop_s / loop_n:.2f} ms a row)")
    print(f"full_over_loop_per_row: {(loop_s / loop_n) / (full_s / full_n):,.0f} x")
    print(f"quick_over_loop_per_row: {(loop_s / loop_n) / (quick_s / quick_n):,.0f} x")
    for key in ("ic", "av_source", "swing_up", "swing_down", "thd", "f_low", "f_high", "gain_at_freq"):
        want = np.array([getattr(f, key) for f in loop])
        worst = np.max(np.abs(full[key][:loop_n] - want) / np.abs(want))
        print(f"loop_vs_batch_{key}_worst_relative: {worst:.1e}")


if __name__ == "__main__":
    main()
