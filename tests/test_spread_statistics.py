"""The spread's statistics and draws against outside sources: the Wilson
interval against scipy and a published table, percentiles against an
independent quantile routine, the draws' variance against the uniform
distribution's and the GUM's first-order propagation."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st
from scipy import stats

from model.design.spread_tables import Limit
from model.design.stage import default_design, with_values
from model.spread.builds import draw, spread_of
from model.spread.statistics import drivers, in_limit, summarise, wilson


@given(total=st.integers(1, 5000), data=st.data())
def test_wilson_interval_matches_scipy(total, data):
    passed = data.draw(st.integers(0, total))
    # scipy.stats.binomtest(...).proportion_ci(method="wilson"): an independent implementation.
    ci = stats.binomtest(passed, total).proportion_ci(confidence_level=0.95, method="wilson")
    low, high = wilson(passed, total)
    assert low == pytest.approx(ci.low, abs=1e-12) and high == pytest.approx(ci.high, abs=1e-12)


@pytest.mark.parametrize("passed, total, low, high", [
    # R. G. Newcombe, "Two-sided confidence intervals for the single proportion:
    # comparison of seven methods", Statistics in Medicine 17 (1998) 857, Table II,
    # method 3 (score interval without continuity correction); values from memory,
    # to the four places the table gives.
    (81, 263, 0.2553, 0.3662),
    (15, 148, 0.0624, 0.1605),
    (0, 20, 0.0, 0.1611),
    (1, 29, 0.0061, 0.1718),
])
def test_wilson_interval_matches_the_published_table(passed, total, low, high):
    got = wilson(passed, total)
    assert got[0] == pytest.approx(low, abs=6e-5) and got[1] == pytest.approx(high, abs=6e-5)


def test_percentiles_match_an_independent_quantile_routine():
    # A known distribution (standard normal) sampled once; scipy.stats.mstats.mquantiles
    # with alphap = betap = 1 is the same definition (Hyndman & Fan type 7) coded apart.
    x = np.random.default_rng(7).standard_normal(20_001)
    s = summarise(x)
    q = stats.mstats.mquantiles(x, prob=[0.01, 0.5, 0.99], alphap=1.0, betap=1.0)
    assert (s.p01, s.p50, s.p99) == pytest.approx(tuple(q), abs=1e-12)
    assert s.min == x.min() and s.max == x.max() and s.count == x.size
    # And they sit where the normal's own quantiles are (scipy.stats.norm.ppf),
    # within a few standard errors of a 20,001-sample estimate.
    assert s.p99 == pytest.approx(stats.norm.ppf(0.99), abs=0.06)
    assert s.mean == pytest.approx(0.0, abs=0.03) and s.std == pytest.approx(1.0, abs=0.02)


def _box(**values):
    return spread_of(with_values(default_design(), values))


def test_uniform_draws_have_the_uniform_variance():
    # A uniform distribution of half-width a has variance a²/3 (any statistics
    # text; e.g. JCGM 100:2008, 4.3.7).
    a = 0.05
    box = _box(**{"tolerance.resistors": a})
    x = draw(box, 200_000, seed=3)
    nominal = box.nominal
    ratio = x.var(axis=0) / (a * nominal) ** 2
    assert ratio == pytest.approx(np.full(box.count, 1.0 / 3.0), rel=0.01)
    assert (x >= box.low).all() and (x <= box.high).all()


def test_normal_draws_put_the_tolerance_at_three_sigma_and_stay_inside():
    box = _box(**{"tolerance.resistors": 0.03, "tolerance.distribution": "normal"})
    x = draw(box, 200_000, seed=4)
    sigma = x.std(axis=0) / box.nominal
    # A normal truncated at ±3σ keeps 0.9733 of σ² (truncated-normal variance,
    # 1 − 2·3·φ(3)/(2Φ(3) − 1); scipy.stats.truncnorm gives the same).
    kept = stats.truncnorm(-3, 3).var()
    assert sigma == pytest.approx(np.full(box.count, 0.01 * math.sqrt(kept)), rel=0.01)
    assert (x >= box.low).all() and (x <= box.high).all()


def test_divider_voltage_spread_matches_first_order_propagation():
    # VTH = vcc·R2/(R1 + R2) with R1, R2 independent and uniform ±a.  GUM
    # (JCGM 100:2008) eq. 10: u²(y) = Σ (∂f/∂xᵢ)² u²(xᵢ), with u²(xᵢ) = (a·xᵢ)²/3.
    a, vcc = 0.02, 9.0
    design = with_values(default_design(), {"tolerance.resistors": a})
    box = spread_of(design)
    x = draw(box, 200_000, seed=5)
    r1, r2 = x[:, box.keys.index("bias.r1")], x[:, box.keys.index("bias.r2")]
    vth = vcc * r2 / (r1 + r2)
    R1, R2 = design.bias.r1, design.bias.r2
    d1, d2 = -vcc * R2 / (R1 + R2) ** 2, vcc * R1 / (R1 + R2) ** 2
    u2 = d1**2 * (a * R1) ** 2 / 3 + d2**2 * (a * R2) ** 2 / 3
    assert vth.var() == pytest.approx(u2, rel=0.02)
    assert vth.mean() == pytest.approx(vcc * R2 / (R1 + R2), rel=1e-3)
    # The regression's shares are the same two terms' shares.
    share, r2fit = drivers(np.column_stack([r1, r2]), vth)
    assert share[0] == pytest.approx(d1**2 * R1**2 / (d1**2 * R1**2 + d2**2 * R2**2), abs=0.01)
    assert r2fit > 0.999


def test_the_same_seed_draws_the_same_builds_and_another_does_not():
    box = _box(**{"tolerance.resistors": 0.01, "tolerance.beta": "100..400"})
    assert np.array_equal(draw(box, 50, 11), draw(box, 50, 11))
    assert not np.array_equal(draw(box, 50, 11), draw(box, 50, 12))


def test_parts_not_fitted_or_open_are_not_varied():
    d = with_values(default_design(), {"stage.re1": 0, "stage.ce": "none", "load.rl": "open",
                                       "tolerance.resistors": 0.01, "tolerance.capacitors": 0.1,
                                       "tolerance.parts.load.rl": 0.1})
    keys = spread_of(d).keys
    assert "stage.re1" not in keys and "stage.ce" not in keys and "load.rl" not in keys
    assert "stage.rc" in keys and "stage.cin" in keys


@given(x=st.floats(-1e3, 1e3, allow_nan=False), lo=st.floats(1, 40), width=st.floats(0, 20))
def test_a_db_limit_bounds_the_magnitude(x, lo, width):
    db = Limit("av_loaded", lo, lo + width, db=True)
    volts = Limit("av_loaded", 10 ** (lo / 20), 10 ** ((lo + width) / 20))
    inside_db = bool(in_limit(db, np.array([x]))[0])
    inside_v = bool(in_limit(volts, np.array([abs(x)]))[0])
    edge = min(abs(abs(x) - volts.low), abs(abs(x) - volts.high))
    if edge > 1e-9 * max(abs(x), 1.0):  # away from rounding at the very edge
        assert inside_db == inside_v
