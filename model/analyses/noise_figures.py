"""The noise figures of one design: densities at the signal frequency, the
noise figure and its optimum, the integrated input noise over a band, the
SNR of the requested amplitude, and which sources contribute most.

Definitions (README "Noise"):

* en, in: the stage's input noise voltage and current densities, the
  two-port pair at the input terminal (model.analyses.noise);
* en_total: the total input-referred density with the design's rs, the
  source's own 4kT·rs included;
* NF = 10·log10(en_total² / 4kT·rs) (Friis's noise factor in dB), null
  at rs = 0, where the source has no noise of its own to compare with;
* rs_opt = en/in and nf_min_db the noise figure there;
* vn_in_rms: √∫ en_total² df over the band, input-referred (V rms), and
  snr_db = 20·log10((vpk/√2)/vn_in_rms);
* contributors: each source's share of that integral (power, so the shares
  sum to 1), largest first.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from model.analyses.noise import SOURCE_THERMAL, TransistorNoise, band_grid, integrate, noise_spectrum
from model.circuit.newton import OperatingPoint
from model.circuit.topologies import StageCircuit
from model.design.stage import Design

#: Where a stage flat to DC (f_low = 0) starts its noise band (Hz): 1/f
#: noise has no finite integral down to DC, and 1 Hz is below every band a
#: sensor front end here is for.  Set source.noise_low to choose.
DC_BAND_START = 1.0


@dataclass(frozen=True)
class Noise:
    """Noise figures (SI; dB where named); NaN where one does not exist.

    ``band`` (Hz) is (f1, f2) of the integral, NaN without one;
    ``contributors`` ((name, share), …) largest share first; ``spectrum``
    (freq Hz, en_total, en, in·rs, source floor √(4kT·rs), each V/√Hz) over
    the response sweep, for the picture and ``response --csv``.
    """

    en: float
    in_: float
    en_total: float
    nf_db: float
    rs_opt: float
    nf_min_db: float
    vn_in_rms: float
    snr_db: float
    band: tuple
    contributors: tuple
    spectrum: tuple

    def to_dict(self) -> dict:
        return {"en": self.en, "in": self.in_, "en_total": self.en_total, "nf_db": self.nf_db,
                "rs_opt": self.rs_opt, "nf_min_db": self.nf_min_db, "vn_in_rms": self.vn_in_rms,
                "snr_db": self.snr_db, "band": list(self.band),
                "contributors": [[name, share] for name, share in self.contributors]}


def noise_band(noise_low, noise_high, f_low, f_high) -> tuple[np.ndarray, np.ndarray]:
    """(f1, f2) in Hz per row: source.noise_low/high where set (non-zero),
    else the stage's −3 dB corners (f1 from DC_BAND_START when flat to DC);
    NaN where a corner is needed and does not exist."""
    low, high, f_low, f_high = (np.asarray(x, dtype=float) for x in (noise_low, noise_high, f_low, f_high))
    f1 = np.where(low > 0, low, np.where(f_low == 0, DC_BAND_START, f_low))
    f2 = np.where(high > 0, high, f_high)
    ok = np.isfinite(f1) & np.isfinite(f2) & (f1 > 0) & (f1 < f2)
    return np.where(ok, f1, np.nan), np.where(ok, f2, np.nan)


def transistor_noise(design: Design) -> TransistorNoise:
    t = design.transistor
    return TransistorNoise(rb=t.rb, kf=t.kf, af=t.af)


def noise_many(stage: StageCircuit, op: OperatingPoint, v: dict, f_low, f_high, extra=None):
    """The noise figures of every row of a built stage (device capacitances
    in place) at ``op``: a dict of arrays en, in, en_total, nf_db, rs_opt,
    nf_min_db at source.freq and vn_in_rms, snr_db, band_low, band_high over
    each row's band, and the NoiseSpectrum (columns: source.freq, the band's
    BAND_POINTS, then ``extra`` (F,) Hz if given).  ``v`` holds the design
    keys per row (model.analyses.figures.design_values)."""
    with np.errstate(all="ignore"):
        batch = stage.net.batch
        rows = {k: np.broadcast_to(np.asarray(v[k], dtype=float), (batch,)) for k in _NOISE_KEYS}
        f1, f2 = noise_band(rows["source.noise_low"], rows["source.noise_high"], f_low, f_high)
        banded = np.isfinite(f1)
        grid = band_grid(np.where(banded, f1, 1.0), np.where(banded, f2, 10.0))
        columns = [rows["source.freq"][:, None], grid]
        if extra is not None:
            columns.append(np.broadcast_to(np.asarray(extra, dtype=float), (batch, len(extra))))
        ns = noise_spectrum(stage, op, np.concatenate(columns, axis=1), rs=rows["source.rs"],
                            celsius=rows["environment.ambient"],
                            transistor=TransistorNoise(rb=rows["transistor.rb"], kf=rows["transistor.kf"],
                                                       af=rows["transistor.af"]))
        band = slice(1, 1 + grid.shape[1])
        rs_opt, nf_min = ns.optimum()
        total = ns.total
        vn = np.sqrt(integrate(grid, total[:, band] ** 2))
        vn = np.where(banded, vn, np.nan)
        vpk = rows["source.vpk"]
        snr = np.where(vpk > 0, 20.0 * np.log10(vpk / np.sqrt(2.0) / vn), np.nan)
        nf = np.where(rows["source.rs"] > 0, ns.noise_figure_db()[:, 0], np.nan)
        out = dict(en=ns.en[:, 0], in_=ns.in_[:, 0], en_total=total[:, 0], nf_db=nf, rs_opt=rs_opt[:, 0],
                   nf_min_db=nf_min[:, 0], vn_in_rms=vn, snr_db=snr, band_low=f1, band_high=f2)
    return out, ns, band


#: The design keys the noise reads per row.
_NOISE_KEYS = ("source.rs", "source.vpk", "source.freq", "source.noise_low", "source.noise_high",
               "environment.ambient", "transistor.rb", "transistor.kf", "transistor.af")


def noise_figures(design: Design, values: dict, stage: StageCircuit, op: OperatingPoint, sweep_freq: np.ndarray,
                  f_low: float, f_high: float) -> Noise:
    """The Noise of ``design`` (its design_values ``values``) built as
    ``stage`` (device capacitances in place) at ``op``; ``sweep_freq`` the
    response's grid (Hz), f_low and f_high its corners (Hz)."""
    out, ns, band = noise_many(stage, op, values, f_low, f_high, extra=sweep_freq)
    with np.errstate(all="ignore"):
        sweep = slice(band.stop, None)
        # Each source's share of the band's noise power (of the density at
        # source.freq when there is no band).
        parts = np.concatenate([ns.referred()[0], np.broadcast_to(ns.source_thermal[0], (1, ns.freq.size))])
        if math.isfinite(out["band_low"][0]):
            power = integrate(ns.freq[band], parts[:, band])
        else:
            power = parts[:, 0]
        shares = _shares(ns.names + (SOURCE_THERMAL,), power)
        floor = np.sqrt(ns.source_thermal[0, 0]) * np.ones(len(sweep_freq))
        spectrum = (np.asarray(sweep_freq), ns.total[0, sweep], ns.en[0, sweep],
                    ns.in_[0, sweep] * design.source.rs, floor)
    scalar = {k: float(x[0]) for k, x in out.items()}
    return Noise(en=scalar["en"], in_=scalar["in_"], en_total=scalar["en_total"], nf_db=scalar["nf_db"],
                 rs_opt=scalar["rs_opt"], nf_min_db=scalar["nf_min_db"], vn_in_rms=scalar["vn_in_rms"],
                 snr_db=scalar["snr_db"], band=(scalar["band_low"], scalar["band_high"]),
                 contributors=shares, spectrum=spectrum)


def _shares(names: tuple, power: np.ndarray) -> tuple:
    """((name, share), …) of ``power``, largest first; none when the total
    is 0 or unbounded."""
    total = power.sum()
    order = np.argsort(-power, kind="stable")
    return tuple((names[k], float(power[k] / total)) for k in order if 0 < total < math.inf and power[k] > 0)
