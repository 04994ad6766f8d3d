"""Frequency-response benchmark: prints `name: value unit` lines; never fails.

Times the response of the bundled geophone preamp: a 400-point sweep with
both −3 dB corners found and every per-capacitor estimate, as the median of
many runs; beside it, the sweep alone (one batched complex solve) and the
same 400 points solved one frequency at a time, in the same run; then the
noise on those 400 points (target: 5 ms on top of the response).  Last, each
workbench picture built from the figures and drawn at 52×20 cells, as the
picture worker does it.
"""

from __future__ import annotations

import pathlib
import sys

import numpy as np

sys.path.insert(0, str(pathlib.Path(__file__).resolve().parents[2]))

from timing import median_ms  # noqa: E402

from model import analyse, read_design  # noqa: E402
from model.analyses.capacitance import device_capacitance, with_device_capacitance  # noqa: E402
from model.analyses.corner_search import frequency_response, sweep  # noqa: E402
from model.analyses.figures import design_values  # noqa: E402
from model.analyses.midband import device_small_signal, midband_figures  # noqa: E402
from model.analyses.noise import noise_spectrum  # noqa: E402
from model.analyses.noise_figures import noise_figures, transistor_noise  # noqa: E402
from model.circuit.newton import operating_point  # noqa: E402
from model.circuit.topologies import build  # noqa: E402
from tui.chart import render_stack  # noqa: E402
from tui.pictures import PICTURES, charts_for  # noqa: E402

DEMO = pathlib.Path(__file__).resolve().parents[2] / "saved_designs" / "geophone_preamp.toml"
POINTS = 400


def main() -> None:
    d = read_design(DEMO)
    stage = build(d.topology, design_values([d]))
    op = operating_point(stage.net)
    mid = float(midband_figures(stage, op, np.array([d.source.rs])).av_source[0])
    caps = device_capacitance(float(device_small_signal(op).gm[0]), d.transistor.ft, d.transistor.cmu)
    ac = with_device_capacitance(stage, caps)
    freq = np.logspace(-1, 7, POINTS)

    def full():
        return frequency_response(stage, op, caps, mid, d.source.freq, points=POINTS)

    r = full()
    assert r.freq.size == POINTS and np.isfinite(r.f_low) and np.isfinite(r.f_high)
    print(f"response_{POINTS}_points_with_corners_median: {median_ms(full, 100):.2f} ms")
    print(f"sweep_{POINTS}_points_one_batched_solve_median: {median_ms(lambda: sweep(ac, op, freq), 100):.2f} ms")
    loop = median_ms(lambda: [sweep(ac, op, freq[i:i + 1]) for i in range(POINTS)], 5)
    print(f"sweep_{POINTS}_points_one_solve_per_point_median: {loop:.2f} ms")
    print("target_response_with_corners: 5 ms")
    # The noise on the same 400 points, on top of the response (target 5 ms):
    # the spectrum alone, and the whole noise figure set (spectrum, the band's
    # 40-a-decade grid, NF, integral, contributors) as analyse computes it.
    rs, ambient = d.source.rs, d.environment.ambient
    t = transistor_noise(d)
    spectrum = median_ms(lambda: noise_spectrum(ac, op, freq, rs=rs, celsius=ambient, transistor=t), 100)
    print(f"noise_{POINTS}_points_spectrum_median: {spectrum:.2f} ms")
    values = design_values([d])
    figures = median_ms(lambda: noise_figures(d, values, ac, op, freq, r.f_low, r.f_high), 100)
    print(f"noise_{POINTS}_points_all_figures_median: {figures:.2f} ms")
    print("target_noise_on_top_of_response: 5 ms")
    fig = analyse(d)
    for kind in PICTURES:
        ms = median_ms(lambda: render_stack(charts_for(kind, d, fig), 52, 20), 30)
        print(f"picture_{kind.replace(' ', '_')}_build_and_draw_median: {ms:.2f} ms")


if __name__ == "__main__":
    main()
