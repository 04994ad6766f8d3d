"""Noise of a built stage, from the same linearised nodal network as its
frequency response.

The sources, each a current (or, for rb, a voltage) density at the
operating point and the ambient temperature T:

* thermal (Johnson–Nyquist) noise 4kT/R (A²/Hz) across every resistor,
  the source's own rs included (Johnson 1928, Nyquist 1928);
* shot noise 2q·IB from base to emitter and 2q·IC from collector to
  emitter of each transistor's hybrid-π model, and flicker noise
  KF·IB^AF/f on the base current (Gray, Hurst, Lewis & Meyer, *Analysis
  and Design of Analog Integrated Circuits*, ch. 11);
* the thermal noise 4kT·rb (V²/Hz) of the base spreading resistance, as a
  voltage in series with the base lead.  rb is a noise parameter only: the
  signal network has no rb, as the rest of the engine has none.  A voltage v
  in series with the base raises both of the transistor's junction voltages
  by v, so it acts as the currents the transistor and its Cπ, Cμ would then
  draw, injected with the opposite sign: one source spread over three nodes.

Every source sees the network without the signal source (vs and rs).  One
adjoint solve per frequency, Aᵀ·y = e, for e picking the output node and
the input node, gives every source's transfer to both at once (an adjoint
network: Director & Rohrer, 1969; Vlach & Singhal, *Computer Methods for
Circuit Analysis and Design*, from memory), batched over frequencies.  From
them each source k becomes the exact two-port pair (en_k, in_k) at the input
terminal, fully correlated: its input-referred voltage with a source
resistance Rs is en_k + in_k·Rs (Motchenbacher & Connelly, *Low-Noise
Electronic System Design*, ch. 2; Rothe & Dahlke, 1956).  Summed in power
over the sources they give the stage's en and in, and with the source's
own 4kT·Rs the total input-referred density and the noise figure.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from model.circuit.assembly import terminal_conductance
from model.circuit.dense import solve_batched
from model.circuit.device import BOLTZMANN, ELEMENTARY_CHARGE, ZERO_CELSIUS
from model.circuit.linearised import FrequencySweep
from model.circuit.netlist import Bjt, Capacitor, Netlist, Resistor
from model.circuit.newton import OperatingPoint
from model.circuit.topologies import SOURCE, StageCircuit

#: The contributor name of the source's own resistance.
SOURCE_THERMAL = "rs thermal"


@dataclass(frozen=True)
class TransistorNoise:
    """Noise parameters shared by every transistor of a stage: rb (Ω), the
    flicker coefficient kf (A^(2−af)) and exponent af; each a number or one
    per batch row."""

    rb: float | np.ndarray = 0.0
    kf: float | np.ndarray = 0.0
    af: float | np.ndarray = 1.0


@dataclass(frozen=True)
class NoiseSpectrum:
    """Every source's input-referred pair at each frequency of ``freq`` (Hz).

    ``en_k`` (V/√Hz) and ``in_k`` (A/√Hz), complex (batch, sources, freq):
    source k's input-referred voltage with a source resistance Rs is
    en_k + in_k·Rs.  ``names`` labels the sources; ``rs`` (Ω) and
    ``temperature`` (K) are per row; ``gain`` (batch, freq) the EMF-to-load
    transfer with rs in place (V/V).
    """

    freq: np.ndarray
    names: tuple
    en_k: np.ndarray
    in_k: np.ndarray
    rs: np.ndarray
    temperature: np.ndarray
    gain: np.ndarray

    @property
    def source_thermal(self) -> np.ndarray:
        """4kT·rs (V²/Hz), (batch, 1): the source resistance's own noise."""
        return (4.0 * BOLTZMANN * self.temperature * self.rs)[:, None]

    def referred(self, rs=None) -> np.ndarray:
        """|en_k + in_k·Rs|² (V²/Hz), (batch, sources, freq), at Rs = ``rs``
        (Ω per row; the design's by default)."""
        r = self.rs if rs is None else np.asarray(rs, dtype=float)
        return np.abs(self.en_k + self.in_k * r[:, None, None]) ** 2

    @property
    def en(self) -> np.ndarray:
        """The stage's input noise voltage density en (V/√Hz), (batch, freq)."""
        return np.sqrt(np.sum(np.abs(self.en_k) ** 2, axis=1))

    @property
    def in_(self) -> np.ndarray:
        """The stage's input noise current density in (A/√Hz), (batch, freq)."""
        return np.sqrt(np.sum(np.abs(self.in_k) ** 2, axis=1))

    @property
    def correlation(self) -> np.ndarray:
        """Re Σ en_k·conj(in_k) (V·A/Hz): the part of en and in that moves together."""
        return np.real(np.sum(self.en_k * np.conj(self.in_k), axis=1))

    @property
    def total(self) -> np.ndarray:
        """The total input-referred density (V/√Hz) with the design's rs,
        its own thermal noise included, (batch, freq)."""
        return np.sqrt(np.sum(self.referred(), axis=1) + self.source_thermal)

    @property
    def output(self) -> np.ndarray:
        """The load's noise density (V/√Hz), (batch, freq)."""
        return self.total * np.abs(self.gain)

    def noise_figure_db(self) -> np.ndarray:
        """10·log10 of total over source-alone noise power (dB); inf at rs = 0."""
        with np.errstate(divide="ignore", invalid="ignore"):
            return 10.0 * np.log10(self.total ** 2 / self.source_thermal)

    def optimum(self) -> tuple[np.ndarray, np.ndarray]:
        """(rs_opt = en/in (Ω), the noise figure there (dB)) per row and
        frequency.  With F(Rs) = 1 + (en² + 2·c·Rs + in²·Rs²)/(4kT·Rs), c the
        correlation, the minimum lies at Rs = en/in whatever c is, where
        F = 1 + (2·en·in + 2c)/(4kT)."""
        en, i_n = self.en, self.in_
        four_kt = 4.0 * BOLTZMANN * self.temperature[:, None]
        with np.errstate(divide="ignore", invalid="ignore"):
            return en / i_n, 10.0 * np.log10(1.0 + (2.0 * en * i_n + 2.0 * self.correlation) / four_kt)


def noise_spectrum(stage: StageCircuit, op: OperatingPoint, freq, *, rs, celsius,
                   transistor: TransistorNoise = TransistorNoise(), quiet: tuple = ()) -> NoiseSpectrum:
    """The noise of a built stage (with its device capacitances, see
    :mod:`model.analyses.capacitance`) at its operating point ``op``.

    ``freq`` (Hz, > 0) is one grid (F,) for every row or one per row
    (batch, F); ``rs`` (Ω) and ``celsius`` (°C) one value per row.  ``quiet`` names resistors made noiseless (for
    checks against formulas that leave them out).  One adjoint solve of
    the sourceless network per frequency; the sources are then products.
    """
    net = stage.net.without(SOURCE)
    sweep = FrequencySweep(net, op)
    plan, batch, n = sweep.plan, net.batch, sweep.plan.n
    freq = np.asarray(freq, dtype=float)
    freq = np.broadcast_to(freq if freq.ndim == 2 else freq.reshape(1, -1), (batch, freq.shape[-1]))
    omega = 2.0 * np.pi * freq
    a = sweep.a_g + 1j * omega[:, :, None, None] * sweep.a_c  # (batch, F, n, n)
    out_i, in_i = plan.index[stage.output], plan.index[stage.input]
    pick = np.zeros((n, 2))
    # A terminal that is a known node (held by a rail) moves with nothing:
    # its column stays 0, so the figures read as unbounded, not as noise.
    if out_i >= 0:
        pick[out_i, 0] = 1.0
    if in_i >= 0:
        pick[in_i, 1] = 1.0
    nf = freq.shape[1]
    y = solve_batched(np.swapaxes(a, -1, -2).reshape(-1, n, n),
                      np.broadcast_to(pick, (batch * nf, n, 2)).astype(complex))
    y = y.reshape(batch, nf, n, 2)
    names, vectors, densities = _sources(net, op, plan, omega, np.asarray(celsius, float), transistor, quiet, freq)
    # Transfers to the output and to the input node of each source, and of
    # a test current into the input node itself (Zoi, Zii).
    z_out = np.einsum("bfn,bfnk->bkf", y[..., 0], vectors)
    v_in = np.einsum("bfn,bfnk->bkf", y[..., 1], vectors)
    into = y[:, :, in_i, :] if in_i >= 0 else np.zeros((batch, nf, 2), dtype=complex)
    z_oi, z_ii = into[:, None, :, 0], into[:, None, :, 1]
    amplitude = np.sqrt(densities)
    # A stage that passes nothing from its input (z_oi → 0) has unbounded
    # input-referred noise: inf, not a warning.
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        in_k = z_out / z_oi * amplitude
        en_k = (z_out * z_ii / z_oi - v_in) * amplitude
        rs = np.broadcast_to(np.asarray(rs, dtype=float), (batch,))
        gain = (z_oi / (z_ii + rs[:, None, None]))[:, 0]
    kelvin = np.broadcast_to(ZERO_CELSIUS + np.asarray(celsius, float), (batch,))
    return NoiseSpectrum(freq[0] if batch == 1 else freq, names, en_k, in_k, np.array(rs), np.array(kelvin), gain)


def _sources(net: Netlist, op: OperatingPoint, plan, omega, celsius, transistor: TransistorNoise, quiet, freq):
    """(names, injection vectors (batch, F, n, K) per unit source, densities
    (batch, K, F)): every resistor's thermal current, then each transistor's
    rb voltage, base shot, collector shot and flicker currents."""
    batch, n, nf = net.batch, plan.n, freq.shape[-1]
    freq = np.broadcast_to(freq, (batch, nf))
    omega = np.broadcast_to(omega, (batch, nf))
    kelvin = np.broadcast_to(ZERO_CELSIUS + celsius, (batch,))
    rb, kf, af = (np.broadcast_to(np.asarray(x, dtype=float), (batch,))
                  for x in (transistor.rb, transistor.kf, transistor.af))
    names, vectors, densities = [], [], []

    def unit(*pairs):
        """A current entering the network at the nodes of ``pairs`` (node, share)."""
        v = np.zeros((batch, nf, n), dtype=complex)
        for node, share in pairs:
            i = plan.index.get(node, -1)
            if i >= 0:
                v[..., i] += share
        return v

    for r in net.of_type(Resistor):
        if r.name in quiet:
            continue
        names.append(f"{r.name} thermal")
        vectors.append(unit((r.a, 1.0), (r.b, -1.0)))
        densities.append(np.broadcast_to((4.0 * BOLTZMANN * kelvin / r.r)[:, None], (batch, nf)))
    bjts = net.of_type(Bjt)
    conductance = terminal_conductance([op.states[q.name] for q in bjts]) if bjts else None
    caps = {c.name: c for c in net.of_type(Capacitor)}
    for k, q in enumerate(bjts):
        st = op.states[q.name]
        ib, ic = np.abs(st.ib), np.abs(st.ic)
        suffix = "" if k == 0 else str(k + 1)
        c_pi = caps[f"cpi{suffix}"].c if f"cpi{suffix}" in caps else np.zeros(batch)
        c_mu = caps[f"cmu{suffix}"].c if f"cmu{suffix}" in caps else np.zeros(batch)
        if (rb > 0).any():
            # The extra currents into (c, b, e) that a base voltage v draws:
            # the conductance's base column, and Cμ, Cπ charged by v.
            g_b = conductance[:, 3 * k: 3 * k + 3, 3 * k + 1]
            jw = 1j * omega
            draw_c = g_b[:, 0, None] - jw * c_mu[:, None]
            draw_b = g_b[:, 1, None] + jw * (c_pi + c_mu)[:, None]
            draw_e = g_b[:, 2, None] - jw * c_pi[:, None]
            v = np.zeros((batch, nf, n), dtype=complex)
            for node, draw in ((q.c, draw_c), (q.b, draw_b), (q.e, draw_e)):
                i = plan.index.get(node, -1)
                if i >= 0:
                    v[..., i] -= draw
            names.append(f"{q.name} rb")
            vectors.append(v)
            densities.append(np.broadcast_to((4.0 * BOLTZMANN * kelvin * rb)[:, None], (batch, nf)))
        names.append(f"{q.name} base shot")
        vectors.append(unit((q.b, 1.0), (q.e, -1.0)))
        densities.append(np.broadcast_to((2.0 * ELEMENTARY_CHARGE * ib)[:, None], (batch, nf)))
        names.append(f"{q.name} collector shot")
        vectors.append(unit((q.c, 1.0), (q.e, -1.0)))
        densities.append(np.broadcast_to((2.0 * ELEMENTARY_CHARGE * ic)[:, None], (batch, nf)))
        if (kf > 0).any():
            names.append(f"{q.name} 1/f")
            vectors.append(unit((q.b, 1.0), (q.e, -1.0)))
            densities.append(kf[:, None] * ib[:, None] ** af[:, None] / freq)
    stacked = np.stack(vectors, axis=-1) if vectors else np.zeros((batch, nf, n, 0), dtype=complex)
    return tuple(names), stacked, np.stack(densities, axis=1) if densities else np.zeros((batch, 0, nf))


#: Points of the log grid a noise band is integrated on, whatever its
#: width: one count for every row of a batch (24 a decade over ten decades).
BAND_POINTS = 241


def integrate(freq: np.ndarray, density2: np.ndarray) -> np.ndarray:
    """∫ density² df over a log grid ``freq`` (Hz, (..., F), its ends the
    band's) by the trapezoid rule on ln f (the grid's natural measure:
    df = f·d ln f).  density2 (..., F) in unit²/Hz; returns unit² (...)."""
    return np.trapezoid(density2 * freq, np.log(freq), axis=-1)


def band_grid(f1, f2, points: int = BAND_POINTS) -> np.ndarray:
    """A log grid from f1 to f2 (Hz), both ends included: (points,), or
    (rows, points) for arrays of ends."""
    f1, f2 = np.asarray(f1, dtype=float), np.asarray(f2, dtype=float)
    return np.exp(np.linspace(np.log(f1), np.log(f2), points, axis=-1))
