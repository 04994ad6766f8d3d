"""The spread and the advisor on every topology: each tunes the knobs its
topology has, and the follower's β spreads as a part of its own."""

import numpy as np
import pytest

from model.advisor.options import lines_for, options
from model.advisor.propose import propose
from model.advisor.sensitivity import knob_rows, sensitivity_matrix
from model.design.spread_tables import Limit
from model.design.stage import CB, CE, CEF, CF, TOPOLOGIES, default_design, keys_for, with_values
from model.errors import DesignError
from model.spread.analysis import sample
from model.spread.builds import spread_of

TOLERANT = {"tolerance.resistors": 0.05, "tolerance.capacitors": 0.2, "tolerance.beta": "80..400",
            "tolerance.ambient": "-20..60"}


@pytest.mark.parametrize("topology", TOPOLOGIES)
def test_the_spread_draws_the_topologys_own_parts(topology):
    design = with_values(default_design(topology), TOLERANT)
    spread = spread_of(design)
    own = set(keys_for(topology))
    assert set(spread.keys) <= own | {"environment.ambient"}
    # Every fitted resistor of the board is drawn (rf, rb, the CB's re ...).
    board = {k for k in own if k.startswith(("bias.", "stage.r")) and 0 < float(getattr(
        getattr(design, k.split(".")[0]), k.split(".")[1])) < float("inf")}
    assert board <= set(spread.keys)
    ev = sample(design, 400, seed=7)
    # Drawn ±5 % around a working default, nearly every build stays active.
    assert ev.active.mean() > 0.9
    assert np.isfinite(ev.figures["av_loaded"][ev.active]).all()


def test_the_followers_beta_is_drawn_on_its_own():
    design = with_values(default_design(CEF), TOLERANT)
    spread = spread_of(design)
    ev = sample(design, 2000, seed=11)
    b1 = ev.table[:, spread.keys.index("transistor.beta")]
    b2 = ev.table[:, spread.keys.index("transistor2.beta")]
    assert b1.min() >= 80 and b2.max() <= 400
    # Two parts off the reel: the draws are not the same column twice.  The
    # seed is fixed, so this is a fixed number, not a chance.
    assert abs(np.corrcoef(b1, b2)[0, 1]) < 0.1
    # And the follower's figures follow its own β.
    assert np.isfinite(ev.figures["ic2"][ev.active]).all()


@pytest.mark.parametrize("topology, own", [(CB, "stage.cb"), (CF, "bias.rf"), (CEF, "transistor2.beta")])
def test_sensitivity_rows_are_the_topologys_knobs(topology, own):
    design = default_design(topology)
    knobs = knob_rows(design)
    assert own in knobs
    assert set(knobs) <= set(keys_for(topology))
    matrix = sensitivity_matrix(design)
    assert np.isfinite(matrix.rows[knobs[0]]["av_loaded"])


def test_options_for_collector_feedback_use_its_feedback_resistor():
    design = default_design(CF)
    lines, refused = lines_for(design)
    names = [line.name for line in lines]
    assert "bias.rf" in names and not any("bias.r1" in n for n in names)
    found = options(design, "ic", 1.2e-3)
    assert any(o.reached and "bias.rf" in o.keys for o in found)


def test_propose_refuses_a_topology_it_has_no_rules_for():
    with pytest.raises(DesignError) as caught:
        propose(CB, (Limit("av_loaded", 50.0, 200.0),), 12.0)
    assert caught.value.field == "topology" and "new --topology common-base" in caught.value.rule
    assert propose(CE, (Limit("av_loaded", -30.0, -10.0),), 9.0, grid_steps=1, keep=1)


def test_the_newer_keys_step_as_their_kind_of_value():
    """The negative rail steps by 0.5 V as vcc does, the follower's β by 10
    as the gain transistor's, and a cb not fitted steps up to a bypass-sized
    1 µF as ce does (model.design.stepping)."""
    from model.design.stepping import step

    assert step("supply.vee", -6.0, 1, "E24") == -5.5 and step("supply.vee", -6.0, -1, "E24") == -6.5
    assert step("transistor2.beta", 200.0, 1, "E24") == 210.0
    assert step("stage.cb", 0.0, 1, "E24") == 1e-6
