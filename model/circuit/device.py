"""Ebers–Moll transport model of a bipolar transistor, with the forward Early
effect and the usual temperature scaling, evaluated on numpy arrays.

Every array has a leading batch axis (a single design is a batch of one).
Voltages and currents here are in the device's *forward sense*: for a PNP the
caller passes VEB and VCB and gets back the currents flowing out of the base
and collector, so one set of equations serves both polarities.

Sources: the transport form and the Early factor follow Jaeger & Blalock,
*Microelectronic Circuit Design*, ch. 5, and the Gummel–Poon convention; the
temperature laws follow Getreu, *Modeling the Bipolar Transistor* (1976).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

#: Exact SI 2019 defining constants (SI Brochure, 9th edition).
BOLTZMANN = 1.380649e-23  # J/K
ELEMENTARY_CHARGE = 1.602176634e-19  # C
ZERO_CELSIUS = 273.15  # K
#: Temperature at which the transistor parameters are given, 25 °C.
T_NOMINAL = ZERO_CELSIUS + 25.0  # K

#: Above this many VT a junction's exponential continues as a straight line.
#: Only wild Newton iterates get there; any real operating point is far below.
_EXP_LIMIT = 80.0
_EXP_AT_LIMIT = float(np.exp(_EXP_LIMIT))


def thermal_voltage(kelvin):
    """kT/q in volts for a temperature in kelvin (scalar or array)."""
    return BOLTZMANN * np.asarray(kelvin, dtype=float) / ELEMENTARY_CHARGE


@dataclass(frozen=True)
class DeviceParams:
    """Transistor parameters at the simulation temperature, one entry per batch row.

    Attributes
    ----------
    i_s : array, A — transport saturation current at temperature
    beta_f, beta_r : array — forward and reverse current gain at temperature
    va : array, V — forward Early voltage
    vt : array, V — thermal voltage kT/q
    sign : array — +1 for NPN, -1 for PNP
    """

    i_s: np.ndarray
    beta_f: np.ndarray
    beta_r: np.ndarray
    va: np.ndarray
    vt: np.ndarray
    sign: np.ndarray

    def map(self, fn) -> "DeviceParams":
        """The same parameters with ``fn`` applied to each array (a slice, a
        transpose, a repeat): the one place that lists the fields."""
        return DeviceParams(*(fn(getattr(self, f)) for f in PARAM_FIELDS))

    def repeat(self, n: int) -> "DeviceParams":
        """Each row repeated n times in a row (for sweeping one design)."""
        return self.map(lambda a: np.repeat(a, n))

    def take(self, index) -> "DeviceParams":
        """The rows picked by an integer or boolean index array."""
        return self.map(lambda a: a[index])


#: The fields of DeviceParams, in order.
PARAM_FIELDS = ("i_s", "beta_f", "beta_r", "va", "vt", "sign")


def params_at(
    *, i_s, beta_f, beta_r, va, polarity_sign, celsius, xti=3.0, eg=1.11, xtb=1.5
) -> DeviceParams:
    """Scale parameters given at 25 °C to the temperature ``celsius``.

    IS(T) = IS(T0)(T/T0)^XTI exp[(EG/VT(T))(T/T0 − 1)] and
    βF(T) = βF(T0)(T/T0)^XTB (Getreu 1976).  βR is left unscaled.

    Parameters
    ----------
    i_s : A at 25 °C;  va : V;  eg : eV;  celsius : °C.
    """
    kelvin = ZERO_CELSIUS + np.asarray(celsius, dtype=float)
    ratio = kelvin / T_NOMINAL
    vt = thermal_voltage(kelvin)
    arrays = np.broadcast_arrays(
        *(np.asarray(a, dtype=float) for a in (i_s, beta_f, beta_r, va, polarity_sign, xti, eg, xtb)),
        vt,
        ratio,
    )
    i_s, beta_f, beta_r, va, sign, xti, eg, xtb, vt, ratio = (np.atleast_1d(a).copy() for a in arrays)
    # EG is in eV, so EG/VT(T) with VT in volts is the dimensionless exponent.
    i_s_t = i_s * ratio**xti * np.exp((eg / vt) * (ratio - 1.0))
    beta_t = beta_f * ratio**xtb
    return DeviceParams(i_s=i_s_t, beta_f=beta_t, beta_r=beta_r, va=va, vt=vt, sign=sign)


def _exp_limited(x):
    """exp(x), continued linearly above _EXP_LIMIT; returns (value, derivative)."""
    slope = np.exp(np.minimum(x, _EXP_LIMIT))
    return slope * (1.0 + np.maximum(x - _EXP_LIMIT, 0.0)), slope


@dataclass(frozen=True)
class JunctionState:
    """Terminal currents and their partial derivatives at (VBE, VBC), forward sense.

    ic, ib in A; the four conductances in S are ∂IC/∂VBE, ∂IC/∂VBC,
    ∂IB/∂VBE and ∂IB/∂VBC.
    """

    ic: np.ndarray
    ib: np.ndarray
    dic_dvbe: np.ndarray
    dic_dvbc: np.ndarray
    dib_dvbe: np.ndarray
    dib_dvbc: np.ndarray


def evaluate(p: DeviceParams, vbe, vbc) -> JunctionState:
    """Ebers–Moll transport currents with the forward Early effect.

    IF = IS(e^{VBE/VT} − 1), IR = IS(e^{VBC/VT} − 1),
    IC = (IF − IR)(1 − VBC/VA) − IR/βR,  IB = IF/βF + IR/βR.
    """
    # Both junctions in one exp call: on small batches numpy's per-call cost
    # dominates.  Stacked on a new first axis, so each junction's half is
    # contiguous; shared subexpressions are formed once (same rounding).
    vt = p.vt
    if np.shape(vbe) != np.shape(vt) or np.shape(vbc) != np.shape(vt):
        vbe, vbc, _ = np.broadcast_arrays(vbe, vbc, vt)
    both = np.stack([vbe, vbc])
    e, de = _exp_limited(both / vt)
    i_f, i_r = p.i_s * (e - 1.0)
    gf, gr = p.i_s * de / vt  # dIF/dVBE, dIR/dVBC
    early = 1.0 - vbc / p.va
    net = i_f - i_r
    ir_r, gr_r = i_r / p.beta_r, gr / p.beta_r
    return JunctionState(
        ic=net * early - ir_r,
        ib=i_f / p.beta_f + ir_r,
        dic_dvbe=gf * early,
        dic_dvbc=-gr * early - net / p.va - gr_r,
        dib_dvbe=gf / p.beta_f,
        dib_dvbc=gr_r,
    )


def limit_junction(v_new, v_old, vt, v_crit):
    """Limit a Newton step of junction voltages (volts, forward sense).

    The logarithmic damping of junction voltages published by L. W. Nagel (1975):
    above the critical voltage ``v_crit``, a step of more than 2·VT is
    replaced by one whose exponential grows only linearly.  This is what keeps
    Newton from overflowing on a junction that starts far from its final
    bias.  Returns (limited voltages, which entries were limited).
    """
    big_step = (v_new > v_crit) & (np.abs(v_new - v_old) > 2.0 * vt)
    if not big_step.any():
        return v_new, big_step
    arg = 1.0 + (v_new - v_old) / vt
    limited_on = np.where(arg > 0.0, v_old + vt * np.log(np.maximum(arg, 1e-300)), v_crit)
    limited_off = vt * np.log(np.maximum(v_new / vt, 1e-300))
    limited = np.where(v_old > 0.0, limited_on, limited_off)
    return np.where(big_step, limited, v_new), big_step


def critical_voltage(p: DeviceParams):
    """The junction voltage (V) where the diode current's curvature turns sharp."""
    # As a difference of logs, with IS no smaller than the least normal float:
    # a cold junction's scaled IS can underflow (1e-30 A at -200 °C with a
    # large EG), and VT/IS would then overflow.
    return p.vt * (np.log(p.vt / np.sqrt(2.0)) - np.log(np.maximum(p.i_s, np.finfo(float).tiny)))
