"""The DC solve's acceptance test and the message of a design it refuses.

The independent reference is the Ebers–Moll transport model with the forward
Early factor (Jaeger & Blalock ch. 5), written out again here and solved with
``scipy.optimize.root``; the temperature is the 25 °C at which the default
transistor's parameters are given, so no temperature law enters.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import constants, optimize

from model.analyses.figures import analyse, design_values
from model.analyses.unsolved import WIDTH, furthest_from_default, unsolved_message
from model.circuit import newton
from model.circuit.junction_newton import _V_TOL
from model.circuit.topologies import build
from model.design.stage import default_design, with_values
from model.errors import SolveError

VT = constants.k * (constants.zero_Celsius + 25.0) / constants.e  # SI 2019 k and e
# Cut-off stages with a small rc that the old relative bound (1e-9 of the
# largest branch current) refused at 2.65e-9 … 4.1e-9 after 2 iterations.
CUTOFF = [
    {"stage.rc": 14.0, "transistor.va": 69.7, "bias.r1": 1e9},
    {"stage.rc": 14.0, "transistor.va": 70.5, "bias.r1": 1e9},
    {"stage.rc": 14.0, "transistor.va": 69.7, "bias.r1": 150e6},
    {"stage.rc": 14.35, "transistor.va": 69.7, "bias.r1": 116e6},  # the reviewer's case
]


def _kcl(d, x):
    """KCL sums (A) at b, c, e and em of a common emitter, capacitors open."""
    t = d.transistor
    vb, vc, ve, vm = x
    i_f = t.i_s * math.expm1(min((vb - ve) / VT, 200.0))
    i_r = t.i_s * math.expm1(min((vb - vc) / VT, 200.0))
    ic = (i_f - i_r) * (1.0 - (vb - vc) / t.va) - i_r / t.beta_r
    ib = i_f / t.beta + i_r / t.beta_r
    vcc, r1, r2, s = d.supply.vcc, d.bias.r1, d.bias.r2, d.stage
    return np.array([
        (vcc - vb) / r1 - vb / r2 - ib,
        (vcc - vc) / s.rc - ic,
        ic + ib - (ve - vm) / s.re1,
        (ve - vm) / s.re1 - vm / s.re2,
    ])


def _resistive(d):
    """Σ of the resistor conductances (S) meeting at b, c, e and em."""
    s = d.stage
    return np.array([1 / d.bias.r1 + 1 / d.bias.r2, 1 / s.rc, 1 / s.re1, 1 / s.re1 + 1 / s.re2])


@pytest.mark.parametrize("values", CUTOFF)
def test_a_converged_cutoff_stage_is_accepted_and_balances_against_scipy(values):
    d = with_values(default_design("common-emitter"), values)
    f = analyse(d)  # refused before: "the operating point did not converge"
    assert f.region == "cutoff"
    op = newton.operating_point(build(d.topology, design_values([d])).net)
    assert op.converged[0]
    x = np.array([op.voltages[n][0] for n in ("b", "c", "e", "em")])
    # Each KCL equation divided by its node's conductance is in volts: root's
    # xtol then bounds a voltage, and currents of femtoamperes do not vanish
    # against the tolerance.  The start is the supply's Thevenin divider, not
    # the engine's answer.
    g = _resistive(d)
    vth = d.supply.vcc * d.bias.r2 / (d.bias.r1 + d.bias.r2)
    sol = optimize.root(lambda y: _kcl(d, y) / g, [vth, d.supply.vcc, 0.0, 0.0], method="hybr",
                        options={"xtol": 1e-12})
    # root's own answer: converged, and every node's KCL within 1e-12 V·Σg.
    assert sol.success and np.all(np.abs(_kcl(d, sol.x) / g) < 1e-12)
    # The engine vouches for its node voltages to its Newton tolerance _V_TOL
    # (1e-9 V); root's to xtol·|v| ≤ 1e-12 · VCC.
    np.testing.assert_allclose(x, sol.x, rtol=0, atol=_V_TOL + 1e-12 * d.supply.vcc)
    # The independent KCL at the engine's voltages: each node within what a
    # δV = 1e-9 V error explains there, δV·Σg (resistors only: the cut-off
    # device's slopes are ~IS/VT = 4e-13 S, and leaving them out only tightens).
    assert np.all(np.abs(_kcl(d, x)) <= _V_TOL * g)


def test_the_guard_refuses_a_node_off_by_more_than_the_voltage_tolerance():
    d = with_values(default_design("common-emitter"), CUTOFF[0])
    net = build(d.topology, design_values([d])).net
    red = newton._reduce(net)
    op = newton.operating_point(net)

    def balanced(shift):
        volts = dict(op.voltages, c=op.voltages["c"] + shift)
        states = {q.name: newton.device.evaluate(newton._params_of(red.dev, 0),
                                                 *newton.junction_voltages(q, volts, red.dev.sign[:, 0]))
                  for q in red.bjts}
        return bool(newton._kcl_residual(red.plan, red.g, volts, [red.dev.sign[:, 0]], states)[1][0])

    # 14 Ω at the collector: 1e-7 V is 7e-9 A of imbalance against 7e-11 A allowed.
    assert balanced(0.0) and balanced(1e-12)
    assert not balanced(1e-7) and not balanced(-1e-7)


def test_a_newton_cut_short_is_refused():
    net = build("common-emitter", design_values([default_design("common-emitter")])).net
    assert not newton.operating_point(net, max_iter=1).converged[0]
    assert newton.operating_point(net).converged[0]


@pytest.mark.parametrize("values, key", [
    ({"stage.re1": 1e-300}, "stage.re1"),
    ({"stage.re1": 5e-324}, "stage.re1"),
    ({"stage.rc": 1e-300}, "stage.rc"),
    ({"bias.r1": 1e-300, "transistor.va": 1e-3}, "bias.r1"),  # 56 kΩ is further from 1e-300 than 100 V from 1 mV
])
def test_a_refused_design_names_the_value_furthest_from_the_default(values, key):
    d = with_values(default_design("common-emitter"), values)
    with pytest.raises(SolveError) as info:
        analyse(d)
    text = str(info.value)
    assert text.startswith("no operating point found")  # the rule first
    assert f"{key} = 1.00e-300" in text or f"{key} = 4.94e-324" in text
    assert info.value.fields[0] == key
    assert len(text) <= WIDTH and "\n" not in text


def test_the_message_lists_more_keys_only_while_it_fits_one_line():
    d = with_values(default_design("common-emitter"), {"bias.r1": 56.0, "bias.r2": 1e6, "supply.vcc": 12.0})
    # ratios 1/1000 (r1), 100 (r2), 4/3 (vcc): furthest first.
    assert [k for k, _, _ in furthest_from_default(d)] == ["bias.r1", "bias.r2", "supply.vcc"]
    reason, hint, keys = unsolved_message(d, 1.0, 5)
    text = f"{reason} ({hint})"
    assert text == "no operating point found (far from default: bias.r1 = 56.0 Ω, bias.r2 = 1.00 MΩ)"
    assert len(text) <= WIDTH and keys == ("bias.r1", "bias.r2")
    long = with_values(d, {"stage.rc": 1e-300, "bias.r1": 1e-300, "transistor.beta": 1e-3})
    reason, hint, keys = unsolved_message(long, 1.0, 5)
    assert len(f"{reason} ({hint})") <= WIDTH and len(keys) == 1


def test_the_message_falls_back_to_the_residual_when_nothing_differs():
    reason, hint, keys = unsolved_message(default_design("emitter-follower"), 2.5e-3, 200)
    assert keys == () and hint == "KCL residual 2.5e-03 after 200 iterations"
