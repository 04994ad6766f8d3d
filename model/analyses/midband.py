"""Midband small-signal figures from the linearised nodal solution.

Midband: coupling and bypass capacitors are short circuits, load and device
capacitances are open.  Each figure is the whole linearised circuit's
response to a test current, so no topology formula is assumed: the circuit
without its source is factored once, and removing the load or the bias
divider, or putting the source resistance back, are low-rank corrections
(see :class:`model.circuit.linearised.Factored`).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from model.circuit.linearised import Factored
from model.circuit.newton import OperatingPoint
from model.circuit.topologies import BIAS, LOAD, SOURCE, TRANSISTOR, StageCircuit


@dataclass(frozen=True)
class DeviceSmallSignal:
    """Hybrid-π parameters at the operating point, from the model's derivatives.

    gm = ∂IC/∂VBE and 1/rπ = ∂IB/∂VBE at constant VCE; 1/ro = ∂IC/∂VCE at
    constant VBE; β_ac = gm·rπ.  Units: S, Ω, Ω, dimensionless.
    """

    gm: np.ndarray
    r_pi: np.ndarray
    ro: np.ndarray
    beta_ac: np.ndarray


def device_small_signal(op: OperatingPoint, name: str = TRANSISTOR) -> DeviceSmallSignal:
    """The hybrid-π parameters of transistor ``name`` (the gain transistor by default)."""
    st = op.states[name]
    # With VCE held, a change in VBE moves VBC by the same amount.
    gm = st.dic_dvbe + st.dic_dvbc
    g_pi = st.dib_dvbe + st.dib_dvbc
    # A junction deep in cut-off has derivatives near the smallest float.
    with np.errstate(divide="ignore", over="ignore", invalid="ignore"):
        return DeviceSmallSignal(gm=gm, r_pi=1.0 / g_pi, ro=-1.0 / st.dic_dvbc, beta_ac=gm / g_pi)


@dataclass(frozen=True)
class Midband:
    """Midband gains (V/V) and resistances (Ω); see README "Figures"."""

    av_open: np.ndarray
    av_loaded: np.ndarray
    av_source: np.ndarray
    rin: np.ndarray
    rin_base: np.ndarray
    rout: np.ndarray


def midband_figures(stage: StageCircuit, op: OperatingPoint, rs: np.ndarray) -> Midband:
    """Midband figures of a built stage at its operating point.

    ``rs`` is the source resistance (Ω) used to divide the source EMF.
    """
    net = stage.net
    base = Factored(net.without(SOURCE), op)
    # Driving the input terminal with a test current: rin and the terminal gain.
    loaded = base.response(stage.input)
    unloaded = base.changed(net, LOAD, remove=True).response(stage.input)
    # Looking into the transistor alone (its base, or a common base's
    # emitter): the bias resistors that shunt it and the source removed.
    at_base = base.changed(net, BIAS, remove=True).response(stage.device_input)
    # Looking back into the output: EMF at zero with rs in place, load removed.
    back = base.changed(net, LOAD, remove=True).changed(net, SOURCE, remove=False).response(stage.output)
    rin = loaded(stage.input)
    av_loaded = loaded(stage.output) / rin
    with np.errstate(divide="ignore", invalid="ignore"):
        av_source = av_loaded * rin / (rin + rs)
        av_open = unloaded(stage.output) / unloaded(stage.input)
    return Midband(
        av_open=av_open,
        av_loaded=av_loaded,
        av_source=av_source,
        rin=rin,
        rin_base=at_base(stage.device_input),
        rout=back(stage.output),
    )


def decibels(gain) -> np.ndarray:
    """20·log10|gain|, −inf for a zero gain."""
    with np.errstate(divide="ignore"):
        return 20.0 * np.log10(np.abs(gain))
