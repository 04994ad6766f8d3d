"""The one-transistor Newton step against the general k-transistor step.

``model.solve`` runs a single transistor's Newton iteration with fewer
whole-array operations (a design's sweep is a few hundred points, where
numpy's per-call cost dominates).  It evaluates the same Ebers–Moll equations
(Jaeger & Blalock ch. 5) and the same 2 × 2 solve term by term in the same
order, so on the same inputs it must give the same floats: the tolerance
derived for "same operations, same rounding" is zero, and the checks below
are exact.  Inputs reach past the exponential's linear continuation (VBE/VT
above 80) and past the junction limiting's critical voltage, so every branch
is taken.  Hypothesis runs derandomized so the suite cannot fail by chance.
"""

import numpy as np
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st
from test_engine_properties import designs

from model.circuit import device
from model.circuit import junction_newton as solve

SETTINGS = settings(max_examples=60, deadline=None, derandomize=True, database=None,
                    suppress_health_check=[HealthCheck.too_slow])


def _case(seed: int, batch: int = 41):
    """Entry-major inputs of one transistor: r (2, 2, b), u0 (2, b), dev (1, b), u (1, 2, b)."""
    rng = np.random.default_rng(seed)
    r = 10 ** rng.uniform(1, 5, (2, 2, batch)) * rng.choice([-1.0, 1.0], (2, 2, batch))
    u0 = rng.uniform(-5, 5, (2, batch))
    u = np.stack([rng.uniform(-1, 3.2, batch), rng.uniform(-8, 3.2, batch)])[None]
    dev = device.DeviceParams(
        i_s=10 ** rng.uniform(-16, -12, (1, batch)), beta_f=rng.uniform(20, 500, (1, batch)),
        beta_r=rng.uniform(0.5, 10, (1, batch)), va=rng.uniform(10, 200, (1, batch)),
        vt=rng.uniform(0.022, 0.030, (1, batch)), sign=np.ones((1, batch)))
    return r, u0, dev, u


@SETTINGS
@given(st.integers(0, 2**32 - 1))
def test_one_transistor_step_is_the_general_step(seed):
    r, u0, dev, u = _case(seed)
    with np.errstate(all="ignore"):
        step, i = solve._step(r, u0, dev, u)
        fast, (ic, ib), d_ic, g_beta = solve._one_transistor(r, u0, dev, u[0])
        st_ = device.evaluate(dev, u[:, 0], u[:, 1])
    np.testing.assert_array_equal(fast, step[0])
    np.testing.assert_array_equal(np.stack([ic, ib]), np.stack([st_.ic[0], st_.ib[0]]))
    np.testing.assert_array_equal(d_ic, np.stack([st_.dic_dvbe[0], st_.dic_dvbc[0]]))
    np.testing.assert_array_equal(g_beta, np.stack([st_.dib_dvbe[0], st_.dib_dvbc[0]]))
    # The linearised currents after the step, as newton_step hands them back.
    with np.errstate(all="ignore"):
        step_b, i_b = solve.newton_step(r.transpose(2, 0, 1), u0.T,
                                        dev.map(lambda a: a.T),
                                        u.transpose(2, 0, 1))
    np.testing.assert_array_equal(step_b, step.transpose(2, 0, 1))
    np.testing.assert_array_equal(i_b, i.T)


@SETTINGS
@given(st.integers(0, 2**32 - 1))
def test_one_transistor_iteration_is_the_general_iteration(seed):
    r, u0, dev, u = _case(seed)
    vt, v_crit = dev.vt[:, None], device.critical_voltage(dev)[:, None]
    with np.errstate(all="ignore"):
        step, _ = solve._step(r, u0, dev, u, currents=False)
        want, limited = device.limit_junction(u + step, u, vt, v_crit)
        got, moved, got_limited = solve._one_iteration(r, u0, dev, u, vt, v_crit)
    np.testing.assert_array_equal(got, want)
    np.testing.assert_array_equal(moved, np.abs(want - u).max(axis=(0, 1)))
    np.testing.assert_array_equal(got_limited, limited.any(axis=(0, 1)))


def test_the_cases_reach_every_branch():
    """Some inputs run past the linear continuation and the limiting: else the
    exact checks above would not cover those branches."""
    hits_exp = hits_limit = 0
    for seed in range(20):
        r, u0, dev, u = _case(seed)
        hits_exp += int((u / dev.vt[:, None] > device._EXP_LIMIT).any())
        with np.errstate(all="ignore"):
            _, _, lim = solve._one_iteration(r, u0, dev, u, dev.vt[:, None], device.critical_voltage(dev)[:, None])
        hits_limit += int(lim.any())
    assert hits_exp == 20 and hits_limit == 20


def _reduced_designs(seed: int, batch: int):
    """A batch of common-emitter designs reduced onto their junctions, with
    supplies, dividers and collector resistors over decades: active,
    saturated and cut-off rows, quick and slow to converge."""
    import model.circuit.newton as dc
    from model.analyses.figures import design_values
    from model.circuit.topologies import build
    from model.design.stage import default_design

    rng = np.random.default_rng(seed)
    values = {k: np.repeat(v, batch) for k, v in design_values([default_design("common-emitter")]).items()}
    values["supply.vcc"] = rng.uniform(3.0, 48.0, batch)
    values["bias.r1"] = 10 ** rng.uniform(2, 6, batch)
    values["bias.r2"] = 10 ** rng.uniform(2, 6, batch)
    values["stage.rc"] = 10 ** rng.uniform(1, 6, batch)
    return dc._reduce(build("common-emitter", values).net), rng


def _newton_with(red, u, **limits):
    """newton with some of junction_newton's batch-size limits overridden."""
    saved = {name: getattr(solve, name) for name in limits}
    try:
        for name, value in limits.items():
            setattr(solve, name, value)
        return solve.newton(red.r, red.u0, red.dev, u)
    finally:
        for name, value in saved.items():
            setattr(solve, name, value)


def _assert_same_result(got, want):
    np.testing.assert_array_equal(got[0], want[0])
    np.testing.assert_array_equal(got[1], want[1])
    assert got[2] == want[2]


@SETTINGS
@given(st.integers(0, 2**32 - 1), st.integers(1, 200))
def test_one_transistor_loop_stops_every_row_where_the_general_loop_does(seed, batch):
    """The written-out loops (numpy on a few hundred rows, Python floats on
    a few) freeze converged rows in place instead of moving them out of the
    working set; every row must still end on the same iterate as the
    general loop leaves it (the same floats, so exact)."""
    red, _ = _reduced_designs(seed, batch)
    u = solve.active_start(red.r, red.u0, red.dev)
    # _COPY_FROM = 0: every batch takes the general loop.
    _assert_same_result(solve.newton(red.r, red.u0, red.dev, u), _newton_with(red, u, _COPY_FROM=0))


@SETTINGS
@given(st.integers(0, 2**32 - 1), st.integers(1, 16), st.floats(0.0, 1.5))
def test_python_float_loop_is_the_numpy_loop(seed, batch, kick):
    """A few rows run on Python floats: the same operations in the same
    order as the numpy loop, with numpy's exp and log, so the same floats.
    Starts kicked up by as much as 1.5 V reach the junction limiting."""
    red, rng = _reduced_designs(seed, batch)
    assert batch <= solve._SCALAR_UPTO  # else this would compare the numpy loop with itself
    u = solve.active_start(red.r, red.u0, red.dev) + kick * rng.uniform(0.0, 1.0, (batch, 1, 2))
    with np.errstate(all="ignore"):
        _assert_same_result(solve.newton(red.r, red.u0, red.dev, u), _newton_with(red, u, _SCALAR_UPTO=0))


@SETTINGS
@given(st.integers(0, 2**32 - 1), st.integers(1, 16), st.floats(0.0, 1.5))
def test_python_float_start_and_last_step_are_the_numpy_ones(seed, batch, kick):
    """The forward-active start and the last linearised step of a few rows
    on Python floats: the same floats as the numpy code (exact)."""
    red, rng = _reduced_designs(seed, batch)
    saved = solve._SCALAR_UPTO
    try:
        solve._SCALAR_UPTO = 0
        start = solve.active_start(red.r, red.u0, red.dev)
        u = start + kick * rng.uniform(0.0, 1.0, (batch, 1, 2))
        with np.errstate(all="ignore"):
            step, i = solve.newton_step(red.r, red.u0, red.dev, u)
    finally:
        solve._SCALAR_UPTO = saved
    np.testing.assert_array_equal(solve.active_start(red.r, red.u0, red.dev), start)
    with np.errstate(all="ignore"):
        got_step, got_i = solve.newton_step(red.r, red.u0, red.dev, u)
    np.testing.assert_array_equal(got_step, step)
    np.testing.assert_array_equal(got_i, i)


def test_the_kicked_starts_reach_the_limiting():
    """Some kicked starts above are limited: else the exact check would not
    cover the written-out limiting."""
    hits = 0
    for seed in range(10):
        red, rng = _reduced_designs(seed, 3)
        u = solve.active_start(red.r, red.u0, red.dev) + 1.5 * rng.uniform(0.0, 1.0, (3, 1, 2))
        limited = [solve._scalar_iteration(p, *uj)[3] for p, uj in zip(_pack_rows(red), u[:, 0].tolist())]
        hits += any(limited)
    assert hits >= 5


def _pack_rows(red):
    """newton's packed inputs of one transistor, row by row as lists."""
    v_crit = device.critical_voltage(red.dev)
    cols = [red.r.reshape(red.r.shape[0], -1), red.u0, *(getattr(red.dev, f) for f in device.PARAM_FIELDS), v_crit]
    return np.concatenate(cols, axis=1).tolist()


@SETTINGS
@given(st.integers(0, 2**32 - 1), st.integers(1, 16), st.booleans())
def test_midband_corrections_on_python_floats_are_the_numpy_ones(seed, batch, unloaded):
    """The Woodbury corrections of a few rows on Python floats: the same
    floats as the numpy code (exact), open load or not."""
    import model.circuit.linearised as lin
    from model.analyses.figures import design_values
    from model.analyses.midband import midband_figures
    from model.circuit.newton import operating_point
    from model.circuit.topologies import build
    from model.design.stage import default_design

    rng = np.random.default_rng(seed)
    values = {k: np.repeat(v, batch) for k, v in design_values([default_design("common-emitter")]).items()}
    for key, lo, hi in (("bias.r1", 3, 6), ("bias.r2", 2, 5), ("stage.rc", 2, 5), ("stage.re1", 1, 3),
                        ("load.rl", 2, 6), ("source.rs", 1, 5)):
        values[key] = 10 ** rng.uniform(lo, hi, batch)
    if unloaded:
        values["load.rl"] = np.full(batch, np.inf)
    stage = build("common-emitter", values)
    op = operating_point(stage.net)
    assert batch <= lin._FEW_ROWS  # else both runs below would take the numpy code
    with np.errstate(all="ignore"):
        fast = midband_figures(stage, op, values["source.rs"])
        saved = lin._FEW_ROWS
        try:
            lin._FEW_ROWS = 0
            slow = midband_figures(stage, op, values["source.rs"])
        finally:
            lin._FEW_ROWS = saved
    for name in fast.__dataclass_fields__:
        np.testing.assert_array_equal(getattr(fast, name), getattr(slow, name), err_msg=name)


def _stage_with_device(d):
    """A single design's built stage with Cπ and Cμ in place, and its
    operating point (None when it does not solve)."""
    from model.analyses.capacitance import device_capacitance, with_device_capacitance
    from model.analyses.figures import design_values
    from model.analyses.midband import device_small_signal
    from model.circuit.newton import operating_point
    from model.circuit.topologies import build

    stage = build(d.topology, design_values([d]))
    op = operating_point(stage.net)
    if not op.converged[0]:
        return None, None
    gm = float(device_small_signal(op).gm[0])
    return with_device_capacitance(stage, device_capacitance(gm, d.transistor.ft, d.transistor.cmu)), op


@settings(max_examples=80, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(designs(), st.sampled_from(("stage.cin", "stage.cout", "stage.ce", None)))
def test_short_circuit_estimates_from_one_inversion_are_the_direct_ones(d, unfitted):
    """Each coupling capacitor's resistance from one inversion with the others
    shorted as Woodbury corrections, against a direct solve of the netlist
    without it (model/analyses/corner_estimates.py): the same equations, so
    only rounding differs; the cancellation guard bounds that at a few float
    epsilons over 1e-3."""
    from model.analyses import corner_estimates as ce
    from model.circuit.netlist import Capacitor
    from model.design.stage import with_values
    from model.errors import DesignError

    if unfitted is not None and (unfitted != "stage.ce" or d.topology == "common-emitter"):
        try:
            d = with_values(d, {unfitted: 0.0})
        except DesignError:  # a wiring the rules refuse (a stage with no AC path, say)
            assume(False)
    stage, op = _stage_with_device(d)
    assume(stage is not None)
    caps = [c for c in stage.net.of_type(Capacitor) if c.coupling]
    shared = ce._shorted_resistances(stage.net, op, caps)
    for cap, r in zip(caps, shared):
        direct = ce._resistance_across(stage.net.drop(cap.name), op, cap.a, cap.b)
        if r is not None:
            np.testing.assert_allclose(r, direct, rtol=1e-12, err_msg=cap.name)
    parts = ce.short_circuit_parts(stage, op)
    assert [p.part for p in parts] == [c.name for c in caps]


def test_the_demo_takes_the_one_inversion_path():
    """The estimates above are checked where the shared path answers: it
    must answer for an ordinary stage, else that check would be empty."""
    import pathlib

    from model import read_design
    from model.analyses import corner_estimates as ce
    from model.circuit.netlist import Capacitor

    demo = pathlib.Path(__file__).resolve().parents[1] / "saved_designs" / "geophone_preamp.toml"
    stage, op = _stage_with_device(read_design(demo))
    caps = [c for c in stage.net.of_type(Capacitor) if c.coupling]
    assert len(caps) == 3 and None not in ce._shorted_resistances(stage.net, op, caps)
