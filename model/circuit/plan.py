"""The structure of a netlist for one kind of analysis, compiled to index
matrices so that assembling the nodal equations is a few matrix products.

A plan depends only on the netlist's *shape* (which elements sit on which
nodes) and the analysis kind, never on element values, so it is built once
and cached; every later solve of the same shape only multiplies arrays.

How a netlist becomes equations
-------------------------------
* Voltage constraints (sources and, at midband, coupling capacitors as 0 V
  sources) are eliminated first: each node is written as an unknown plus a
  known offset, a signed sum of constraint voltages (a union–find over the
  constraints).  A node tied through constraints to ground becomes known.
  What is left is plain nodal analysis, whose matrices are small.
* Nodes with no conductive path to ground in this analysis (the load side of
  an unloaded coupling capacitor at DC) are held at 0 V; no current flows
  there, so the choice changes nothing else.
* Transistor terminals are numbered first (``n_ports`` of them), and the
  junction maps (``unknown_junction``, ``unknown_drive``) let the DC solve
  reduce the linear network onto the junctions once before Newton.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property, lru_cache

import numpy as np

from model.circuit.netlist import GROUND, Bjt, Capacitor, Netlist, Resistor, VoltageSource
from model.errors import SolveError

DC, MIDBAND, AC = "dc", "midband", "ac"


@dataclass(frozen=True, eq=False)
class Plan:
    """Index matrices of one netlist shape for one analysis kind.

    With g (batch, admittances), V (batch, constraints) and x (batch, n):
      A = (g @ adm_stamp).reshape(n, n),  b = (g ⊗ V) @ adm_rhs,
      node voltages = x @ node_pick + V @ node_coef  (columns in ``nodes`` order),
      transistor terminals (c, b, e of each) = x @ term_pick + V @ term_coef.
    """

    nodes: tuple
    n: int
    n_ports: int
    admittances: tuple  # element names, with the capacitors last in AC
    constraints: tuple  # element names of the voltage constraints, in V's column order
    adm_stamp: np.ndarray
    adm_rhs: np.ndarray
    adm_incidence: np.ndarray  # (n_nodes, n_adm): +1 at a, −1 at b; v @ it is each voltage drop
    node_pick: np.ndarray
    node_coef: np.ndarray
    term_pick: np.ndarray
    term_coef: np.ndarray
    index: dict  # node → unknown number, −1 when known
    #: Nodes held at 0 V only because nothing conducts to them in this analysis.
    floating: frozenset
    term_spread: np.ndarray  # (3k·3k, n·n): where a terminal conductance block lands in A

    # The same products as sparse sums, for big batches where a dense matrix
    # product would mostly multiply zeros: each entry is (target, ((i, c), ...)).
    @cached_property
    def stamp_pattern(self) -> np.ndarray:
        """(n, n) bool: the entries of A any admittance can reach."""
        return (self.adm_stamp != 0).any(axis=0).reshape(self.n, self.n)

    @cached_property
    def adm_terms(self):
        return _sparse(self.adm_stamp)

    @cached_property
    def rhs_terms(self):
        return _sparse(self.adm_rhs)

    @cached_property
    def node_terms(self):
        return _sparse(self.node_coef)

    # The transistors as two-ports on their junctions, k transistors, forward
    # sense before the polarity sign: junction voltages (VBE, VBC of each) are
    # terminal voltages @ term_junction, and the currents into the terminals
    # are junction_terms @ (IC, IB of each).
    @cached_property
    def term_junction(self) -> np.ndarray:
        """(3k, 2k): VBE = vb − ve, VBC = vb − vc from (c, b, e) of each transistor."""
        k = self.term_pick.shape[1] // 3
        m = np.zeros((3 * k, 2 * k))
        for t in range(k):
            m[3 * t + 1, 2 * t], m[3 * t + 2, 2 * t] = 1.0, -1.0
            m[3 * t + 1, 2 * t + 1], m[3 * t, 2 * t + 1] = 1.0, -1.0
        return m

    @cached_property
    def junction_terms(self) -> np.ndarray:
        """(3k, 2k): currents into (c, b, e) are (IC, IB, −IC − IB)."""
        k = self.term_pick.shape[1] // 3
        m = np.zeros((3 * k, 2 * k))
        for t in range(k):
            m[3 * t, 2 * t], m[3 * t + 1, 2 * t + 1] = 1.0, 1.0
            m[3 * t + 2, 2 * t], m[3 * t + 2, 2 * t + 1] = -1.0, -1.0
        return m

    @cached_property
    def unknown_junction(self) -> np.ndarray:
        """(n, 2k): junction voltages from the unknowns (before the offsets)."""
        return self.term_pick @ self.term_junction

    @cached_property
    def unknown_drive(self) -> np.ndarray:
        """(n, 2k): where each junction current enters the nodal equations."""
        return self.term_pick @ self.junction_terms

    @cached_property
    def adm_unknown(self) -> np.ndarray:
        """(n_adm, n): +1 at the unknown of an admittance's a end, −1 at its b
        end; branch currents @ it are the currents leaving each (super)node."""
        return self.adm_incidence.T @ self.node_pick.T

    @cached_property
    def adm_unknown_abs(self) -> np.ndarray:
        return np.abs(self.adm_unknown)

    @cached_property
    def pick_term(self) -> np.ndarray:
        """(3k, n): terminal currents @ it are the currents into each unknown."""
        return np.ascontiguousarray(self.term_pick.T)

    @cached_property
    def pick_term_abs(self) -> np.ndarray:
        return np.abs(self.pick_term)


def plan_for(net: Netlist, kind: str) -> Plan:
    """The (cached) plan of ``net``'s shape for a DC, MIDBAND or AC analysis."""
    return _build(net.signature, kind)


@lru_cache(maxsize=256)
def _build(signature: tuple, kind: str) -> Plan:
    kinds = {t: [(name, ends, coup) for t2, name, ends, coup in signature if t2 == t]
             for t in (Resistor.__name__, Capacitor.__name__, VoltageSource.__name__, Bjt.__name__)}
    resistors, caps = kinds["Resistor"], kinds["Capacitor"]
    sources, bjts = kinds["VoltageSource"], kinds["Bjt"]
    nodes = tuple(dict.fromkeys(n for _, _, ends, _ in signature for n in ends if n != GROUND))

    constraints = [(name, ends) for name, ends, _ in sources]
    admittances = [(name, ends) for name, ends, _ in resistors]
    if kind == MIDBAND:
        constraints += [(name, ends) for name, ends, coupling in caps if coupling]
    elif kind == AC:
        admittances += [(name, ends) for name, ends, _ in caps]
    conductive = [ends for _, ends in constraints + admittances]
    conductive += [(b, e) for _, (c, b, e), _ in bjts] + [(b, c) for _, (c, b, e), _ in bjts]
    ports = [n for _, ends, _ in bjts for n in ends]

    index, coef, n, floating = _eliminate_constraints(nodes, constraints, conductive, ports)
    n_nodes, n_src, n_adm = len(nodes), len(constraints), len(admittances)
    col = {node: i for i, node in enumerate(nodes)}

    node_pick = np.zeros((n, n_nodes))
    node_coef = np.zeros((n_src, n_nodes))
    for node, i in col.items():
        if index[node] >= 0:
            node_pick[index[node], i] = 1.0
        node_coef[:, i] = coef[node]

    adm_stamp = np.zeros((n_adm, n, n))
    adm_rhs = np.zeros((n_adm, n_src, n))
    incidence = np.zeros((n_nodes, n_adm))
    for k, (_, (a, b)) in enumerate(admittances):
        drop = _coef(coef, a, n_src) - _coef(coef, b, n_src)  # known part of v_a − v_b
        for row, sign in ((a, 1.0), (b, -1.0)):
            r = index.get(row, -1)
            if r < 0:
                continue
            for other, s2 in ((a, 1.0), (b, -1.0)):
                if index.get(other, -1) >= 0:
                    adm_stamp[k, r, index[other]] += sign * s2
            adm_rhs[k, :, r] -= sign * drop
        if a != GROUND:
            incidence[col[a], k] += 1.0
        if b != GROUND:
            incidence[col[b], k] -= 1.0

    term_pick = np.zeros((n, len(ports)))
    term_coef = np.zeros((n_src, len(ports)))
    for t, node in enumerate(ports):
        if index.get(node, -1) >= 0:
            term_pick[index[node], t] = 1.0
        term_coef[:, t] = _coef(coef, node, n_src)
    n_ports = len({index.get(p, -1) for p in ports} - {-1})
    return Plan(
        nodes=nodes, n=n, n_ports=n_ports,
        admittances=tuple(name for name, _ in admittances),
        constraints=tuple(name for name, _ in constraints),
        adm_stamp=adm_stamp.reshape(n_adm, n * n), adm_rhs=adm_rhs.reshape(n_adm * n_src, n),
        adm_incidence=incidence, node_pick=node_pick, node_coef=node_coef,
        term_pick=term_pick, term_coef=term_coef, index=index, floating=floating,
        term_spread=np.einsum("pt,qs->tspq", term_pick, term_pick).reshape(len(ports) ** 2, n * n),
    )


def _sparse(dense: np.ndarray) -> tuple:
    """Columns of a (sources, targets) matrix as (target, ((source, coef), ...))."""
    return tuple(
        (t, tuple((int(i), float(dense[i, t])) for i in np.flatnonzero(dense[:, t])))
        for t in range(dense.shape[1])
        if dense[:, t].any()
    )


def _coef(coef, node, n_src):
    return coef[node] if node != GROUND else np.zeros(n_src)


def _eliminate_constraints(nodes, constraints, conductive, first):
    """Union–find over voltage constraints with offsets as signed sums of them.

    Returns (index, coef, size, floating): node → unknown number or −1, node →
    offset coefficients over the constraints, the number of unknowns, and the
    nodes tied to ground only for want of a conductive path.  Unknowns touched
    by ``first`` are numbered first.
    """
    n_src = len(constraints)
    parent = {n: n for n in (*nodes, GROUND)}
    rel = {n: np.zeros(n_src) for n in parent}  # v[n] = v[parent[n]] + rel[n]·V

    def find(n):
        if parent[n] == n:
            return n, np.zeros(n_src)
        root, acc = find(parent[n])
        parent[n], rel[n] = root, rel[n] + acc
        return root, rel[n]

    def tie(plus, minus, volts):
        rp, op = find(plus)
        rm, om = find(minus)
        if rp == rm:
            raise SolveError(f"voltage sources form a loop through {plus} and {minus}",
                             "an ideal source or a shorted capacitor closes a loop")
        # v_rp + op = v_rm + om + volts; ground always stays a root.
        if rp == GROUND:
            parent[rm], rel[rm] = GROUND, op - om - volts
        else:
            parent[rp], rel[rp] = rm, om + volts - op

    for k, (_, (plus, minus)) in enumerate(constraints):
        tie(plus, minus, np.eye(n_src)[k])

    group = {n: n for n in parent}

    def top(n):
        while group[n] != n:
            group[n] = group[group[n]]
            n = group[n]
        return n

    for a, b in conductive:
        group[top(find(a)[0])] = top(find(b)[0])
    islands = set()
    for node in nodes:
        r = find(node)[0]
        if r != GROUND and top(r) != top(GROUND):
            islands.add(top(r))
    floating = frozenset(n for n in nodes if top(find(n)[0]) in islands)
    for node in nodes:
        r = find(node)[0]
        if r != GROUND and top(r) != top(GROUND):
            tie(r, GROUND, np.zeros(n_src))

    order = [r for r in dict.fromkeys(find(n)[0] for n in (*first, *nodes)) if r != GROUND]
    number = {r: i for i, r in enumerate(order)}
    index, coef = {}, {}
    for node in nodes:
        root, off = find(node)
        index[node] = number.get(root, -1)
        coef[node] = off.copy()
    return index, coef, len(order), floating
