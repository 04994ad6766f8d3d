"""The round-2 reformulations of the sweeps against plain references.

* The distortion period is solved at its N/2 + 1 distinct EMFs and unfolded
  by sin(π − x) = sin x; the unfolded samples equal numpy's sin at all N
  phases, and the harmonics equal those of all N points solved cold.
* The held circuit is reduced once for every sweep of one analysis; the
  Newton starts' slope from that reduction, (I + R·G)⁻¹ ∂u₀/∂EMF, equals the
  full nodal small-signal solve it replaced.
* The frequency response assembles G and C once for all its sweeps; it
  equals one direct complex solve per frequency.
* Big batches eliminate only the entries the network's pattern can reach
  (with fill-in); that equals LAPACK on random systems of such a pattern.
  (Their assembly against small batches: tests/test_batch_paths.py.)

Hypothesis runs derandomized here so the suite cannot fail by chance.
"""

import numpy as np
from hypothesis import HealthCheck, given, settings
from test_engine_formulation import EPS, _stage
from test_engine_properties import designs

from model.analyses.corner_search import sweep
from model.analyses.transfer import FFT_POINTS, _harmonics, _held, _period, swing_and_distortion
from model.circuit.linearised import small_signal
from model.circuit.newton import junction_voltages, operating_point
from model.circuit.topologies import EMF, TRANSISTOR

SETTINGS = settings(max_examples=15, deadline=None, derandomize=True, database=None,
                    suppress_health_check=[HealthCheck.too_slow])


def test_folded_period_equals_every_phase():
    # sin(π − x) = sin x and sin(x − 2π) = sin x (the identities); numpy's
    # sin is correctly rounded to about 1 ulp, so the folded and direct
    # samples differ by a few ε of the amplitude at most.
    vpk = 0.37
    wave, index = _period(vpk)
    assert wave.size == FFT_POINTS // 2 + 1
    direct = vpk * np.sin(2.0 * np.pi * np.arange(FFT_POINTS) / FFT_POINTS)
    np.testing.assert_allclose(wave[index], direct, rtol=0, atol=8 * EPS * vpk)


@SETTINGS
@given(designs())
def test_slope_from_the_reduction_equals_the_nodal_small_signal(d):
    stage, op = _stage(d)
    if not op.converged[0]:
        return
    q = stage.net.element(TRANSISTOR)
    want = np.stack(junction_voltages(q, small_signal(stage.net, op, excite={EMF: 1.0})), axis=-1)[0]
    got = _held(stage, op).slope(op)[0, 0]
    # Both solve the same linearised equations (the elimination onto the
    # junctions is exact): backward-stable solves of matrices whose condition
    # is set by resistor ratios agree to ~κ·ε; 1e-7 of the larger entry
    # leaves room for κ up to ~1e8 (Higham, Accuracy and Stability of
    # Numerical Algorithms, §7.1).
    np.testing.assert_allclose(got, want, rtol=1e-7, atol=1e-7 * np.abs(want).max())


@SETTINGS
@given(designs())
def test_harmonics_equal_the_whole_period_solved_cold(d):
    stage, op = _stage(d)
    if not op.converged[0] or d.source.vpk <= 0:
        return
    big = swing_and_distortion(stage, op, d.supply.vcc, d.source.vpk)
    held = stage.net.coupling_as_sources({
        e.name: op.voltages[e.a] - op.voltages[e.b] for e in stage.net.elements if getattr(e, "coupling", False)})
    emf = d.source.vpk * np.sin(2.0 * np.pi * np.arange(FFT_POINTS) / FFT_POINTS)
    cold = operating_point(held.repeat(emf.size).with_source(EMF, emf))
    if not cold.converged.all():
        return
    out = cold.voltages[stage.output] - op.voltages[stage.output][0]
    thd, hd2, hd3 = _harmonics(out)
    # Each point agrees to ~1e-9 V per volt of supply (Newton's stop plus one
    # polishing step, see test_engine_formulation); the FFT sums N such errors
    # into a harmonic, against a fundamental of (N/2)·|gain|·vpk.
    fundamental = abs(np.fft.rfft(out)[1])
    atol = FFT_POINTS * 1e-9 * d.supply.vcc / max(fundamental, 1e-300) + 1e-12
    for got, want in ((big.thd, thd), (big.hd2, hd2), (big.hd3, hd3)):
        assert abs(got - want) <= atol + 1e-6 * want


@SETTINGS
@given(designs())
def test_response_sweep_equals_one_solve_per_frequency(d):
    stage, op = _stage(d)
    if not op.converged[0]:
        return
    freq = np.logspace(0, 7, 8)
    got = sweep(stage, op, freq)
    want = np.array([small_signal(stage.net, op, omega=2.0 * np.pi * f, excite={EMF: 1.0})[stage.output][0]
                     for f in freq])
    # The same complex system solved batched or alone: LAPACK on identical
    # matrices, so they agree to a few ε times the condition (≪ 1e-9 here).
    np.testing.assert_allclose(got, want, rtol=1e-9, atol=1e-12 * np.abs(want).max())



def test_pattern_elimination_equals_lapack():
    from model.circuit.dense import solve_dominant

    # Random diagonally dominant systems with a fixed sparsity pattern (a
    # seeded generator: deterministic), against numpy's LAPACK solve: both
    # backward stable on matrices of condition ~2 here, so 1e-12 covers them.
    rng = np.random.default_rng(7)
    n, batch = 7, 400
    pattern = np.eye(n, dtype=bool)
    for i, j in ((0, 3), (2, 5), (3, 4), (1, 6), (4, 6)):
        pattern[i, j] = pattern[j, i] = True
    a = rng.uniform(-1.0, 1.0, (batch, n, n)) * pattern
    a[:, range(n), range(n)] += n
    rhs = rng.uniform(-1.0, 1.0, (batch, n, 3))
    np.testing.assert_allclose(solve_dominant(a, rhs, pattern), np.linalg.solve(a, rhs), rtol=0, atol=1e-12)


def test_four_by_four_blocks_equal_lapack_and_fall_back_where_a_block_is_singular():
    from model.circuit.dense import solve_batched

    # Two transistors' junctions give 4×4 systems, solved as 2×2 blocks
    # without pivoting.  Seeded random systems (deterministic), real and
    # complex, against numpy's LAPACK; a few rows have a singular leading
    # block though the whole matrix is well conditioned, so the block
    # formula cannot solve them and the pivoted fallback must.
    rng = np.random.default_rng(3)
    batch = 2000
    a = rng.uniform(-1.0, 1.0, (batch, 4, 4)) + 4.0 * np.eye(4)
    a[:5, :2, :2] = [[1.0, 2.0], [2.0, 4.0]]  # det 0
    a[:5, :2, 2:] = np.eye(2)
    a[:5, 2:, :2] = np.eye(2)
    rhs = rng.uniform(-1.0, 1.0, (batch, 4))
    assert np.abs(np.linalg.det(a[:5])).min() > 0.1
    for m in (a, a + 0.5j * rng.uniform(-1.0, 1.0, a.shape)):
        want = np.linalg.solve(m, rhs[..., None])[..., 0]
        got = solve_batched(m, rhs)
        # Condition numbers here stay below ~100: 1e-11 covers both solvers.
        np.testing.assert_allclose(got, want, rtol=0, atol=1e-11)
