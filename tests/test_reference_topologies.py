"""The DC operating point of every newer topology against an independent solve.

The engine solves every topology with one nodal Newton solver fed by the
builders. Here each circuit's Kirchhoff current law is written out again by
hand, node by node, from the circuit as a designer draws it (not from the
engine's netlist), with the Ebers–Moll transport model with the forward
Early factor and the Getreu (1976) temperature laws of
``test_engine_references._device`` (Jaeger & Blalock, *Microelectronic
Circuit Design*, ch. 5), and solved with ``scipy.optimize.root``. Nothing
from the engine is used, not even as a first guess: that is a hand estimate
(constant VBE, IC = β·IB), as in ``test_engine_references.scipy_dc``.

The circuits, NPN wording (the PNP mirroring follows below):

* common base: r1 supply → base, r2 base → ground (cb, base → ground, is open
  at DC); rc supply → collector; re emitter → ground; the source (EMF 0 V
  through rs) enters at the emitter, the load rl at the collector;
* collector feedback: rf collector → base, r2 base → ground (may be open);
  rc supply → collector; re1 emitter → em, re2 em → ground; source at the
  base, load at the collector;
* ce-follower: the common emitter (divider, rc, re1, re2) whose collector is
  the base of a follower q2 (collector on the supply, re emitter → ground, β
  its own, every other parameter q1's); source at q1's base, load at q2's
  emitter;
* common-emitter-split / emitter-follower-split: vcc > 0 and vee < 0; rb base
  → ground; rc vcc → collector (the follower's may be 0: collector on vcc);
  re1 + re2 (or re) emitter → vee; source at the base, load at the collector
  (the follower's: its emitter).

Coupling capacitors are open at DC, so the source and load carry no DC current
unless a coupling capacitor is "none" (0 F): then the source's rs (EMF 0 V)
or the load's rl joins the bias network, returned to real ground. A resistor
of 0 Ω makes its two ends one node: its KCL equation is replaced by the
equation that the two voltages are equal and the KCL of the joined node.
"""

from __future__ import annotations

import functools
import math

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy import constants, optimize
from test_engine_references import T0, _dev_kw, _device, par

import model
from model.analyses.figures import design_values
from model.circuit.newton import operating_point
from model.circuit.topologies import build
from model.design.stage import default_design, with_values

CB, CF, CEF, CE_SPLIT, EF_SPLIT = ("common-base", "collector-feedback", "ce-follower",
                                   "common-emitter-split", "emitter-follower-split")
CF_OPEN = "collector-feedback-open"  # a set label only: CF with r2 not fitted


# ---------------------------------------------------------------------------
# Rails and polarity
# ---------------------------------------------------------------------------
#
# The PNP stage is solved directly, not through its NPN mirror image: its
# device equations are the NPN's with VEB, VCB in place of VBE, VBC and every
# terminal current reversed (Jaeger & Blalock ch. 5), which is what ``sign``
# does below. The mirror image would not be exact anyway here: the source and
# the load return to real ground in both polarities, and a split supply with
# vee ≠ −vcc is not symmetric about ground.


def _rails(d) -> tuple:
    """(sign, hi, lo): the transistor's polarity sign, the rail the collector
    side returns to, and the rail the emitter side (and, on a single supply,
    every other "ground" part of the NPN drawing) returns to, V.

    NPN single: hi = vcc, lo = 0; PNP single: parts to ground go to the supply
    and vice versa, hi = 0, lo = vcc. NPN split: hi = vcc, lo = vee; PNP split:
    the rails swap, hi = vee, lo = vcc. rb, the source and the load go to
    real ground (0 V) in every case.
    """
    s = 1.0 if d.transistor.polarity == "npn" else -1.0
    vcc, vee = d.supply.vcc, d.supply.vee
    if d.topology in (CE_SPLIT, EF_SPLIT):
        return s, (vcc, vee) if s > 0 else (vee, vcc)
    return s, (vcc, 0.0) if s > 0 else (0.0, vcc)


def _kw(d, second: bool = False) -> dict:
    """Device parameters for ``_device``; q2 shares all of q1's but β."""
    kw = _dev_kw(d)
    if second:
        kw["beta"] = d.transistor2.beta
    return kw


def _transistor(s, vc, vb, ve, kw) -> tuple:
    """(into collector, into base, out of emitter, IC, IB), A: the terminal
    currents for node voltages vc, vb, ve and the forward-sense currents."""
    ic, ib, _, _ = _device(s * (vb - ve), s * (vb - vc), **kw)
    return s * ic, s * ib, s * (ic + ib), ic, ib


# ---------------------------------------------------------------------------
# KCL, written out per topology
# ---------------------------------------------------------------------------


class _Equations:
    """One equation per unknown node: a KCL sum (A) with the magnitudes of its
    terms, or a join (V) where a 0 Ω part or an ideal source fixes the node."""

    def __init__(self):
        self.kcl: dict[str, tuple[float, float]] = {}
        self.joins: dict[str, float] = {}

    def leaving(self, node: str, *currents: float) -> None:
        """Currents leaving ``node`` through its branches sum to zero."""
        self.kcl[node] = (math.fsum(currents), math.fsum(abs(i) for i in currents))

    def join(self, node: str, volts: float) -> None:
        self.joins[node] = volts

    def nodes(self) -> set:
        return set(self.kcl) | set(self.joins)


def _source_node(eq: _Equations, d, node: str, v: float, currents: list) -> None:
    """KCL at the node the source enters. With cin fitted the source is open
    at DC; without it rs (to the EMF, 0 V) leaves the node, and with rs = 0 the
    EMF itself holds the node at 0 V, so the join replaces its KCL."""
    rs = d.source.rs
    if d.stage.cin > 0:
        eq.leaving(node, *currents)
    elif rs > 0:
        eq.leaving(node, *currents, v / rs)
    else:
        eq.join(node, v)


def _load_current(d, v: float) -> float:
    """The DC current into the load from its node: rl to real ground when
    cout is not fitted (cl is open at DC), nothing otherwise."""
    rl = d.load.rl
    return v / rl if d.stage.cout == 0 and not math.isinf(rl) else 0.0


def _emitter_chain(eq: _Equations, d, ve: float, vm: float, ie: float, lo: float) -> None:
    """e → re1 → em → re2 → lo, with ``ie`` leaving the transistor into e."""
    re1, re2 = d.stage.re1, d.stage.re2
    if re1 > 0:
        eq.leaving("e", (ve - vm) / re1, -ie)
        if re2 > 0:
            eq.leaving("em", (vm - ve) / re1, (vm - lo) / re2)
        else:
            eq.join("em", vm - lo)
    else:
        eq.join("e", ve - vm)  # e and em are one node: the KCL of the pair is em's
        if re2 > 0:
            eq.leaving("em", (vm - lo) / re2, -ie)
        else:
            eq.join("em", vm - lo)


def _common_base(d, v: dict) -> tuple:
    s, (hi, lo) = _rails(d)
    b, c, e = v["b"], v["c"], v["e"]
    r1, r2, st = d.bias.r1, d.bias.r2, d.stage
    into_c, into_b, out_e, ic, ib = _transistor(s, c, b, e, _kw(d))
    eq = _Equations()
    eq.leaving("b", (b - hi) / r1, (b - lo) / r2, into_b)
    _source_node(eq, d, "e", e, [(e - lo) / st.re, -out_e])
    eq.leaving("c", (c - hi) / st.rc, into_c, _load_current(d, c))
    return eq, {"q1": (ic, ib)}


def _collector_feedback(d, v: dict) -> tuple:
    s, (hi, lo) = _rails(d)
    b, c, e, m = v["b"], v["c"], v["e"], v["em"]
    rf, r2, st = d.bias.rf, d.bias.r2, d.stage
    into_c, into_b, out_e, ic, ib = _transistor(s, c, b, e, _kw(d))
    eq = _Equations()
    to_r2 = 0.0 if math.isinf(r2) else (b - lo) / r2  # r2 "open": not fitted
    _source_node(eq, d, "b", b, [(b - c) / rf, to_r2, into_b])
    eq.leaving("c", (c - hi) / st.rc, (c - b) / rf, into_c, _load_current(d, c))
    _emitter_chain(eq, d, e, m, out_e, lo)
    return eq, {"q1": (ic, ib)}


def _ce_follower(d, v: dict) -> tuple:
    s, (hi, lo) = _rails(d)
    b, c, e, m, e2 = v["b"], v["c"], v["e"], v["em"], v["e2"]
    r1, r2, st = d.bias.r1, d.bias.r2, d.stage
    into_c, into_b, out_e, ic, ib = _transistor(s, c, b, e, _kw(d))
    # q2: collector on the supply rail, base on q1's collector.
    _, into_b2, out_e2, ic2, ib2 = _transistor(s, hi, c, e2, _kw(d, second=True))
    eq = _Equations()
    _source_node(eq, d, "b", b, [(b - hi) / r1, (b - lo) / r2, into_b])
    eq.leaving("c", (c - hi) / st.rc, into_c, into_b2)
    _emitter_chain(eq, d, e, m, out_e, lo)
    eq.leaving("e2", (e2 - lo) / st.re, -out_e2, _load_current(d, e2))
    return eq, {"q1": (ic, ib), "q2": (ic2, ib2)}


def _common_emitter_split(d, v: dict) -> tuple:
    s, (hi, lo) = _rails(d)
    b, c, e, m = v["b"], v["c"], v["e"], v["em"]
    into_c, into_b, out_e, ic, ib = _transistor(s, c, b, e, _kw(d))
    eq = _Equations()
    _source_node(eq, d, "b", b, [b / d.bias.rb, into_b])  # rb to real ground
    eq.leaving("c", (c - hi) / d.stage.rc, into_c, _load_current(d, c))
    _emitter_chain(eq, d, e, m, out_e, lo)
    return eq, {"q1": (ic, ib)}


def _emitter_follower_split(d, v: dict) -> tuple:
    s, (hi, lo) = _rails(d)
    b, c, e = v["b"], v["c"], v["e"]
    rc = d.stage.rc
    into_c, into_b, out_e, ic, ib = _transistor(s, c, b, e, _kw(d))
    eq = _Equations()
    _source_node(eq, d, "b", b, [b / d.bias.rb, into_b])
    if rc > 0:
        eq.leaving("c", (c - hi) / rc, into_c)
    else:
        eq.join("c", c - hi)  # collector on the rail
    eq.leaving("e", (e - lo) / d.stage.re, -out_e, _load_current(d, e))
    return eq, {"q1": (ic, ib)}


KCL = {CB: _common_base, CF: _collector_feedback, CEF: _ce_follower,
       CE_SPLIT: _common_emitter_split, EF_SPLIT: _emitter_follower_split}


# ---------------------------------------------------------------------------
# Hand estimates (first guesses) and the scipy solve
# ---------------------------------------------------------------------------
#
# The estimates work in the forward frame x = sign·(v − lo): the emitter rail
# at 0, the collector rail at x_hi = sign·(hi − lo) (vcc, or vcc − vee on a
# split supply), real ground at x_gnd = −sign·lo. They ignore the DC paths a
# missing cin or cout adds; the root finder starts from there.


def _vbe(i_c: float, kw: dict) -> float:
    """VBE (V) of the hand estimate: VT·ln(IC/IS + 1) at temperature."""
    _, _, vt, is_t = _device(0.0, 0.0, **kw)
    return vt * math.log(max(i_c, 1e-12) / is_t + 1.0)


def _beta_t(d, beta: float) -> float:
    """βF at the ambient (Getreu): the hand estimate's IC/IB."""
    return beta * ((constants.zero_Celsius + d.environment.ambient) / T0) ** d.transistor.xtb


def _estimate(d) -> tuple[dict, float]:
    """(node → first-guess V, the estimate's largest emitter current A)."""
    s, (hi, lo) = _rails(d)
    kw, st, bias = _kw(d), d.stage, d.bias
    beta = _beta_t(d, d.transistor.beta)
    x_hi, x_gnd = s * (hi - lo), -s * lo
    x: dict[str, float] = {}
    vbe = 0.65
    if d.topology == CF:
        # Constant VBE, b = (β + 1)·IB·Re + VBE: KCL at b, (c − b)/rf = b/r2 + IB,
        # and at c, (x_hi − c)/rc = β·IB + (c − b)/rf, are then linear in IB
        # (r2 open → 1/r2 = 0).
        g2 = 0.0 if math.isinf(bias.r2) else 1.0 / bias.r2
        r_e, k = st.re1 + st.re2, bias.rf * g2
        for _ in range(3):
            a = (beta + 1.0) * r_e
            ib = (x_hi - (1.0 + k) * vbe - st.rc * vbe * g2) / (
                (1.0 + k) * a + bias.rf + st.rc * (beta + 1.0) + st.rc * a * g2)
            ib = max(ib, 1e-12)
            vbe = _vbe(beta * ib, kw)
        x["e"] = (beta + 1.0) * ib * r_e
        x["b"] = x["e"] + vbe
        x["c"] = x["b"] + bias.rf * (x["b"] * g2 + ib)
    else:
        if d.topology in (CE_SPLIT, EF_SPLIT):
            # rb to ground, and rs in parallel with it when cin is not fitted.
            rs = d.source.rs
            r_b = bias.rb if d.stage.cin > 0 else (par(bias.rb, rs) if rs > 0 else 0.0)
            v_th = x_gnd
        else:
            r_b = par(bias.r1, bias.r2)
            v_th = x_hi * bias.r2 / (bias.r1 + bias.r2)
        r_e = st.re if d.topology in (CB, EF_SPLIT) else st.re1 + st.re2
        for _ in range(3):
            ib = max((v_th - vbe) / (r_b + (beta + 1.0) * r_e), 1e-12)
            vbe = _vbe(beta * ib, kw)
        x["e"] = (beta + 1.0) * ib * r_e
        x["b"] = x["e"] + vbe
        x["c"] = x_hi - beta * ib * st.rc
    x["c"] = max(x["c"], x["e"] + 0.1)  # clipped to saturation if rc is too big
    ie = (beta + 1.0) * ib
    if d.topology in (CF, CEF, CE_SPLIT):
        x["em"] = ie * st.re2
    if d.topology == CEF:
        # The follower loads q1's collector: rc carries IC1 + IB2, with
        # IB2 = (x_c − VBE2)/((β2 + 1)·re) — linear in x_c.
        beta2 = _beta_t(d, d.transistor2.beta)
        k2 = st.rc / ((beta2 + 1.0) * st.re)
        vbe2 = 0.65
        for _ in range(3):
            x_c = max((x_hi - beta * ib * st.rc + k2 * vbe2) / (1.0 + k2), x["e"] + 0.1)
            ie2 = max((x_c - vbe2) / st.re, 1e-12)
            vbe2 = _vbe(ie2, _kw(d, second=True))
        x["c"], x["e2"] = x_c, x_c - vbe2
        ie = max(ie, ie2)
    return {n: lo + s * xn for n, xn in x.items()}, ie


def _residual(d, nodes: list, values, scale: float) -> list:
    """KCL (in units of ``scale``, A) and joins (V), in the order of ``nodes``."""
    eq, _ = KCL[d.topology](d, dict(zip(nodes, values)))
    assert eq.nodes() == set(nodes)  # one equation per unknown node
    return [eq.kcl[n][0] / scale if n in eq.kcl else eq.joins[n] for n in nodes]


@functools.lru_cache(maxsize=None)
def scipy_dc(d) -> dict:
    """{"v": node → V, "q1"/"q2": (IC, IB) forward sense, A} solved with scipy."""
    guess, scale = _estimate(d)
    nodes = sorted(guess)
    best = None
    for method, opts in (("hybr", {"xtol": 1e-14}), ("lm", {"xtol": 1e-15, "ftol": 1e-15})):
        sol = optimize.root(lambda x: _residual(d, nodes, x, scale), [guess[n] for n in nodes],
                            method=method, options=opts)
        err = float(np.max(np.abs(_residual(d, nodes, sol.x, scale))))
        if best is None or err < best[0]:
            best = (err, sol.x)
    # KCL holds to 1e-12 of the estimated emitter current, joins to 1e-12 V:
    # the root is found (as in scipy_dc of test_engine_references).
    assert best[0] < 1e-12, f"scipy root did not converge: residual {best[0]:.1e}"
    v = dict(zip(nodes, (float(x) for x in best[1])))
    _, currents = KCL[d.topology](d, v)
    return {"v": v, **currents}


# ---------------------------------------------------------------------------
# The engine's answer
# ---------------------------------------------------------------------------


def _engine_dc(d) -> tuple[dict, dict]:
    """(node → V for this file's node names, transistor → (IC, IB)) from the engine."""
    stage = build(d.topology, design_values([d]))
    op = operating_point(stage.net)
    assert op.converged[0]
    # The builder names the gain transistor's nodes; a node joined away by a
    # 0 Ω part is read at the node it was joined onto.
    names = {"b": stage.base, "c": stage.collector, "e": stage.emitter}
    if d.topology in (CF, CEF, CE_SPLIT):
        names["em"] = stage.net.element("re1").b if d.stage.re1 > 0 else stage.emitter
    if d.topology == CEF:
        names["e2"] = stage.net.element("q2").e
    v = {k: float(op.voltages[n][0]) for k, n in names.items()}
    currents = {q: (float(st.ic[0]), float(st.ib[0])) for q, st in op.states.items()}
    return v, currents


# ---------------------------------------------------------------------------
# The generated designs
# ---------------------------------------------------------------------------

CURRENTS = np.geomspace(10e-6, 20e-3, 14)  # A, the target IC of each generated design


def _common(i: int) -> dict:
    """The i-th transistor, temperature and supply, cycled as in
    test_engine_references._generated_designs."""
    betas = [80.0, 150.0, 200.0, 300.0, 450.0]
    return {
        "transistor.beta": betas[(3 * i) % 5], "transistor.va": [30.0, 60.0, 100.0, 200.0, 1e9][(2 * i) % 5],
        "transistor.i_s": [1e-15, 1e-14, 1e-13, 5e-15][i % 4], "transistor.beta_r": [0.5, 2.0, 5.0][i % 3],
        "environment.ambient": [-20.0, 0.0, 25.0, 50.0, 85.0][(i + 2) % 5],
        "transistor.xti": [3.0, 3.5, 2.0][i % 3], "transistor.eg": [1.11, 1.12, 1.0][(i + 1) % 3],
        "transistor.xtb": [1.5, 1.0, 2.0][(i + 2) % 3],
        "supply.vcc": [5.0, 9.0, 12.0, 15.0, 24.0][i % 5],
    }


#: re1 : re2 of the bypassed emitter; (1, 0) and (0, 1) make a 0 Ω part.
SPLITS = [(0.2, 0.8), (1.0, 0.0), (0.0, 1.0), (0.5, 0.5)]


def _couplings(i: int, rs: float, rl: float) -> dict:
    """Single supply: cin and cout fitted, cin "none" (rs joins the bias),
    cout "none" (rl joins it) or both, in turn. rs and rl are chosen to shift
    the bias without swamping it: both return to real ground, which for a PNP
    is the collector rail, so there a direct source pulls the stage on harder
    (some of those end saturated, which the comparison covers too)."""
    cin, cout = [(10e-6, 10e-6), (0.0, 10e-6), (10e-6, 0.0), (0.0, 0.0)][i % 4]
    return {"stage.cin": cin, "stage.cout": cout, "source.rs": rs, "load.rl": rl}


def _cb(i: int, ic: float) -> dict:
    # VE ≈ 0.15 vcc, VC ≈ 0.6 vcc, divider current ≈ 10 IB (common practice).
    c = _common(i)
    vcc, beta = c["supply.vcc"], c["transistor.beta"]
    ve = 0.15 * vcc
    re, vb, idiv = ve / ic, ve + 0.65, 10.0 * ic / beta
    return {**c, "stage.re": re, "stage.rc": 0.4 * vcc / ic, "bias.r2": vb / idiv,
            "bias.r1": (vcc - vb) / (idiv + ic / beta), **_couplings(i, 20.0 * re, 3.0 * 0.4 * vcc / ic)}


def _cf(i: int, ic: float, open_r2: bool) -> dict:
    # VE ≈ 0.1 vcc, VC ≈ 0.5 vcc; with r2, it carries ≈ 10 IB and rf 11 IB.
    c = _common(i)
    vcc, beta = c["supply.vcc"], c["transistor.beta"]
    ib, ve = ic / beta, 0.1 * vcc
    vb, vc = ve + 0.65, 0.5 * vcc
    a, b = SPLITS[i % 4]
    i2 = 0.0 if open_r2 else 10.0 * ib
    rc = (vcc - vc) / (ic + i2 + ib)
    return {**c, "stage.re1": a * ve / ic, "stage.re2": b * ve / ic, "stage.rc": rc,
            "bias.r2": "open" if open_r2 else vb / i2, "bias.rf": (vc - vb) / (i2 + ib),
            **_couplings(i, vcc / ib, 3.0 * rc)}


def _cef(i: int, ic: float) -> dict:
    # q1 as a common emitter (VE ≈ 0.15 vcc, VC ≈ 0.6 vcc); q2 at ½, 1 or 2 × IC1
    # with its emitter a VBE below VC, and its own β.
    c = _common(i)
    vcc, beta = c["supply.vcc"], c["transistor.beta"]
    ve, (a, b) = 0.15 * vcc, SPLITS[i % 4]
    vb, idiv = ve + 0.65, 10.0 * ic / beta
    re = (0.6 * vcc - 0.65) / (ic * [0.5, 1.0, 2.0][i % 3])
    return {**c, "transistor2.beta": [80.0, 150.0, 200.0, 300.0, 450.0][(i + 2) % 5],
            "stage.re1": a * ve / ic, "stage.re2": b * ve / ic, "stage.rc": 0.4 * vcc / ic, "stage.re": re,
            "bias.r2": vb / idiv, "bias.r1": (vcc - vb) / (idiv + ic / beta),
            **_couplings(i, vcc * beta / ic, 2.0 * re)}


def _split(i: int, ic: float, follower: bool) -> dict:
    # The base ≈ 50 mV below ground on rb; vee is not −vcc in most rows, so the
    # PNP (rails swapped) runs at another current than its NPN twin.
    c = _common(i)
    vcc, beta = c["supply.vcc"], c["transistor.beta"]
    vee = [-12.0, -5.0, -15.0, -9.0, -24.0][(i + 1) % 5]
    r_e = (-0.7 - vee) / ic
    rs = [1e3, 50.0, 0.0, 10e3][i % 4]  # with cin "none", rs = 0 holds the base at 0 V
    out = {**c, "supply.vee": vee, "bias.rb": 0.05 * beta / ic, "source.rs": rs,
           "stage.cin": 10e-6 if i % 2 else 0.0, "stage.cout": 0.0 if i % 3 == 1 else 10e-6}
    if follower:
        rc = (0.2 * vcc / ic) if i % 3 == 0 else 0.0  # 0: the collector on vcc
        return {**out, "stage.re": r_e, "stage.rc": rc, "load.rl": 5.0 * r_e}
    a, b = SPLITS[i % 4]
    rc = 0.5 * vcc / ic
    return {**out, "stage.re1": a * r_e, "stage.re2": b * r_e, "stage.rc": rc, "load.rl": 2.0 * rc}


def _generated(label: str) -> list:
    """The default design, 14 designs at IC ≈ 10 µA … 20 mA and one saturated
    (rc far too large, so the reverse terms of the transport model carry real
    current), in both polarities."""
    topology = CF if label == CF_OPEN else label
    make = {CB: _cb, CF: lambda i, ic: _cf(i, ic, False), CF_OPEN: lambda i, ic: _cf(i, ic, True),
            CEF: _cef, CE_SPLIT: lambda i, ic: _split(i, ic, False),
            EF_SPLIT: lambda i, ic: _split(i, ic, True)}[label]
    start = default_design(topology)
    npn = [with_values(start, {"bias.r2": "open"}) if label == CF_OPEN else start]
    npn += [with_values(start, make(i, float(ic))) for i, ic in enumerate(CURRENTS)]
    npn.append(with_values(npn[0], {"stage.rc": 200e3 if topology == EF_SPLIT else 50.0 * start.stage.rc}))
    return npn + [with_values(d, {"transistor.polarity": "pnp"}) for d in npn]


LABELS = (CB, CF, CF_OPEN, CEF, CE_SPLIT, EF_SPLIT)
GENERATED = {label: _generated(label) for label in LABELS}
CASES = [(label, k) for label in LABELS for k in range(len(GENERATED[label]))]


def _case_id(case) -> str:
    label, k = case
    d = GENERATED[label][k]
    return f"{label}-{k}-{d.transistor.polarity}"


# ---------------------------------------------------------------------------
# The checks
# ---------------------------------------------------------------------------


def _vbc(d) -> float:
    """q1's forward-sense VBC (V) in the independent solve."""
    v = scipy_dc(d)["v"]
    return _rails(d)[0] * (v["b"] - v["c"])


@pytest.mark.parametrize("label", LABELS)
def test_generated_designs_span_the_current_range(label):
    # Guard for the tests below: each set spans IC = 10 µA … 20 mA (±50 %) in the
    # independent solve, in both polarities, with varied β, VA, IS and ambient.
    ds = GENERATED[label]
    topology = ds[0].topology
    for polarity in ("npn", "pnp"):
        ics = [scipy_dc(d)["q1"][0] for d in ds if d.transistor.polarity == polarity]
        assert min(ics) < 15e-6 and max(ics) > 10e-3, (polarity, min(ics), max(ics))
    for key in ("beta", "va", "i_s"):
        assert len({getattr(d.transistor, key) for d in ds}) >= 4, key
    assert len({d.environment.ambient for d in ds}) >= 4
    # And saturation (VBC > 0.3 V forward sense) in both polarities. Collector
    # feedback cannot saturate with cin fitted: rf carries the base's and r2's
    # currents from the collector, so VC − VB = rf·(VB/r2 + IB) > 0; its rc × 50
    # design is a starved, low-VCB stage instead.
    if topology != CF:
        for polarity in ("npn", "pnp"):
            assert any(_vbc(d) > 0.3 for d in ds if d.transistor.polarity == polarity), polarity
    if label == CEF:
        ic2 = [scipy_dc(d)["q2"][0] for d in ds]
        assert min(ic2) < 15e-6 and max(ic2) > 10e-3
        assert len({d.transistor2.beta for d in ds}) >= 4
    # The DC paths of a missing cin or cout, and a 0 Ω part, are exercised.
    assert any(d.stage.cin == 0 for d in ds) and any(d.stage.cout == 0 for d in ds)
    assert any(d.stage.cin > 0 for d in ds) and any(d.stage.cout > 0 for d in ds)
    if label in (CF, CF_OPEN, CEF, CE_SPLIT):
        assert any(d.stage.re1 == 0 for d in ds) and any(d.stage.re2 == 0 for d in ds)
    if label == EF_SPLIT:
        assert any(d.stage.rc == 0 for d in ds) and any(d.stage.rc > 0 for d in ds)
    if label in (CE_SPLIT, EF_SPLIT):
        assert any(d.stage.cin == 0 and d.source.rs == 0 for d in ds)
        assert any(d.supply.vee != -d.supply.vcc for d in ds)


@pytest.mark.parametrize("case", CASES, ids=_case_id)
def test_dc_operating_point_matches_scipy_root(case):
    label, k = case
    d = GENERATED[label][k]
    ref = scipy_dc(d)
    v, currents = _engine_dc(d)
    # Both solve the same equations. The engine's Newton stops after a junction
    # step below 1e-9·(1 + |u|) V, and its convergence is quadratic, so the point
    # it returns is better than that step by orders; scipy's root holds KCL to
    # 1e-12 of the emitter current (about 1e-12·VT ≈ 3e-14 V on a junction). What
    # is left is rounding in node voltages of up to 24 V (~1e-14 V). IC is
    # exponential in VBE (1e-9 relative per 2.6e-11 V), so rtol 1e-9 on the
    # currents asks for junctions right to ~2.6e-11 V, far inside the
    # engine's step bound yet a thousand times above rounding. Voltages: rtol
    # 1e-9, with atol 1e-11 V for nodes at or near 0 V (a split stage's base).
    assert set(v) == set(ref["v"])
    for node in ref["v"]:
        assert_allclose(v[node], ref["v"][node], rtol=1e-9, atol=1e-11, err_msg=node)
    assert set(currents) == {q for q in ("q1", "q2") if q in ref}
    for q, (ic, ib) in currents.items():
        assert_allclose(ic, ref[q][0], rtol=1e-9, err_msg=f"{q} ic")
        assert_allclose(ib, ref[q][1], rtol=1e-9, err_msg=f"{q} ib")
    # The public figures carry the same solution (the gain transistor's nodes).
    f = model.analyse(d)
    assert_allclose([f.vb, f.vc, f.ve, f.ic], [ref["v"]["b"], ref["v"]["c"], ref["v"]["e"], ref["q1"][0]],
                    rtol=1e-9, atol=1e-11)


@pytest.mark.parametrize("case", CASES, ids=_case_id)
def test_engine_point_satisfies_kcl_recomputed_independently(case):
    label, k = case
    d = GENERATED[label][k]
    v, _ = _engine_dc(d)
    eq, _ = KCL[d.topology](d, v)
    assert eq.nodes() == set(v)
    # At the engine's node voltages this file's own device model and KCL must
    # balance every node. A node voltage off by δ leaves δ·Σg, and the largest
    # conductance at a junction node is gm = IC/VT, so relative to the sum of
    # the branch magnitudes the residual is about δ/VT: 1e-9 allows δ ≈ 2.6e-11 V,
    # as the comparison above. atol 1e-17 A is the rounding of a node voltage
    # (~1e-15 V beside rails of up to 24 V) through a few mS, which matters
    # only where every current all but vanishes (a follower that its
    # saturated driver has cut off carries ~1e-11 A).
    for node, (total, size) in eq.kcl.items():
        assert abs(total) <= 1e-9 * size + 1e-17, (node, total, size)
    # Joined nodes (0 Ω parts, the EMF on a base) are one node in the engine:
    # equal to the last bit, apart from rounding of a rail's value.
    for node, volts in eq.joins.items():
        assert abs(volts) <= 1e-12, (node, volts)
