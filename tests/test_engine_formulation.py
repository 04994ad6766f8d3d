"""The engine's reformulations against plain references of the same equations.

* The midband figures come from one factorisation plus low-rank corrections;
  here they are recomputed by four separate direct solves of the linearised
  network, one per figure, as the textbook definitions read (rin with the
  source removed, av_open with the load removed too, rin_base with the
  divider and source removed, rout with the load removed and the source's
  EMF at zero).
* A source sweep reduced once per design equals each point solved cold.

Hypothesis runs derandomized here so the suite cannot fail by chance.
"""


import numpy as np
from hypothesis import HealthCheck, assume, given, settings
from test_engine_properties import designs

from model.analyses.figures import design_values
from model.analyses.midband import midband_figures
from model.circuit.linearised import small_signal
from model.circuit.newton import operating_point, operating_sweep
from model.circuit.plan import MIDBAND, plan_for
from model.circuit.topologies import BIAS, EMF, LOAD, SOURCE, build

SETTINGS = settings(max_examples=40, deadline=None, derandomize=True, database=None,
                    suppress_health_check=[HealthCheck.too_slow])
EPS = np.finfo(float).eps


def _stage(d):
    stage = build(d.topology, design_values([d]))
    return stage, operating_point(stage.net)


def _four_solves(stage, op):
    """The midband figures by one direct solve each (the definitions)."""
    net = stage.net
    no_source = net.without(SOURCE)
    loaded = small_signal(no_source, op, inject={stage.input: 1.0})
    unloaded = small_signal(no_source.without(LOAD), op, inject={stage.input: 1.0})
    base = small_signal(no_source.without(BIAS), op, inject={stage.device_input: 1.0})
    back = small_signal(net.without(LOAD), op, inject={stage.output: 1.0}, excite={EMF: 0.0})
    return {
        "rin": loaded[stage.input],
        "av_loaded": loaded[stage.output] / loaded[stage.input],
        "av_open": unloaded[stage.output] / unloaded[stage.input],
        "rin_base": base[stage.device_input],
        "rout": back[stage.output],
    }


def _condition(stage, op):
    """(κ, n): the largest 2-norm condition number of the linearised midband
    matrices the figures are solved on (the full stage without its source,
    without its load, and without source and divider), from numpy's SVD, and
    the largest of their sizes."""
    from model.circuit.assembly import admittance_values
    from model.circuit.linearised import _linearised

    worst, size = 1.0, 1
    for net in (stage.net.without(SOURCE), stage.net.without(LOAD), stage.net.without(SOURCE).without(BIAS)):
        plan = plan_for(net, MIDBAND)
        g, v = admittance_values(net, plan, excite={})
        a, _ = _linearised(net, op, plan, g, v)
        worst, size = max(worst, float(np.linalg.cond(a[0]))), max(size, plan.n)
    return worst, size


@SETTINGS
@given(designs())
def test_midband_equals_four_direct_solves(d):
    stage, op = _stage(d)
    # A design with no operating point has no midband figures: Hypothesis
    # draws another, and fails the test if it has to discard too many.
    assume(op.converged[0])
    mid = midband_figures(stage, op, np.array([d.source.rs]))
    ref = _four_solves(stage, op)
    # Two backward-stable solves of the same n×n matrices each land within
    # about n·κ·ε relative of the exact solution (Higham, Accuracy and
    # Stability of Numerical Algorithms, §7.1 and Thm 9.4, the constant from
    # memory), so they differ by twice that. A low-rank correction keeps at
    # least 1e-3 of the removed part's admittance (below that the engine
    # solves directly), which can amplify that error by up to 1e3.
    kappa, n = _condition(stage, op)
    rtol = max(1e-12, 2.0 * n * kappa * EPS * 1e3)
    for name, want in ref.items():
        got = getattr(mid, name)
        if np.isinf(want[0]) or abs(want[0]) > 1e15:
            continue  # an open output: any huge value is "unbounded"
        np.testing.assert_allclose(got, want, rtol=rtol, atol=1e-300, err_msg=name)


@SETTINGS
@given(designs())
def test_sweep_reduced_once_equals_cold_solves(d):
    stage, op = _stage(d)
    assume(op.converged[0])
    held = stage.net.coupling_as_sources({
        e.name: op.voltages[e.a] - op.voltages[e.b] for e in stage.net.elements if getattr(e, "coupling", False)})
    emf = np.linspace(-2.0, 2.0, 9) * d.supply.vcc / 4.0
    warm = operating_sweep(held, EMF, emf, start=np.repeat(op.junctions, emf.size, axis=0))
    cold = operating_point(held.repeat(emf.size).with_source(EMF, emf))
    both = warm.converged & cold.converged
    assert both.sum() >= 1
    # Each solution's Newton stops on a step below 1e-9·(1 + |u|) V and is then
    # polished by one more linearised step (quadratic), so two solutions of
    # the same equations agree to well inside 1e-9 V per volt of supply.
    for node, v in cold.voltages.items():
        np.testing.assert_allclose(warm.voltages[node][both], v[both], rtol=1e-9, atol=1e-9 * d.supply.vcc,
                                   err_msg=node)
