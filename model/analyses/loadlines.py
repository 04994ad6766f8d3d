"""Load lines in the IC–VCE plane, from the nodal solver with the transistor
taken out.

With the transistor removed, the network between its collector and emitter
is a Thevenin source: its open-circuit voltage and its resistance with every
source at zero.  At DC (capacitors open) that gives the DC load line
VCE = Voc − IC·R_dc; at midband (coupling and bypass capacitors shorted)
the resistance R_ac gives the AC load line through the quiescent point,
with slope −1/R_ac.  Both take IE = IC, as the usual construction does, so
the quiescent point sits off the DC line by IB times the emitter resistance.

A stage of two transistors has a pair of lines for each: the other one
stays in the network, linearised at the operating point.
"""

from __future__ import annotations

from dataclasses import dataclass

from model.analyses.figures import design_values
from model.analyses.unsolved import unsolved_message
from model.circuit.linearised import small_signal
from model.circuit.netlist import VoltageSource
from model.circuit.newton import OperatingPoint, operating_point
from model.circuit.topologies import TRANSISTOR, StageCircuit, build
from model.design.stage import Design
from model.errors import SolveError


@dataclass(frozen=True)
class LoadLines:
    """vce_open (V) and r_dc, r_ac (Ω) of the lines; vce_q (V), ic_q (A) the Q-point."""

    vce_open: float
    r_dc: float
    r_ac: float
    vce_q: float
    ic_q: float

    def dc_ic(self, vce):
        """IC (A) on the DC load line at VCE (V)."""
        return (self.vce_open - vce) / self.r_dc

    def ac_ic(self, vce):
        """IC (A) on the AC load line at VCE (V)."""
        return self.ic_q + (self.vce_q - vce) / self.r_ac

    @property
    def ac_vce_cutoff(self) -> float:
        """Where the AC line meets IC = 0 (V)."""
        return self.vce_q + self.ic_q * self.r_ac


def load_lines(stage: StageCircuit, op: OperatingPoint, transistor: str = TRANSISTOR) -> LoadLines:
    """The DC and AC load lines of one ``transistor`` (by name, the gain
    transistor unless told) of a single-design stage at its operating point."""
    q = stage.net.element(transistor)
    s = float(q.params.sign[0])
    bare = stage.net.drop(transistor)
    # Linear without the transistor: the DC solution with every source at its
    # own value is the open-circuit voltage.
    v_open = small_signal(bare, op, excite={e.name: e.v for e in bare.of_type(VoltageSource)}, at_dc=True)
    vce_open = s * float((v_open[q.c] - v_open[q.e])[0])
    test = {q.c: 1.0, q.e: -1.0}
    dc = small_signal(bare, op, inject=test, at_dc=True)
    ac = small_signal(bare, op, inject=test)
    # The junctions are stored in the order of stage.transistors.
    vbe, vbc = (float(x) for x in op.junctions[0, stage.transistors.index(transistor)])
    return LoadLines(
        vce_open=vce_open,
        r_dc=float((dc[q.c] - dc[q.e])[0]),
        r_ac=float((ac[q.c] - ac[q.e])[0]),
        vce_q=vbe - vbc,
        ic_q=float(op.states[transistor].ic[0]),
    )


def design_load_lines(design: Design, transistor: str) -> LoadLines:
    """The load lines of ``transistor`` in ``design``, its operating point
    solved here; SolveError if there is none."""
    stage = build(design.topology, design_values([design]))
    op = operating_point(stage.net)
    if not op.converged[0]:
        raise SolveError(*unsolved_message(design, float(op.residual[0]), op.iterations))
    return load_lines(stage, op, transistor)
