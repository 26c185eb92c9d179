"""What the oscillator's op-amp drives at the target frequency, vectorised over the
search's rows: the frequency and gain networks, and (without a buffer) the output
stage and the load. Admittances in S; the search bounds the op-amp's output current
and dissipation with them, as verification counts them (partpick.circuits.periphery)."""

from __future__ import annotations

import math

import numpy as np

from partpick.circuits import periphery
from partpick.physics.opamp import class_b_loss, power_factor

__all__ = ["KIND", "BUFFERED", "net_admittance", "osc_admittance", "within_drive"]

KIND = {k: i for i, k in enumerate(periphery.STAGE_KINDS)}   # a stage kind's index in STAGE_KINDS
BUFFERED = [KIND[k] for k in periphery.BUFFERED]              # the buffered stage kinds' indices


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


def within_drive(f_hz: float, vals: np.ndarray, r_fb: np.ndarray, r_gnd: float, kinds, ra, rb, vo: np.ndarray,
                 load: np.ndarray, y_load: complex, op: dict, current_share: float, span_v: float) -> np.ndarray:
    """Which rows keep the op-amps' output currents and the hottest package's power
    within their limits, as verification counts them: the oscillator drives its networks
    (vals, r_fb, r_gnd as in :func:`net_admittance`) and, without a buffer, the stage
    and the load (:func:`osc_admittance`); the buffer channel the load and a gain stage's
    own feedback divider (periphery.stage_load_admittance). vo, load: peak output and
    load voltages at each temperature (V, rows in columns); op: the op-amp figures per
    row (current, A; iq, A; channels; limit_w, W); current_share: the share of the
    current limit allowed; span_v: the supply span at its highest (V)."""
    buffered = np.isin(kinds, BUFFERED)
    vmax, lmax = vo.max(axis=0), load.max(axis=0)
    i_osc = vmax * osc_admittance(net_admittance(f_hz, vals, r_fb, r_gnd), kinds, ra, rb, y_load)
    with np.errstate(invalid="ignore", divide="ignore"):
        y_stage = y_load + np.where(kinds == KIND["gain"], 1 / (ra + rb), 0.0)
        i_load = np.where(buffered, lmax * np.abs(y_stage), 0.0)
        ilim = current_share * op["current"]
        # the hottest package: every channel's quiescent power, and the output stages of the
        # channels in use (one per package when a buffer needs a second channel the package lacks)
        osc_w = class_b_loss(span_v / 2, vmax, i_osc)
        buf_w = np.where(buffered, class_b_loss(span_v / 2, lmax, i_load, power_factor(y_stage)), 0.0)
        watts = span_v * op["iq"] * op["channels"] + np.where(op["channels"] >= 1 + buffered, osc_w + buf_w,
                                                              np.maximum(osc_w, buf_w))
        return (i_osc <= ilim) & (i_load <= ilim) & (watts <= op["limit_w"])
