"""A circuit as a list of elements on named nodes.

Element values are numpy arrays with one entry per batch row (or scalars that
broadcast), so one netlist describes a whole batch of designs that share a
shape.  Node ``"0"`` is ground.
"""

from __future__ import annotations

import copy
from dataclasses import dataclass, field, replace
from functools import cached_property

import numpy as np

from model.circuit.device import DeviceParams

GROUND = "0"


@dataclass(frozen=True)
class Resistor:
    """A resistor of ``r`` ohms between nodes ``a`` and ``b``."""

    name: str
    a: str
    b: str
    r: np.ndarray
    tags: frozenset = field(default_factory=frozenset)


@dataclass(frozen=True)
class Capacitor:
    """A capacitor of ``c`` farads between ``a`` and ``b``.

    ``coupling`` capacitors (coupling and bypass) are short circuits at midband
    and hold their quiescent voltage in the large-signal transfer; the others
    (load and device capacitance) are open at midband.
    """

    name: str
    a: str
    b: str
    c: np.ndarray
    coupling: bool = True
    tags: frozenset = field(default_factory=frozenset)


@dataclass(frozen=True)
class VoltageSource:
    """An ideal source holding node ``plus`` at ``v`` volts above ``minus``."""

    name: str
    plus: str
    minus: str
    v: np.ndarray
    tags: frozenset = field(default_factory=frozenset)


@dataclass(frozen=True)
class Bjt:
    """A bipolar transistor; ``params.sign`` says NPN (+1) or PNP (−1)."""

    name: str
    c: str
    b: str
    e: str
    params: DeviceParams
    tags: frozenset = field(default_factory=frozenset)


@dataclass(frozen=True)
class Netlist:
    """Elements plus the batch size they describe."""

    elements: tuple
    batch: int

    def __post_init__(self):
        if len(self._by_name) != len(self.elements):
            raise ValueError(f"duplicate element names in {[e.name for e in self.elements]}")

    @cached_property
    def signature(self) -> tuple:
        """The shape: each element's kind, name, nodes and coupling flag (values
        left out).  Cached: a plan is looked up by it on every solve."""
        return tuple((type(e).__name__, e.name, terminals(e), getattr(e, "coupling", None))
                     for e in self.elements)

    @cached_property
    def nodes(self) -> tuple[str, ...]:
        """Every node name except ground, in first-seen order."""
        seen: dict[str, None] = {}
        for e in self.elements:
            for n in terminals(e):
                if n != GROUND:
                    seen.setdefault(n, None)
        return tuple(seen)

    def of_type(self, kind) -> list:
        return [e for e in self.elements if isinstance(e, kind)]

    def element(self, name: str):
        return self._by_name[name]

    @cached_property
    def _by_name(self) -> dict:
        return {e.name: e for e in self.elements}

    def without(self, *tags: str) -> "Netlist":
        """The same circuit with every element carrying one of ``tags`` removed."""
        drop = set(tags)
        return Netlist(tuple(e for e in self.elements if not (e.tags & drop)), self.batch)

    def drop(self, *names: str) -> "Netlist":
        """The same circuit without the elements called ``names``."""
        return Netlist(tuple(e for e in self.elements if e.name not in names), self.batch)

    def with_elements(self, *extra) -> "Netlist":
        """The same circuit with ``extra`` elements added."""
        return Netlist(self.elements + tuple(extra), self.batch)

    def with_source(self, name: str, v) -> "Netlist":
        """The same circuit with voltage source ``name`` set to ``v`` volts."""
        out = [replace(e, v=_batch_array(v, self.batch)) if e.name == name else e for e in self.elements]
        return self._same_shape(tuple(out), self.batch)

    def coupling_as_sources(self, volts: dict[str, np.ndarray]) -> "Netlist":
        """Coupling capacitors replaced by sources at the given voltages (a − b, V).

        This is the circuit for the large-signal transfer at midband, where each
        coupling and bypass capacitor is big enough to hold its quiescent charge.
        Other capacitors (load, device) are left in place; they carry no DC current.
        """
        out = []
        for e in self.elements:
            if isinstance(e, Capacitor) and e.coupling:
                out.append(VoltageSource(e.name, e.a, e.b, _batch_array(volts[e.name], self.batch), e.tags))
            else:
                out.append(e)
        return Netlist(tuple(out), self.batch)

    def take(self, rows) -> "Netlist":
        """Only the batch rows picked by an integer index array."""
        rows = np.asarray(rows)
        return self._same_shape(tuple(_take_element(e, self.batch, rows) for e in self.elements), rows.size)

    def repeat(self, n: int) -> "Netlist":
        """Each batch row repeated ``n`` times in a row: a sweep of n points per design."""
        return self._same_shape(tuple(_repeat_element(e, self.batch, n) for e in self.elements), self.batch * n)

    def _same_shape(self, elements: tuple, batch: int) -> "Netlist":
        """A netlist of the same shape as this one with other values: the
        shape's cached properties carry over (a plan is looked up by them)."""
        out = Netlist(elements, batch)
        for name in ("signature", "nodes"):
            if name in self.__dict__:
                out.__dict__[name] = self.__dict__[name]
        return out


def terminals(e) -> tuple[str, ...]:
    if isinstance(e, Bjt):
        return (e.c, e.b, e.e)
    if isinstance(e, VoltageSource):
        return (e.plus, e.minus)
    return (e.a, e.b)


def _batch_array(v, batch: int) -> np.ndarray:
    return batch_rows(v, batch).copy()


def batch_rows(v, batch: int) -> np.ndarray:
    """``v`` as (batch,) floats: itself when it already is such an array (a
    design's netlist is built and cut many times, and np.broadcast_to costs
    a few times the arithmetic on its few rows), else a broadcast view."""
    if type(v) is np.ndarray and v.shape == (batch,) and v.dtype == np.float64:
        return v
    return np.broadcast_to(np.asarray(v, dtype=float), (batch,))


_VALUE = {Resistor: "r", Capacitor: "c", VoltageSource: "v"}


def _repeat_element(e, batch: int, n: int):
    if isinstance(e, Bjt):
        return _with(e, "params", e.params.repeat(n))
    attr = _VALUE[type(e)]
    return _with(e, attr, np.repeat(batch_rows(getattr(e, attr), batch), n))


def _take_element(e, batch: int, rows):
    if isinstance(e, Bjt):
        return _with(e, "params", e.params.take(rows))
    attr = _VALUE[type(e)]
    return _with(e, attr, batch_rows(getattr(e, attr), batch)[rows])


def _with(e, attr: str, value):
    """``e`` with one field replaced: the elements have no checks to rerun,
    and dataclasses.replace costs more than the copy on a design's netlist."""
    out = copy.copy(e)
    object.__setattr__(out, attr, value)
    return out
