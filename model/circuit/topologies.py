"""One builder per topology: design values in, netlist out.

A builder only places parts on nodes and names the terminals the analyses
need; all solving happens in :mod:`model.circuit.newton`.  A PNP stage is the mirror
image of its NPN twin on the same supply: on a single supply every part that
goes to ground in the NPN stage goes to the supply instead, and the other way
round; on a split supply the two rails swap and ground stays where it is.
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

#: Element names the analyses look up: the supplies, the source EMF, the
#: transistors (q2 is the follower of a ce-follower stage).
SUPPLY, NEGATIVE, EMF, TRANSISTOR, FOLLOWER = "vcc", "vee", "vs", "q1", "q2"
#: Tags for the groups of parts that the midband figures remove.
BIAS, SOURCE, LOAD = "bias", "source", "load"
_RAILS = (GROUND, SUPPLY, NEGATIVE)

_DIVIDED = ("stage.re1", "stage.re2", "source.rs", "stage.ce", "stage.cin", "stage.cout", "load.cl")
_FOLLOWING = ("stage.rc", "source.rs", "stage.cin", "stage.cout", "load.cl")
#: Which parts may be 0 in each topology: a resistor of 0 Ω joins two nodes,
#: a capacitor of 0 F is not fitted.
_OPTIONAL = {
    "common-emitter": _DIVIDED,
    "emitter-follower": _FOLLOWING,
    "common-base": ("source.rs", "stage.cb", "stage.cin", "stage.cout", "load.cl"),
    "collector-feedback": _DIVIDED,
    "ce-follower": _DIVIDED,
    "common-emitter-split": _DIVIDED,
    "emitter-follower-split": _FOLLOWING,
}
#: Which resistors may be open (not fitted): collector feedback's r2.
_MAY_BE_OPEN = {"collector-feedback": ("bias.r2",)}


@dataclass(frozen=True)
class StageCircuit:
    """A built stage: the netlist and the names of its terminals.

    base, collector and emitter are the (first) gain transistor's nodes;
    ``device_input`` is the node the signal enters the transistor at (the
    base, or a common-base stage's emitter); ``transistors`` names every
    transistor, the gain transistor first.
    """

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
    device_input: str = ""
    transistors: tuple = (TRANSISTOR,)
    #: The supply sources (the positive one first).
    supplies: tuple = (SUPPLY,)


def shape_of(topology: str, values: dict) -> tuple:
    """The structural key of each batch row: which optional parts are absent
    (zero resistors, capacitors not fitted, an open load or r2) and the polarity."""
    opens = _MAY_BE_OPEN.get(topology, ())
    keys = (*_OPTIONAL[topology], *opens, "load.rl", "transistor.sign")
    v = {k: np.atleast_1d(np.asarray(values[k], dtype=float)) for k in keys}
    flags = [v[k] == 0 for k in _OPTIONAL[topology]] + [np.isinf(v[k]) for k in opens]
    flags += [np.isinf(v["load.rl"]), v["transistor.sign"] < 0]
    return np.stack(np.broadcast_arrays(*flags), axis=-1)


def build(topology: str, values: dict) -> StageCircuit:
    """Build the netlist of ``topology`` for a batch of uniform shape."""
    shape = shape_of(topology, values)
    if not (shape == shape[:1]).all():
        raise ValueError("batch rows differ in shape; group them with shape_of() first")
    return _BUILDERS[topology](_Parts(values, shape.shape[0], split=topology.endswith("-split")))


class _Parts:
    """Collects elements for a builder, mirroring rails for a PNP stage.

    Builders place parts as in the NPN stage, on the rails SUPPLY (the
    collector side), ``low`` (the emitter side: ground, or NEGATIVE on a
    split supply) and GROUND; :meth:`rail` mirrors them for a PNP stage.
    """

    def __init__(self, values: dict, batch: int, *, split: bool = False):
        self.v = {k: batch_rows(x, batch) for k, x in values.items()}
        self.batch = batch
        self.pnp = bool(self.v["transistor.sign"][0] < 0)
        self.split = split
        self.low = NEGATIVE if split else GROUND
        self.elements: list = []
        self.resistors: list[str] = []
        self.joined: dict[str, str] = {}

    def rail(self, npn_rail: str) -> str:
        """The rail a part goes to: the NPN stage's rail, mirrored for a PNP."""
        if not self.pnp:
            return npn_rail
        swap = {SUPPLY: NEGATIVE, NEGATIVE: SUPPLY} if self.split else {GROUND: SUPPLY, SUPPLY: GROUND}
        return swap.get(npn_rail, npn_rail)

    def node(self, name: str) -> str:
        while name in self.joined:
            name = self.joined[name]
        return name

    def resistor(self, name, a, b, key, tags=()):
        """A resistor from ``key``; a zero value joins ``a`` onto ``b``
        instead, and an open (infinite) one is not fitted."""
        r = self.v[key]
        if np.isinf(r[0]):
            return
        if r[0] == 0:
            # A rail is never joined away: the other end moves onto it.
            keep, gone = (a, b) if a in _RAILS else (b, a)
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

    def finish(self, topology, *, base="b", collector="c", emitter="e", device_input="b") -> StageCircuit:
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
            has_load=not np.isinf(self.v["load.rl"][0]),
            resistors=tuple(self.resistors),
            device_input=n(device_input),
            transistors=tuple(e.name for e in fixed if isinstance(e, Bjt)),
            supplies=(SUPPLY, NEGATIVE) if self.split else (SUPPLY,),
        )

    def supplies(self):
        self.elements.append(VoltageSource(SUPPLY, SUPPLY, GROUND, self.v["supply.vcc"]))
        if self.split:
            self.elements.append(VoltageSource(NEGATIVE, NEGATIVE, GROUND, self.v["supply.vee"]))

    def divider(self, tags=(BIAS,)):
        """r1 from the supply to the base, r2 from the base to ground."""
        self.resistor("r1", self.rail(SUPPLY), "b", "bias.r1", tags)
        self.resistor("r2", "b", self.rail(GROUND), "bias.r2", tags)

    def source(self, to: str):
        """The source through rs and cin into node ``to``; without cin the
        source is wired to it ("in" joins ``to``)."""
        self.elements.append(VoltageSource(EMF, "src", GROUND, np.zeros(self.batch), frozenset((SOURCE,))))
        self.resistor("rs", "src", "in", "source.rs", (SOURCE,))
        self.capacitor("cin", "in", to, "stage.cin", wired_to=to)

    def load(self, out_from: str):
        """The load through cout from node ``out_from``; without cout the
        load is wired to it ("out" joins it).  rl and cl go to real ground."""
        self.capacitor("cout", out_from, "out", "stage.cout", wired_to=out_from)
        if not np.isinf(self.v["load.rl"][0]):
            self.resistor("rl", "out", GROUND, "load.rl", (LOAD,))
        self.capacitor("cl", "out", GROUND, "load.cl", coupling=False, tags=(LOAD,))

    def transistor(self, name, c, b, e, beta_key="transistor.beta"):
        v = self.v
        params = params_at(
            i_s=v["transistor.i_s"],
            beta_f=v[beta_key],
            beta_r=v["transistor.beta_r"],
            va=v["transistor.va"],
            polarity_sign=v["transistor.sign"],
            celsius=v["environment.ambient"],
            xti=v["transistor.xti"],
            eg=v["transistor.eg"],
            xtb=v["transistor.xtb"],
        )
        self.elements.append(Bjt(name, c, b, e, params))

    def bypassed_emitter(self):
        """re1 (in the signal path) and re2 (bypassed by ce) from the emitter
        to the emitter rail."""
        self.resistor("re1", "e", "em", "stage.re1")
        self.resistor("re2", "em", self.rail(self.low), "stage.re2")
        if self.v["stage.re2"][0] > 0:
            # Not fitted: re2 stays in the signal path with re1 (unbypassed).
            self.capacitor("ce", "em", self.rail(self.low), "stage.ce")

    def split_bias(self):
        """rb from the base to ground: the base sits near 0 V between the rails."""
        self.resistor("rb", "b", GROUND, "bias.rb", (BIAS,))


def _common_emitter(p: _Parts) -> StageCircuit:
    p.supplies()
    p.split_bias() if p.split else p.divider()
    p.source("b")
    p.load("c")
    p.transistor(TRANSISTOR, "c", "b", "e")
    p.resistor("rc", p.rail(SUPPLY), "c", "stage.rc")
    p.bypassed_emitter()
    return p.finish("common-emitter-split" if p.split else "common-emitter")


def _emitter_follower(p: _Parts) -> StageCircuit:
    p.supplies()
    p.split_bias() if p.split else p.divider()
    p.source("b")
    p.load("e")
    p.transistor(TRANSISTOR, "c", "b", "e")
    p.resistor("rc", p.rail(SUPPLY), "c", "stage.rc")
    p.resistor("re", "e", p.rail(p.low), "stage.re")
    return p.finish("emitter-follower-split" if p.split else "emitter-follower")


def _common_base(p: _Parts) -> StageCircuit:
    p.supplies()
    # The divider stays for rin_base: it is the base's return (through cb,
    # or alone when cb is not fitted), not a shunt across the input.
    p.divider(tags=())
    p.source("e")
    p.load("c")
    p.transistor(TRANSISTOR, "c", "b", "e")
    p.resistor("rc", p.rail(SUPPLY), "c", "stage.rc")
    # re shunts the emitter as the divider shunts a common emitter's base:
    # rin_base is the transistor's own input with it removed.
    p.resistor("re", "e", p.rail(GROUND), "stage.re", (BIAS,))
    p.capacitor("cb", "b", p.rail(GROUND), "stage.cb")
    return p.finish("common-base", device_input="e")


def _collector_feedback(p: _Parts) -> StageCircuit:
    p.supplies()
    p.resistor("rf", "c", "b", "bias.rf", (BIAS,))
    p.resistor("r2", "b", p.rail(GROUND), "bias.r2", (BIAS,))
    p.source("b")
    p.load("c")
    p.transistor(TRANSISTOR, "c", "b", "e")
    p.resistor("rc", p.rail(SUPPLY), "c", "stage.rc")
    p.bypassed_emitter()
    return p.finish("collector-feedback")


def _ce_follower(p: _Parts) -> StageCircuit:
    """A common emitter whose collector drives a follower's base directly;
    the follower's collector is on the supply and its emitter drives the load."""
    p.supplies()
    p.divider()
    p.source("b")
    p.load("e2")
    p.transistor(TRANSISTOR, "c", "b", "e")
    p.transistor(FOLLOWER, p.rail(SUPPLY), "c", "e2", beta_key="transistor2.beta")
    p.resistor("rc", p.rail(SUPPLY), "c", "stage.rc")
    p.bypassed_emitter()
    p.resistor("re", "e2", p.rail(GROUND), "stage.re")
    return p.finish("ce-follower")


_BUILDERS = {
    "common-emitter": _common_emitter,
    "emitter-follower": _emitter_follower,
    "common-base": _common_base,
    "collector-feedback": _collector_feedback,
    "ce-follower": _ce_follower,
    "common-emitter-split": _common_emitter,
    "emitter-follower-split": _emitter_follower,
}
