"""``analyse(design) -> Figures``: every figure of one design, and a batched
DC-and-midband path for many designs at once.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from typing import Sequence

import numpy as np

from model.analyses.capacitance import device_capacitance, with_device_capacitance
from model.analyses.checks import stage_warnings
from model.analyses.corner_search import POINTS_PER_DECADE, Response, frequency_response
from model.analyses.hand import HandEstimate, hand_estimate
from model.analyses.midband import decibels, device_small_signal, midband_figures
from model.analyses.noise_figures import Noise, noise_figures
from model.analyses.power import dissipation
from model.analyses.transfer import LargeSignal, region_of, swing_and_distortion
from model.analyses.unsolved import unsolved_message
from model.circuit.newton import operating_point
from model.circuit.topologies import FOLLOWER, TRANSISTOR, StageCircuit, build, shape_of
from model.design.stage import Design
from model.errors import SolveError
from model.files.plain_json import plain

#: Design keys fed to the builders, as "table.key"; transistor.sign is derived.
_KEYS = (
    "supply.vcc", "supply.vee", "bias.r1", "bias.r2", "bias.rf", "bias.rb",
    "stage.rc", "stage.re1", "stage.re2", "stage.ce", "stage.cb", "stage.re", "stage.cin", "stage.cout",
    "source.rs", "source.vpk", "source.freq", "load.rl", "load.cl",
    "transistor.beta", "transistor.beta_r", "transistor.va", "transistor.i_s",
    "transistor.xti", "transistor.eg", "transistor.xtb", "environment.ambient",
    "transistor.ft", "transistor.cmu", "transistor.theta_ja",  # the response and tj of analyse_many
    "transistor2.beta",
    # The noise of analyse_many.
    "source.noise_low", "source.noise_high", "transistor.rb", "transistor.kf", "transistor.af",
)
_KEY_PARTS = tuple(tuple(key.split(".")) for key in _KEYS)

#: The keys of ``Figures.to_dict()`` that every consumer may rely on.
FIGURE_KEYS = (
    "region", "ic", "ib", "vbe", "vce", "vb", "ve", "vc", "gm", "r_pi", "ro", "beta_ac",
    "av_open", "av_loaded", "av_source", "rin", "rin_base", "rout",
    "swing_up", "swing_down", "thd", "hd2", "hd3",
    "p_transistor", "p_supply", "i_supply", "tj",
    "f_low", "f_high", "bandwidth", "gain_at_freq", "phase_at_freq", "c_pi",
)


#: The follower's figures in ``Figures.to_dict()``, for a stage with one.
FOLLOWER_KEYS = ("region2", "ic2", "ib2", "vbe2", "vce2", "gm2", "r_pi2", "ro2", "p_transistor2", "tj2")


def design_values(designs: Sequence[Design]) -> dict:
    """Design keys as arrays with one entry per design, ready for a builder."""
    values = {}
    for key, (table, name) in zip(_KEYS, _KEY_PARTS):
        values[key] = np.array([getattr(getattr(d, table), name) for d in designs], dtype=float)
    values["transistor.sign"] = np.array([1.0 if d.transistor.polarity == "npn" else -1.0 for d in designs])
    return values


@dataclass(frozen=True)
class Figures:
    """Everything ``analyse`` derives from one design, in plain SI floats.

    Voltages and currents of the transistor (ic, ib, vbe, vce) are in its
    forward sense, so a PNP reports the same magnitudes as its NPN twin;
    vb, ve and vc are node voltages to ground.
    """

    region: str
    ic: float
    ib: float
    vbe: float
    vce: float
    vb: float
    ve: float
    vc: float
    gm: float
    r_pi: float
    ro: float
    beta_ac: float
    av_open: float
    av_loaded: float
    av_source: float
    rin: float
    rin_base: float
    rout: float
    swing_up: float
    swing_down: float
    thd: float
    hd2: float
    hd3: float
    p_transistor: float
    p_supply: float
    i_supply: float
    tj: float
    f_low: float
    f_high: float
    bandwidth: float
    gain_at_freq: float
    phase_at_freq: float
    c_pi: float
    hand: HandEstimate
    warnings: tuple
    p_resistors: dict = field(default_factory=dict)
    vout_wanted: float = 0.0
    ic_beta_half: float = 0.0
    ic_beta_double: float = 0.0
    kcl_residual: float = 0.0
    newton_iterations: int = 0
    #: False when swing, distortion and the response were not computed (they are NaN).
    large_signal: bool = True
    #: The sweep and the per-capacitor estimates behind f_low and f_high.
    response: Response | None = None
    #: Source EMFs (V) where the stage leaves forward-active, going down and up.
    emf_edges: tuple = (math.nan, math.nan)
    #: What ends the swing up and down ("q1 saturation", "q2 cutoff", "").
    swing_limits: tuple = ("", "")
    #: The follower (q2) of a two-transistor stage, forward sense as ic, vce;
    #: "" and NaN for a stage without one.
    region2: str = ""
    ic2: float = math.nan
    ib2: float = math.nan
    vbe2: float = math.nan
    vce2: float = math.nan
    gm2: float = math.nan
    r_pi2: float = math.nan
    ro2: float = math.nan
    p_transistor2: float = math.nan
    tj2: float = math.nan

    #: Noise figures (model.analyses.noise_figures), with the response.
    noise: Noise | None = None

    @property
    def en_total(self) -> float:
        """The total input-referred noise density at source.freq (V/√Hz); NaN without the sweep."""
        return self.noise.en_total if self.noise is not None else math.nan

    @property
    def nf_db(self) -> float:
        """The noise figure at source.rs and source.freq (dB); NaN without one."""
        return self.noise.nf_db if self.noise is not None else math.nan

    @property
    def snr_db(self) -> float:
        """The SNR of vpk over the noise band (dB); NaN without one."""
        return self.noise.snr_db if self.noise is not None else math.nan

    @property
    def two_transistors(self) -> bool:
        return bool(self.region2)

    def to_dict(self) -> dict:
        """The ``report --json`` object: FIGURE_KEYS, then gains in dB and extras.

        Every number is finite or None, at any depth: an unbounded figure (an
        open load's rout, the hand estimate's re of a stage that does not
        conduct) or an undefined one (the corners without a passband) is None.
        """
        out = {k: getattr(self, k) for k in FIGURE_KEYS}
        out["warnings"] = [w.to_dict() for w in self.warnings]
        out["hand"] = self.hand.to_dict()
        for k in ("av_open", "av_loaded", "av_source"):
            out[k + "_db"] = float(decibels(getattr(self, k)))
        out["p_resistors"] = dict(self.p_resistors)
        for k in ("vout_wanted", "ic_beta_half", "ic_beta_double", "kcl_residual", "newton_iterations"):
            out[k] = getattr(self, k)
        out["swing_up_by"], out["swing_down_by"] = (x or None for x in self.swing_limits)
        if self.two_transistors:
            out.update({k: getattr(self, k) for k in FOLLOWER_KEYS})
        out["gain_at_freq_db"] = float(decibels(self.gain_at_freq))
        r = self.response
        if r is not None:
            out["f_low_by"] = r.low_by.part if r.low_by else None
            out["f_high_by"] = r.high_by.part if r.high_by else None
            out["f_low_parts"] = {p.part: p.freq for p in r.low_parts}
            out["f_high_parts"] = {p.part: p.freq for p in r.high_parts}
            out["f_low_estimate"] = r.f_low_estimate
            out["f_high_estimate"] = r.f_high_estimate
            out["f_high_miller"] = r.f_high_miller
        if self.noise is not None:
            out["noise"] = self.noise.to_dict()
        return plain(out)


def analyse(design: Design, *, large_signal: bool = True, per_decade: int = POINTS_PER_DECADE) -> Figures:
    """Every figure of ``design``; raises SolveError if no operating point is found.

    With ``large_signal=False`` the swing, distortion and frequency-response
    figures are NaN and the headroom warning is not judged: the quick figures
    a live readout shows while the slower sweeps run elsewhere.
    ``per_decade`` is the density of the frequency sweep kept in ``response``.
    """
    t = design.transistor
    variants = [design, _with_beta(design, t.beta / 2.0), _with_beta(design, t.beta * 2.0)]
    stage = build(design.topology, design_values(variants))
    # The β/2 and 2β variants ride along in the same batch: their midband
    # costs next to nothing there, and only their IC is used.
    op3, dev, mid = dc_midband(stage, np.full(3, design.source.rs))
    if not op3.converged[0]:
        raise SolveError(*unsolved_message(design, float(op3.residual[0]), op3.iterations))
    nominal = replace(stage, net=stage.net.take(np.array([0])))
    op = op3.take(np.array([0]))
    st = op.states[TRANSISTOR]
    vbe, vbc = float(op.junctions[0, 0, 0]), float(op.junctions[0, 0, 1])
    region = str(region_of(st.ic, op.junctions[:, 0, 1])[0])
    # Where the swing search first looks: the output can move at most about vcc,
    # plus room for the ~0.5 V base-emitter excursion that reaches cut-off.
    rs, rin = design.source.rs, float(mid.rin[0])
    rails = design.supply.vcc - design.supply.vee
    span = 3.0 * rails / max(abs(float(mid.av_source[0])), 1e-6) + 1.0 * (1.0 + rs / rin)
    big = (swing_and_distortion(nominal, op, rails, design.source.vpk, span) if large_signal
           else LargeSignal(*(math.nan,) * 5, (math.nan, math.nan), np.zeros(0), np.zeros(0)))
    caps = device_capacitance(float(dev.gm[0]), t.ft, t.cmu)
    follower = _follower(design, nominal, op) if FOLLOWER in nominal.transistors else {}
    followers = ((FOLLOWER, device_capacitance(follower["gm2"], t.ft, t.cmu)),) if follower else ()
    resp = (frequency_response(nominal, op, caps, float(mid.av_source[0]), design.source.freq,
                               per_decade=per_decade, followers=followers)
            if large_signal else None)
    noise = (noise_figures(design, design_values([design]), with_device_capacitance(nominal, caps, followers), op,
                           resp.freq, resp.f_low, resp.f_high) if large_signal else None)
    power = dissipation(nominal, op)
    if follower:
        follower["p_transistor2"] = p2 = float(power.p_transistors[FOLLOWER][0])
        follower["tj2"] = design.environment.ambient + p2 * t.theta_ja
    p_q = float(power.p_transistor[0])
    tj = design.environment.ambient + p_q * t.theta_ja
    ic = float(st.ic[0])
    av_source = float(mid.av_source[0])
    wanted = design.source.vpk * abs(av_source)
    p_res = {k: float(v[0]) for k, v in power.p_resistors.items()}
    ics = op3.states[TRANSISTOR].ic
    ic_half = float(ics[1]) if op3.converged[1] else math.nan
    ic_double = float(ics[2]) if op3.converged[2] else math.nan
    warnings = stage_warnings(
        design, region=region, ic=ic, vce=vbe - vbc, vbc=vbc,
        swing_up=big.swing_up, swing_down=big.swing_down, wanted_out=wanted,
        p_transistor=p_q, tj=tj, p_resistors=p_res,
        ic_beta_half=ic_half, ic_beta_double=ic_double, device=caps, ft=t.ft,
        band=(resp.f_low, resp.f_high, abs(resp.gain_at_freq) / max(abs(av_source), 1e-300)) if resp else None,
        follower=follower, swing_limits=big.limits if large_signal else ("", ""),
    )
    v = op.voltages
    nan = math.nan
    return Figures(
        region=region, ic=ic, ib=float(st.ib[0]), vbe=vbe, vce=vbe - vbc,
        vb=float(v[nominal.base][0]), ve=float(v[nominal.emitter][0]), vc=float(v[nominal.collector][0]),
        gm=float(dev.gm[0]), r_pi=float(dev.r_pi[0]), ro=float(dev.ro[0]), beta_ac=float(dev.beta_ac[0]),
        av_open=float(mid.av_open[0]), av_loaded=float(mid.av_loaded[0]), av_source=av_source,
        rin=float(mid.rin[0]), rin_base=float(mid.rin_base[0]), rout=float(mid.rout[0]),
        swing_up=big.swing_up, swing_down=big.swing_down, thd=big.thd, hd2=big.hd2, hd3=big.hd3,
        p_transistor=p_q, p_supply=float(power.p_supply[0]), i_supply=float(power.i_supply[0]), tj=tj,
        f_low=resp.f_low if resp else nan, f_high=resp.f_high if resp else nan,
        bandwidth=resp.bandwidth if resp else nan,
        gain_at_freq=abs(resp.gain_at_freq) if resp else nan,
        phase_at_freq=resp.phase_at_freq if resp else nan, c_pi=caps.c_pi, response=resp,
        hand=hand_estimate(design), warnings=warnings, p_resistors=p_res, vout_wanted=wanted,
        ic_beta_half=ic_half, ic_beta_double=ic_double,
        kcl_residual=float(op.residual[0]), newton_iterations=op3.iterations,
        large_signal=large_signal, emf_edges=big.emf_edges,
        swing_limits=big.limits if large_signal else ("", ""), noise=noise, **follower,
    )


def _follower(design: Design, stage: StageCircuit, op) -> dict:
    """The follower's operating point and gm, as Figures' ``*2`` fields."""
    k = stage.transistors.index(FOLLOWER)
    st = op.states[FOLLOWER]
    vbe, vbc = float(op.junctions[0, k, 0]), float(op.junctions[0, k, 1])
    dev = device_small_signal(op, FOLLOWER)
    return dict(region2=str(region_of(st.ic, op.junctions[:, k, 1])[0]), ic2=float(st.ic[0]),
                ib2=float(st.ib[0]), vbe2=vbe, vce2=vbe - vbc,
                gm2=float(dev.gm[0]), r_pi2=float(dev.r_pi[0]), ro2=float(dev.ro[0]))


def dc_midband(stage: StageCircuit, rs: np.ndarray):
    """The operating point, device small-signal parameters and midband figures
    of every row of a built stage: the one DC-and-midband path of both
    :func:`analyse` and :func:`analyse_batch`.  ``rs`` (Ω) per row."""
    op = operating_point(stage.net)
    # Rows that did not converge carry garbage; they are flagged, not warned about.
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        return op, device_small_signal(op), midband_figures(stage, op, rs)


def _with_beta(design: Design, beta: float) -> Design:
    return replace(design, transistor=replace(design.transistor, beta=beta))


@dataclass(frozen=True)
class BatchFigures:
    """DC and midband figures of many designs (arrays, one entry per design)."""

    converged: np.ndarray
    region: np.ndarray
    ic: np.ndarray
    vce: np.ndarray
    gm: np.ndarray
    r_pi: np.ndarray
    ro: np.ndarray
    av_open: np.ndarray
    av_loaded: np.ndarray
    av_source: np.ndarray
    rin: np.ndarray
    rin_base: np.ndarray
    rout: np.ndarray


def analyse_batch(topology: str, values: dict) -> BatchFigures:
    """DC operating point and midband figures for a batch given as arrays.

    ``values`` maps the design keys (see :func:`design_values`) to arrays.
    Rows of different shape (a zero resistor, an open load, polarity) are
    grouped and each group is solved as one batch.
    """
    n = len(np.atleast_1d(values["supply.vcc"]))
    full = {k: np.broadcast_to(np.asarray(v, dtype=float), (n,)) for k, v in values.items()}
    # One integer per row from the shape flags: far quicker to group than rows of bools.
    shapes = shape_of(topology, full)
    group = shapes @ (1 << np.arange(shapes.shape[1]))
    parts = {}
    for g in np.unique(group):
        rows = np.flatnonzero(group == g)
        stage = build(topology, {k: v[rows] for k, v in full.items()})
        op, dev, mid = dc_midband(stage, full["source.rs"][rows])
        st = op.states[TRANSISTOR]
        vbe, vbc = op.junctions[:, 0, 0], op.junctions[:, 0, 1]
        parts[g] = (rows, dict(
            converged=op.converged, region=region_of(st.ic, vbc), ic=st.ic, vce=vbe - vbc,
            gm=dev.gm, r_pi=dev.r_pi, ro=dev.ro, av_open=mid.av_open, av_loaded=mid.av_loaded,
            av_source=mid.av_source, rin=mid.rin, rin_base=mid.rin_base, rout=mid.rout,
        ))
    out = {}
    if len(parts) == 1:  # one shape for every row: the arrays are already in order
        return BatchFigures(**next(iter(parts.values()))[1])
    for name in BatchFigures.__dataclass_fields__:
        sample = next(iter(parts.values()))[1][name]
        arr = np.empty(n, dtype=sample.dtype if sample.dtype.kind != "U" else object)
        for rows, data in parts.values():
            arr[rows] = data[name]
        out[name] = arr
    return BatchFigures(**out)
