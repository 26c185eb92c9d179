"""What the oscillator's op-amp drives at the target frequency, vectorised over the
search's rows: the frequency and gain networks, and (without a buffer) the output
stage and the load. Admittances in S; the search bounds the op-amp's output current
and dissipation with them, as verification counts them (partpick.circuits.periphery)."""

from __future__ import annotations

import math

import numpy as np

from partpick.circuits import periphery

__all__ = ["KIND", "net_admittance", "osc_admittance"]

KIND = {k: i for i, k in enumerate(periphery.STAGE_KINDS)}   # a stage kind's index in STAGE_KINDS


def net_admittance(f_hz: float, vals: np.ndarray, r_fb: np.ndarray, r_gnd: float) -> np.ndarray:
    """What the oscillator op-amp drives of the frequency network (rows of Rs, Cs, Rp,
    Cp: ohm, F) and the gain network (Rf per row, Rg: ohm) at f_hz (complex, S)."""
    w = 2 * math.pi * f_hz
    z_arm = (vals[:, 0] + 1 / (1j * w * vals[:, 1])) + 1 / (1 / vals[:, 2] + 1j * w * vals[:, 3])
    return 1 / z_arm + 1 / (r_fb + r_gnd)


def osc_admittance(y: np.ndarray, kinds, ra, rb, y_load: complex) -> np.ndarray:
    """Magnitude of what the oscillator op-amp drives, S: the networks (y,
    :func:`net_admittance`) and, without a buffer, the stage (Ra, Rb: ohm) and the load
    (y_load, S; kinds: index of each row's stage kind in periphery.STAGE_KINDS)."""
    extra = np.zeros(y.shape, complex)      # (a buffer's stage and load: on the buffer)
    kinds, ra, rb = (np.broadcast_to(x, y.shape) for x in (kinds, ra, rb))
    with np.errstate(invalid="ignore", divide="ignore"):
        # complex: a capacitive load behind the attenuator's shunt leg can carry most
        # of the current (100 nF at 50 kHz is 32 ohm)
        extra[kinds == KIND["none"]] = y_load
        at = kinds == KIND["attenuator"]
        extra[at] = 1 / (ra[at] + 1 / (1 / rb[at] + y_load))
        at = kinds == KIND["buffered-attenuator"]
        extra[at] = 1 / (ra[at] + rb[at]) + 0j
    return np.abs(y + extra)
