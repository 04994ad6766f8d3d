"""Load lines and the large-signal transfer behind the workbench pictures,
against closed forms.

* DC load line of a divider-biased stage: VCE = VCC − IC·RC − IE·RE (KVL
  round the collector–emitter loop), which the usual construction draws with
  IE ≈ IC as VCE = VCC − IC(RC + RE) (Sedra & Smith; Boylestad & Nashelsky).
* AC load line: slope −1/R_ac with R_ac the resistance the collector–emitter
  port sees at midband: RC ‖ RL + RE1 for the common emitter with RE2
  bypassed, RC + RE ‖ RL for the follower (same sources).
"""

import math

import pytest
from hypothesis import assume, given
from test_engine_properties import SETTINGS, designs

from model import analyse
from model.analyses.curves import stage_curves
from model.analyses.figures import design_values
from model.analyses.loadlines import load_lines
from model.circuit.newton import operating_point
from model.circuit.topologies import build
from model.design.stage import default_design, keys_for, with_values


def _par(a, b):
    return math.inf if math.isinf(a) and math.isinf(b) else (b if math.isinf(a) else a if math.isinf(b)
                                                              else a * b / (a + b))


def _lines(d):
    stage = build(d.topology, design_values([d]))
    op = operating_point(stage.net)
    return load_lines(stage, op), op


@given(d=designs())
@SETTINGS
def test_load_line_resistances_are_the_closed_forms(d):
    # Collector feedback and ce-follower have no such closed form: rf, or
    # the follower, couples the collector back into the network.
    assume(d.topology not in ("collector-feedback", "ce-follower"))
    ll, _ = _lines(d)
    s, rl, rs = d.stage, d.load.rl, d.source.rs
    assert ll.vce_open == pytest.approx(d.supply.vcc - d.supply.vee, rel=1e-9)
    if d.topology in ("common-emitter", "common-emitter-split"):
        assert ll.r_dc == pytest.approx(s.rc + s.re1 + s.re2, rel=1e-9)
        assert ll.r_ac == pytest.approx(_par(s.rc, rl) + s.re1, rel=1e-9)
    elif d.topology == "common-base":
        # The source drives the emitter: rs shunts re at midband, and at DC
        # too when no cin blocks it.
        assert ll.r_dc == pytest.approx(s.rc + (_par(s.re, rs) if s.cin == 0 else s.re), rel=1e-9)
        assert ll.r_ac == pytest.approx(_par(s.rc, rl) + _par(s.re, rs), rel=1e-9)
    else:
        assert ll.r_dc == pytest.approx(s.rc + s.re, rel=1e-9)
        assert ll.r_ac == pytest.approx(s.rc + _par(s.re, rl), rel=1e-9)


@given(d=designs())
@SETTINGS
def test_q_point_is_off_the_dc_line_by_the_base_current_only(d):
    """KVL: VCE = VCC − IC·RC − (IC + IB)·RE, so the Q-point sits below the
    IE ≈ IC line by exactly IB·RE (in VCE), to the solver's KCL tolerance
    (1e-9 of the largest branch current, so allow 1e-7 of vcc)."""
    assume(d.topology not in ("collector-feedback", "ce-follower", "common-base"))
    fig = analyse(d, large_signal=False)
    ll, _ = _lines(d)
    r_e = d.stage.re1 + d.stage.re2 if "stage.re1" in keys_for(d.topology) else d.stage.re
    on_line = ll.vce_open - fig.ic * ll.r_dc
    assert ll.vce_q == pytest.approx(on_line - fig.ib * r_e, abs=1e-7 * d.supply.vcc)


@pytest.mark.parametrize("topology", ["common-emitter", "emitter-follower"])
@pytest.mark.parametrize("polarity", ["npn", "pnp"])
def test_clip_points_on_the_transfer_match_the_swing_figures(topology, polarity):
    """The transfer picture's clip points are the swing figures' edges: the
    output excursion there is +swing_up and −swing_down (either order), to
    the 1e-4 the swing search extrapolates its edge to."""
    d = with_values(default_design(topology), {"transistor.polarity": polarity, "source.vpk": 0.01})
    fig = analyse(d)
    c = stage_curves(d, fig.emf_edges)
    outs = sorted(e.out for e in c.edges)
    assert outs[0] == pytest.approx(-fig.swing_down, rel=1e-4, abs=1e-6)
    assert outs[-1] == pytest.approx(fig.swing_up, rel=1e-4, abs=1e-6)
    assert {e.region for e in c.edges} <= {"saturation", "cutoff"}
    assert c.curve.emf[0] < min(fig.emf_edges) and c.curve.emf[-1] > max(fig.emf_edges)
