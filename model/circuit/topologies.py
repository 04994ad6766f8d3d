"""One builder per topology: design values in, netlist out.

A builder only places parts on nodes and names the terminals the analyses
need; all solving happens in :mod:`model.circuit.newton`.  A PNP stage is the mirror
image of its NPN twin on the same positive supply: every part that goes to
ground in the NPN stage goes to the supply instead, and the other way round.
The source and the load stay referred to ground, as they are on the bench.

Values come as a dict ``"table.key" → array`` (one entry per batch row), so
a batch of designs that share a shape builds one netlist.  A zero-ohm
resistor is not a part but a joined node, which changes the shape; so does a
capacitor of 0 F, which is not fitted: a missing bypass or load capacitor is
simply absent, and a missing coupling capacitor is a direct (DC) connection
in its place, so the source's and the load's DC paths join the bias and the
operating point is solved with them.  Rows of one batch must agree on all
of these (see :func:`shape_of`).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from model.circuit.device import params_at
from model.circuit.netlist import GROUND, Bjt, Capacitor, Netlist, Resistor, VoltageSource, batch_rows

#: Element names the analyses look up.
SUPPLY, EMF, TRANSISTOR = "vcc", "vs", "q1"
#: Tags for the groups of parts that the midband figures remove.
BIAS, SOURCE, LOAD = "bias", "source", "load"

#: Which parts may be 0 in each topology: a resistor of 0 Ω joins two nodes,
#: a capacitor of 0 F is not fitted.
_OPTIONAL = {
    "common-emitter": ("stage.re1", "stage.re2", "source.rs",
                       "stage.ce", "stage.cin", "stage.cout", "load.cl"),
    "emitter-follower": ("stage.rc", "source.rs", "stage.cin", "stage.cout", "load.cl"),
}


@dataclass(frozen=True)
class StageCircuit:
    """A built stage: the netlist and the names of its terminals."""

    net: Netlist
    topology: str
    input: str  # the stage's input terminal (source side of cin)
    output: str  # the load node (far side of cout)
    base: str
    collector: str
    emitter: str
    supply: str
    has_load: bool
    #: Resistor names, for the dissipation table.
    resistors: tuple


def shape_of(topology: str, values: dict) -> tuple:
    """The structural key of each batch row: which optional parts are absent
    (zero resistors, capacitors not fitted, an open load) and the polarity."""
    keys = (*_OPTIONAL[topology], "load.rl", "transistor.sign")
    v = {k: np.atleast_1d(np.asarray(values[k], dtype=float)) for k in keys}
    flags = [v[k] == 0 for k in _OPTIONAL[topology]]
    flags += [np.isinf(v["load.rl"]), v["transistor.sign"] < 0]
    return np.stack(np.broadcast_arrays(*flags), axis=-1)


def build(topology: str, values: dict) -> StageCircuit:
    """Build the netlist of ``topology`` for a batch of uniform shape."""
    shape = shape_of(topology, values)
    if not (shape == shape[:1]).all():
        raise ValueError("batch rows differ in shape; group them with shape_of() first")
    builder = {"common-emitter": _common_emitter, "emitter-follower": _emitter_follower}[topology]
    return builder(_Parts(values, shape.shape[0]))


class _Parts:
    """Collects elements for a builder, mirroring rails for a PNP stage."""

    def __init__(self, values: dict, batch: int):
        self.v = {k: batch_rows(x, batch) for k, x in values.items()}
        self.batch = batch
        self.pnp = bool(self.v["transistor.sign"][0] < 0)
        self.elements: list = []
        self.resistors: list[str] = []
        self.joined: dict[str, str] = {}

    def rail(self, npn_rail: str) -> str:
        """The rail a part goes to: ground and supply swap for a PNP stage."""
        if not self.pnp:
            return npn_rail
        return {GROUND: SUPPLY, SUPPLY: GROUND}[npn_rail]

    def node(self, name: str) -> str:
        while name in self.joined:
            name = self.joined[name]
        return name

    def resistor(self, name, a, b, key, tags=()):
        """A resistor from ``key``; a zero value joins ``a`` onto ``b`` instead."""
        r = self.v[key]
        if r[0] == 0:
            # A rail is never joined away: the other end moves onto it.
            keep, gone = (a, b) if a in (GROUND, SUPPLY) else (b, a)
            self.joined[gone] = keep
            return
        self.resistors.append(name)
        self.elements.append(Resistor(name, a, b, r, frozenset(tags)))

    def capacitor(self, name, a, b, key, *, wired_to=None, coupling=True, tags=()):
        """A capacitor from ``key``.  At 0 F it is not fitted: no part at all,
        or, for a coupling capacitor, a wire in its place (the other end is
        joined onto ``wired_to``, the stage's own end)."""
        c = self.v[key]
        if c[0] > 0:
            self.elements.append(Capacitor(name, a, b, c, coupling, frozenset(tags)))
        elif wired_to is not None:
            gone, keep = self.node(b if wired_to == a else a), self.node(wired_to)
            if gone != keep:
                self.joined[gone] = keep

    def finish(self, topology, *, base, collector, emitter, has_load) -> StageCircuit:
        n = self.node
        fixed = []
        for e in self.elements:
            if isinstance(e, Resistor):
                fixed.append(Resistor(e.name, n(e.a), n(e.b), e.r, e.tags))
            elif isinstance(e, Capacitor):
                fixed.append(Capacitor(e.name, n(e.a), n(e.b), e.c, e.coupling, e.tags))
            elif isinstance(e, VoltageSource):
                fixed.append(VoltageSource(e.name, n(e.plus), n(e.minus), e.v, e.tags))
            else:
                fixed.append(Bjt(e.name, n(e.c), n(e.b), n(e.e), e.params, e.tags))
        return StageCircuit(
            net=Netlist(tuple(fixed), self.batch),
            topology=topology,
            input=n("in"),
            output=n("out"),
            base=n(base),
            collector=n(collector),
            emitter=n(emitter),
            supply=SUPPLY,
            has_load=has_load,
            resistors=tuple(self.resistors),
        )

    def common_parts(self, out_from: str):
        """Supply, divider bias, source with cin, load with cout: shared by both stages."""
        v = self.v
        self.elements.append(VoltageSource(SUPPLY, SUPPLY, GROUND, v["supply.vcc"]))
        self.resistor("r1", self.rail(SUPPLY), "b", "bias.r1", (BIAS,))
        self.resistor("r2", "b", self.rail(GROUND), "bias.r2", (BIAS,))
        self.elements.append(VoltageSource(EMF, "src", GROUND, np.zeros(self.batch), frozenset((SOURCE,))))
        self.resistor("rs", "src", "in", "source.rs", (SOURCE,))
        # Without cin the source is wired to the base ("in" joins "b"), and
        # without cout the load to the output terminal ("out" joins it).
        self.capacitor("cin", "in", "b", "stage.cin", wired_to="b")
        self.capacitor("cout", out_from, "out", "stage.cout", wired_to=out_from)
        has_load = not np.isinf(v["load.rl"][0])
        if has_load:
            self.resistor("rl", "out", GROUND, "load.rl", (LOAD,))
        self.capacitor("cl", "out", GROUND, "load.cl", coupling=False, tags=(LOAD,))
        params = params_at(
            i_s=v["transistor.i_s"],
            beta_f=v["transistor.beta"],
            beta_r=v["transistor.beta_r"],
            va=v["transistor.va"],
            polarity_sign=v["transistor.sign"],
            celsius=v["environment.ambient"],
            xti=v["transistor.xti"],
            eg=v["transistor.eg"],
            xtb=v["transistor.xtb"],
        )
        self.elements.append(Bjt(TRANSISTOR, "c", "b", "e", params))
        return has_load


def _common_emitter(p: _Parts) -> StageCircuit:
    has_load = p.common_parts(out_from="c")
    p.resistor("rc", p.rail(SUPPLY), "c", "stage.rc")
    p.resistor("re1", "e", "em", "stage.re1")
    p.resistor("re2", "em", p.rail(GROUND), "stage.re2")
    if p.v["stage.re2"][0] > 0:
        # Not fitted: re2 stays in the signal path with re1 (unbypassed).
        p.capacitor("ce", "em", p.rail(GROUND), "stage.ce")
    return p.finish("common-emitter", base="b", collector="c", emitter="e", has_load=has_load)


def _emitter_follower(p: _Parts) -> StageCircuit:
    has_load = p.common_parts(out_from="e")
    p.resistor("rc", p.rail(SUPPLY), "c", "stage.rc")
    p.resistor("re", "e", p.rail(GROUND), "stage.re")
    return p.finish("emitter-follower", base="b", collector="c", emitter="e", has_load=has_load)
