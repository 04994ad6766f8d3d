"""analyse_many against analyse(design), row by row.

analyse is the reference: the same engine one design at a time, with the
swing from a fine grid and a quadratic extrapolation, the distortion from a
256-point period and the corners from two rounds of 32-point grids.  The
batched path finds the same quantities by other searches (see the
docstrings of model/analyses/batch_transfer.py and batch_corners.py), so:

* DC, midband, dissipation, tj and gain_at_freq: the same solves on batches
  of another size (other assembly and elimination paths, see
  tests/test_batch_paths.py): 1e-9 relative.
* f_low, f_high: both searches end inside a bracket around the one crossing,
  analyse's 5.2e-5 decade wide and ours 1e-6, so they can differ by at most
  10**(5.3e-5) − 1 ≈ 1.3e-4 relative; held to 1e-3.
* swing: the edge found places it on analyse's own grids, where analyse's
  extrapolation is replayed on the same points; they differ by the solves'
  rounding unless an edge lies within the search's 1e-10 of a grid point.
  Held to 1e-3 relative or 1 mV (analyse's own extrapolation can be 0.7 %
  from the edge, see batch_transfer).
* thd, hd2, hd3: the full period solved as analyse does, or the 16-point one
  where it stands (checked against the full one below); 1e-3 relative or
  1e-6 absolute.

Designs are drawn across decades as tests/test_engine_properties.py draws
them (both topologies and polarities, optional parts absent, open loads,
drives that clip), with a cut-off and a saturated stage in every batch, and
around the geophone demo.  (The whole rule space of model/design/fields.py
is not used: at its extremes, 1e-24 F or corners near 1e12 Hz, the
frequency response itself is noisy at the 1e-3 dB level, so neither search
can place a corner to 1e-3.)  Hypothesis
runs derandomized (tests/conftest.py), so the suite cannot fail by chance.
"""

from __future__ import annotations

import math
import pathlib
import sys
from dataclasses import replace

import numpy as np
import pytest
from hypothesis import HealthCheck, example, given, settings
from hypothesis import strategies as st
from test_engine_properties import designs
from test_output_strict import CUT_OFF_CE, CUT_OFF_EF_PNP, SATURATED_CE, SATURATED_EF

from model import analyse, read_design
from model.analyses import transfer
from model.analyses.batch_figures import (
    FOLLOWER_FIGURES,
    LARGE_FIGURES,
    NOISE_FIGURES,
    QUICK_FIGURES,
    UNSOLVED,
    analyse_many,
)
from model.analyses.batch_transfer import _distortion, _HeldRows, large_signal_many
from model.analyses.figures import dc_midband, design_values
from model.circuit.topologies import build
from model.design.stage import TOPOLOGIES, TWO_TRANSISTORS, default_design, with_values
from model.errors import DesignError, SolveError

sys.path.insert(0, str(pathlib.Path(__file__).resolve().parent / "bench"))

from bench_spread_engine import DEMO, spread_values  # noqa: E402

SETTINGS = settings(max_examples=25, deadline=None, derandomize=True, database=None,
                    suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much])

#: (relative, absolute) tolerance per figure; see the module docstring.
EXACT = (1e-9, 0.0)
TOLERANCE = {k: EXACT for k in QUICK_FIGURES + FOLLOWER_FIGURES + ("gain_at_freq",)}
TOLERANCE.update(swing_up=(1e-3, 1e-3), swing_down=(1e-3, 1e-3),
                 thd=(1e-3, 1e-6), hd2=(1e-3, 1e-6), hd3=(1e-3, 1e-6),
                 f_low=(1e-3, 0.0), f_high=(1e-3, 0.0), bandwidth=(1e-3, 0.0),
                 # At source.freq the noise is the same solve; the SNR's band
                 # ends are the corners above, found to 1e-3 of a corner,
                 # which moves the integral by well under 0.01 dB.
                 en_total=EXACT, nf_db=(1e-9, 1e-9), snr_db=(0.0, 0.01))

NEW_TOPOLOGIES = tuple(t for t in TOPOLOGIES if t not in ("common-emitter", "emitter-follower"))
EVERY_EXTREME = {"common-emitter": (CUT_OFF_CE, SATURATED_CE), "emitter-follower": (CUT_OFF_EF_PNP, SATURATED_EF)}


def _designs(topology: str, drawn: list) -> list:
    out = []
    for values in drawn:
        try:
            out.append(with_values(default_design(topology), values))
        except DesignError:
            # Valid values alone, refused together (a rule across keys).
            continue
    return out


def _compare(designs: list, got: dict, noise: bool = False) -> None:
    """Each row of ``got`` against analyse of its design; the noise figures
    too with ``noise`` (analyse_many leaves them NaN otherwise)."""
    for row, d in enumerate(designs):
        try:
            want = analyse(d)
        except SolveError:
            assert not got["converged"][row]
            assert got["region"][row] == UNSOLVED
            assert all(math.isnan(got[k][row]) for k in QUICK_FIGURES + LARGE_FIGURES)
            continue
        assert got["converged"][row], row
        assert got["region"][row] == want.region, row
        assert got["region2"][row] == want.region2, row
        unsolved_period = _period_unsolved(d)
        if not noise:
            assert all(math.isnan(got[k][row]) for k in NOISE_FIGURES)
        for key in QUICK_FIGURES + LARGE_FIGURES + (FOLLOWER_FIGURES if want.two_transistors else ()) + (
                NOISE_FIGURES if noise else ()):
            if key in ("thd", "hd2", "hd3") and unsolved_period:
                # analyse takes the samples a Newton cut short left (their
                # values depend on the batch they ran in); analyse_many says NaN.
                assert math.isnan(got[key][row]), f"row {row} {key}"
                continue
            rtol, atol = TOLERANCE[key]
            _assert_figure(got[key][row], getattr(want, key), rtol, atol, f"row {row} {key} ({d.topology})")


def _period_unsolved(d) -> bool:
    """Whether some point of d's distortion period fails to converge, solved
    the way transfer.py solves it (one call, its own Newton starts)."""
    if d.source.vpk <= 0:
        return False
    values = design_values([d])
    stage = build(d.topology, values)
    op, _, _ = dc_midband(stage, values["source.rs"])
    held = transfer._held(stage, op)
    wave, _ = transfer._period(d.source.vpk)
    return not held.solve(wave, start=transfer._predictor(stage, op, held)(wave)).converged.all()


def _assert_figure(got: float, want: float, rtol: float, atol: float, what: str) -> None:
    """Equal classification (NaN, ±inf, 0 exactly when analyse says 0 and no
    absolute slack is allowed), then closeness."""
    if math.isnan(want) or math.isinf(want):
        assert got == want or (math.isnan(got) and math.isnan(want)), f"{what}: {got} != {want}"
        return
    assert math.isfinite(got), f"{what}: {got} != {want}"
    assert abs(got - want) <= atol + rtol * abs(want), f"{what}: {got} != {want}"


@SETTINGS
@given(st.sampled_from(("common-emitter", "emitter-follower")).flatmap(
    lambda t: st.tuples(st.just(t), st.lists(designs(t), min_size=2, max_size=5))))
# A follower driven hard into saturation: some points of its distortion
# period do not converge (found by a randomized run).
@example(("emitter-follower", [with_values(default_design("emitter-follower"), {
    "supply.vcc": 13.05, "bias.r1": 299.87, "bias.r2": 213.7e3, "stage.rc": 0.0, "stage.re": 8310.3,
    "stage.cout": 1e-4, "source.rs": 0.0, "source.vpk": 1.7783, "load.rl": 572.6e3, "load.cl": 0.0,
    "transistor.beta": 796.1, "transistor.va": 197.0, "transistor.i_s": 1e-16, "environment.ambient": 13.0})]))
def test_every_figure_agrees_with_analyse_over_varied_designs(drawn):
    topology, drawn_designs = drawn
    # A cut-off and a saturated row ride in every batch, as do other shapes.
    extremes = [values for _, values in EVERY_EXTREME[topology]]
    batch = drawn_designs + _designs(topology, extremes)
    _compare(batch, analyse_many(topology, design_values(batch), noise=True), noise=True)


@SETTINGS
@given(st.sampled_from(NEW_TOPOLOGIES).flatmap(
    lambda t: st.tuples(st.just(t), st.lists(designs(t), min_size=2, max_size=5))))
def test_every_figure_agrees_with_analyse_for_the_newer_topologies(drawn):
    """The batched path is the same engine for every builder: a common base,
    collector feedback, the CE-follower (both transistors' figures) and the
    split-supply stages agree with one design at a time, with the default
    design of the topology riding in every batch."""
    topology, drawn_designs = drawn
    batch = drawn_designs + [default_design(topology)]
    got = analyse_many(topology, design_values(batch), noise=True)
    _compare(batch, got, noise=True)
    if topology not in TWO_TRANSISTORS:
        assert all(np.isnan(got[k]).all() for k in FOLLOWER_FIGURES) and set(got["region2"]) == {""}


@settings(SETTINGS, max_examples=15)
@given(st.integers(0, 2**31), st.sampled_from(("npn", "pnp")), st.floats(1e-4, 0.2))
# Row 1's saturation edge lies inside the first fine step of transfer.py's
# cell, so analyse reports that step's inner end, 9 mV short of the edge's
# own excursion; analyse_many must report the same.
@example(seed=8735, polarity="npn", vpk=0.125)
def test_every_figure_agrees_with_analyse_around_the_demo(seed, polarity, vpk):
    # The use the spread analysis is for: one design's sampled builds.
    values = spread_values(6, seed=seed)
    demo = with_values(read_design(DEMO), {"transistor.polarity": polarity, "source.vpk": vpk})
    designs = [with_values(demo, {k: float(values[k][i]) for k in
                                  ("bias.r1", "bias.r2", "stage.rc", "stage.re1", "stage.re2", "stage.ce",
                                   "stage.cin", "stage.cout", "source.rs", "load.rl", "load.cl",
                                   "transistor.beta", "environment.ambient")})
               for i in range(6)]
    _compare(designs, analyse_many("common-emitter", design_values(designs)))


def _held(designs):
    values = design_values(designs)
    stage = build(designs[0].topology, values)
    op, _, _ = dc_midband(stage, values["source.rs"])
    assert op.converged.all()
    return _HeldRows(stage, op), values["source.vpk"]


@settings(SETTINGS, max_examples=15)
@given(st.sampled_from(("common-emitter", "emitter-follower")), st.sampled_from(("npn", "pnp")),
       st.floats(-6.0, math.log10(2.0)), st.floats(0.3, 3.0))
def test_the_short_period_stands_only_where_it_equals_the_full_one(topology, polarity, log_vpk, bias_scale):
    # The claim of batch_transfer: where the 16-point period is taken, its
    # harmonics are those of the full 256-point period analyse solves.  The
    # full period is the reference (numpy's FFT of the same solved points).
    d = default_design(topology)
    designs = [with_values(d, {"transistor.polarity": polarity, "source.vpk": 10.0**log_vpk * k,
                               "bias.r2": d.bias.r2 * bias_scale}) for k in (0.1, 0.3, 1.0)]
    held, vpk = _held(designs)
    rows = np.arange(len(designs))
    *quick, _ = _distortion(held, rows, vpk)
    *full, _ = _distortion(held, rows, vpk, points=256)
    for q, f in zip(quick, full):
        np.testing.assert_allclose(q, f, rtol=1e-6, atol=1e-9)


def test_the_short_period_is_taken_for_the_demo_and_refused_when_clipping():
    # The benchmark's rows (2 mV into the geophone preamp) are smooth enough
    # for the short period; 0.5 V clips the stage, so every phase is solved.
    demo = read_design(DEMO)
    held, vpk = _held([demo, with_values(demo, {"source.vpk": 0.5})])
    *quick, short = _distortion(held, np.arange(2), vpk)
    *full, _ = _distortion(held, np.arange(2), vpk, points=256)
    assert list(short) == [True, False]
    for q, f in zip(quick, full):
        np.testing.assert_allclose(q, f, rtol=1e-9, atol=1e-12)
    assert full[0][1] > 0.05  # a clipped sine: several per cent of harmonics (common practice)


@pytest.mark.parametrize("topology", ["common-emitter", "emitter-follower"])
@pytest.mark.parametrize("polarity", ["npn", "pnp"])
@pytest.mark.parametrize("shrink", [1.0, 0.1, 0.02])
def test_a_first_span_short_of_an_edge_is_widened_as_transfer_does(topology, polarity, shrink):
    # transfer.py searches both sides again out to ±4·vcc when either edge
    # lies beyond its first span, which changes the grid the other side's
    # edge is extrapolated on; a short span forces it (analyse's own span
    # almost never is short): at 0.1 of it the demo's saturation edge lies
    # inside the first span and its cut-off edge beyond, at 0.02 both lie
    # beyond.  transfer.swing_and_distortion is the reference.
    base = read_design(DEMO) if topology == "common-emitter" else default_design(topology)
    base = with_values(base, {"transistor.polarity": polarity})
    designs = [base, with_values(base, {"transistor.beta": 3.0 * base.transistor.beta})]
    values = design_values(designs)
    stage = build(topology, values)
    op, _, mid = dc_midband(stage, values["source.rs"])
    vcc, vpk = values["supply.vcc"], values["source.vpk"]
    span = shrink * (3.0 * vcc / np.abs(mid.av_source) + 1.0 + values["source.rs"] / mid.rin)
    got = large_signal_many(stage, op, vcc, vpk, np.ones(2, dtype=bool), span)
    for row in range(2):
        one = transfer.swing_and_distortion(replace(stage, net=stage.net.take(np.array([row]))),
                                            op.take(np.array([row])), vcc[row], vpk[row], span[row])
        # The same points solved in other batches: rounding apart.
        assert got.swing_up[row] == pytest.approx(one.swing_up, rel=1e-9)
        assert got.swing_down[row] == pytest.approx(one.swing_down, rel=1e-9)


def test_one_row_without_an_operating_point_does_not_spoil_the_others():
    demo = read_design(DEMO)
    bad = with_values(demo, {"stage.re1": 1e-300})  # refused by analyse (tests/test_solve_acceptance.py)
    designs = [demo, bad, with_values(demo, {"transistor.beta": 300.0})]
    got = analyse_many("common-emitter", design_values(designs))
    assert list(got["converged"]) == [True, False, True]
    _compare(designs, got)
    alone = analyse_many("common-emitter", design_values([designs[0], designs[2]]))
    for key in QUICK_FIGURES + LARGE_FIGURES:
        np.testing.assert_allclose(got[key][[0, 2]], alone[key], rtol=1e-9, err_msg=key)


def test_scalars_broadcast_and_bad_input_is_named():
    demo = read_design(DEMO)
    values = {k: float(v[0]) for k, v in design_values([demo]).items()}
    values["transistor.beta"] = np.array([150.0, 250.0])
    got = analyse_many("common-emitter", values, large_signal=False)
    assert got["ic"].shape == (2,) and np.isnan(got["thd"]).all()
    assert got["ic"][1] > got["ic"][0]  # more β, more collector current (common practice)
    with pytest.raises(DesignError, match="topology = 'cascode'"):
        analyse_many("cascode", values)
    del values["transistor.theta_ja"]
    with pytest.raises(DesignError, match="transistor.theta_ja"):
        analyse_many("common-emitter", values)
