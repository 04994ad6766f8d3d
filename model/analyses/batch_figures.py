"""``analyse_many``: every numeric figure of ``analyse`` for many designs at
once, as arrays (the spread analysis' engine).

The DC and midband figures come from the same routine as analyse's
(figures.dc_midband), dissipation from power.dissipation; swing and
distortion from :mod:`model.analyses.batch_transfer`, the corners from
:mod:`model.analyses.batch_corners` (each says how its answers relate to the
single-design algorithms).  Rows are grouped by shape as analyse_batch does.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from model.analyses.batch_corners import response_many, with_capacitances
from model.analyses.batch_transfer import large_signal_many
from model.analyses.figures import _KEYS, dc_midband
from model.analyses.midband import device_small_signal
from model.analyses.noise_figures import noise_many
from model.analyses.power import dissipation
from model.analyses.transfer import all_active, region_of
from model.circuit.topologies import FOLLOWER, TRANSISTOR, build, shape_of
from model.design.fields import FIELDS, TOPOLOGIES
from model.errors import DesignError

#: The figures of every row: DC, midband, dissipation and tj.
QUICK_FIGURES = (
    "ic", "ib", "vbe", "vce", "vb", "ve", "vc", "gm", "r_pi", "ro", "beta_ac",
    "av_open", "av_loaded", "av_source", "rin", "rin_base", "rout",
    "p_transistor", "p_supply", "i_supply", "tj",
)
#: The follower's (q2's) figures: NaN, and region2 "", for a stage without one.
FOLLOWER_FIGURES = ("ic2", "ib2", "vbe2", "vce2", "gm2", "r_pi2", "ro2", "p_transistor2", "tj2")
#: The figures computed only with large_signal (NaN without).
LARGE_FIGURES = ("swing_up", "swing_down", "thd", "hd2", "hd3", "f_low", "f_high", "bandwidth", "gain_at_freq")
#: The noise figures, computed only with ``noise=True`` (NaN without): a
#: spread or search that does not look at them does not pay for them.
NOISE_FIGURES = ("en_total", "nf_db", "snr_db")
#: The region of a row with no operating point.
UNSOLVED = "unsolved"


def analyse_many(topology: str, values: dict, *, large_signal: bool = True,
                 noise: bool = False) -> dict[str, np.ndarray]:
    """Every numeric figure of :func:`~model.analyses.figures.analyse` for N rows.

    ``values`` maps the keys of :func:`~model.analyses.figures.design_values`
    (``transistor.theta_ja``, ``ft`` and ``cmu`` included) to arrays of N
    entries or scalars.  Returns a float array of N per key of QUICK_FIGURES
    and LARGE_FIGURES (the latter NaN without ``large_signal``), ``converged``
    (bool) and ``region`` (str; UNSOLVED where not converged).  Every figure
    of a row that did not converge is NaN; the others keep analyse's
    conventions (forward sense, swing 0 off forward-active, f_low 0 when flat
    to DC, f_high inf without an upper corner, both NaN without a passband).
    """
    if topology not in TOPOLOGIES:
        raise DesignError("topology", topology, FIELDS["topology"].rules[TOPOLOGIES[0]].text)
    missing = [k for k in (*_KEYS, "transistor.sign") if k not in values]
    if missing:
        raise DesignError(missing[0], None, "is needed by analyse_many (see design_values)")
    arrays = np.broadcast_arrays(*(np.atleast_1d(np.asarray(values[k], dtype=float)) for k in values))
    if arrays[0].ndim != 1:
        raise DesignError(next(iter(values)), arrays[0].shape, "must be one value per row (a 1-D array)")
    full = dict(zip(values, arrays))
    n = arrays[0].shape[0]
    shapes = shape_of(topology, full)
    group = shapes @ (1 << np.arange(shapes.shape[1]))
    names = QUICK_FIGURES + FOLLOWER_FIGURES + LARGE_FIGURES + NOISE_FIGURES
    groups = np.unique(group)
    if groups.size == 1:
        return _group(topology, full, large_signal, noise)
    out = {k: np.full(n, np.nan) for k in names}
    out["converged"] = np.zeros(n, dtype=bool)
    out["region"] = np.full(n, UNSOLVED, dtype=object)
    out["region2"] = np.full(n, "", dtype=object)
    for g in groups:
        rows = np.flatnonzero(group == g)
        part = _group(topology, {k: v[rows] for k, v in full.items()}, large_signal, noise)
        for k, v in part.items():
            out[k][rows] = v
    out["region"] = out["region"].astype(str)
    out["region2"] = out["region2"].astype(str)
    return out


def _group(topology: str, v: dict, large_signal: bool, noise: bool) -> dict:
    """analyse_many on rows of one shape."""
    stage = build(topology, v)
    op, dev, mid = dc_midband(stage, v["source.rs"])
    ok = op.converged
    st = op.states[TRANSISTOR]
    vbe, vbc = op.junctions[:, 0, 0], op.junctions[:, 0, 1]
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        power = dissipation(stage, op)
        volts = op.voltages
        out = dict(
            ic=st.ic, ib=st.ib, vbe=vbe, vce=vbe - vbc,
            vb=volts[stage.base], ve=volts[stage.emitter], vc=volts[stage.collector],
            gm=dev.gm, r_pi=dev.r_pi, ro=dev.ro, beta_ac=dev.beta_ac,
            av_open=mid.av_open, av_loaded=mid.av_loaded, av_source=mid.av_source,
            rin=mid.rin, rin_base=mid.rin_base, rout=mid.rout,
            p_transistor=power.p_transistor, p_supply=power.p_supply, i_supply=power.i_supply,
            tj=v["environment.ambient"] + power.p_transistor * v["transistor.theta_ja"],
        )
        out.update(_follower(stage, op, power, v))
    batch = stage.net.batch
    out = {k: np.where(ok, np.broadcast_to(x, (batch,)), np.nan) for k, x in out.items()}
    region = np.where(ok, region_of(st.ic, vbc), UNSOLVED)
    if FOLLOWER in stage.transistors:
        k = stage.transistors.index(FOLLOWER)
        region2 = np.where(ok, region_of(op.states[FOLLOWER].ic, op.junctions[:, k, 1]), UNSOLVED)
    else:
        region2 = np.full(batch, "")
    for k in LARGE_FIGURES + NOISE_FIGURES:
        out[k] = np.full(batch, np.nan)
    rows = np.flatnonzero(ok)
    if large_signal and rows.size:
        _large(out, stage, op, v, rows, region, noise)
    out["converged"] = ok
    out["region"] = region
    out["region2"] = region2
    return out


def _follower(stage, op, power, v: dict) -> dict:
    """The FOLLOWER_FIGURES of every row, as analyse's ``*2`` fields."""
    if FOLLOWER not in stage.transistors:
        return {k: np.nan for k in FOLLOWER_FIGURES}
    k = stage.transistors.index(FOLLOWER)
    st, dev = op.states[FOLLOWER], device_small_signal(op, FOLLOWER)
    vbe, vbc = op.junctions[:, k, 0], op.junctions[:, k, 1]
    p2 = power.p_transistors[FOLLOWER]
    return dict(ic2=st.ic, ib2=st.ib, vbe2=vbe, vce2=vbe - vbc, gm2=dev.gm, r_pi2=dev.r_pi, ro2=dev.ro,
                p_transistor2=p2, tj2=v["environment.ambient"] + p2 * v["transistor.theta_ja"])


def _large(out: dict, stage, op, v: dict, rows, region, noise: bool) -> None:
    """Swing, distortion and the response of the converged ``rows`` into ``out``."""
    if rows.size < stage.net.batch:
        stage, op = replace(stage, net=stage.net.take(rows)), op.take(rows)
    v = {k: x[rows] for k, x in v.items()}
    av, rin, rs = out["av_source"][rows], out["rin"][rows], v["source.rs"]
    rails = v["supply.vcc"] - v["supply.vee"]  # as analyse: the span the output can move over
    with np.errstate(divide="ignore", invalid="ignore"):
        span = 3.0 * rails / np.maximum(np.abs(av), 1e-6) + 1.0 * (1.0 + rs / rin)
    big = large_signal_many(stage, op, rails, v["source.vpk"], all_active(op), span)
    gm2 = out["gm2"][rows] if FOLLOWER in stage.transistors else None
    resp = response_many(stage, op, out["gm"][rows], v["transistor.ft"], v["transistor.cmu"], av, v["source.freq"],
                         gm2=gm2)
    for k in ("swing_up", "swing_down", "thd", "hd2", "hd3"):
        out[k][rows] = getattr(big, k)
    out["f_low"][rows], out["f_high"][rows] = resp.f_low, resp.f_high
    with np.errstate(invalid="ignore"):
        out["bandwidth"][rows] = resp.f_high - resp.f_low
    out["gain_at_freq"][rows] = resp.gain_at_freq
    if noise:
        _noise(out, with_capacitances(stage, out["gm"][rows], v["transistor.ft"], v["transistor.cmu"], gm2),
               op, v, rows, resp)


#: Rows of one noise solve: each holds BAND_POINTS complex matrices, so the
#: memory stays a few tens of MB whatever the batch.
_NOISE_ROWS = 128


def _noise(out: dict, stage, op, v: dict, rows, resp) -> None:
    """NOISE_FIGURES of the converged ``rows`` (``stage``/``op``/``v`` already
    taken to them), in chunks of _NOISE_ROWS."""
    for start in range(0, rows.size, _NOISE_ROWS):
        part = np.arange(start, min(start + _NOISE_ROWS, rows.size))
        sub = replace(stage, net=stage.net.take(part)) if part.size < stage.net.batch else stage
        got, _, _ = noise_many(sub, op.take(part) if part.size < stage.net.batch else op,
                               {k: x[part] for k, x in v.items()}, resp.f_low[part], resp.f_high[part])
        for k in NOISE_FIGURES:
            out[k][rows[part]] = got[k]
