"""The op-amp, one model for every circuit: open-loop gain A(s), the macro-model the
transient simulator and the SPICE export share, the output swing, and the one rule that
says when the linear model stops holding (swing, slew, current).

Small signal: A(s) = A0 wa / (s + wa) [* w2 / (s + w2)], wa = 2 pi GBW / A0 (dominant
pole, optional second pole), output resistance Ro. Large signal (the macro-model, the
classic two-stage form): a transconductance stage that saturates smoothly at the
slew-rate current, i1 = SR C1 tanh(2 pi GBW vd / SR), into an integrator C1 || R1
(dominant pole at GBW / A0); the integrator node clamped to the rails less the output
headroom by a stiff restoring conductance; an optional second pole; an output stage
whose current saturates smoothly, i = Ilim tanh((vy - vout) / (Ro Ilim)), so the
small-signal output resistance is Ro and the short-circuit current Ilim.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from partpick.catalog import OpAmp
from partpick.physics.rational import Rational

__all__ = ["linear_peak_v", "open_loop_gain", "output_resistance", "MacroParams", "macro_params", "swing_limits", "regime",
           "SLEW_SHARE", "CURRENT_SHARE", "ideal_opamp", "class_b_loss", "power_factor", "loop_figures"]

# The linear model holds while the signal's slew stays under this share of the slew rate
# and the output current under this share of the current limit (beyond them the output
# stage distorts; common practice, no published source).
SLEW_SHARE = 0.2
CURRENT_SHARE = 0.7


def linear_peak_v(op: OpAmp, f_hz: float) -> float:
    """The highest sine peak (V) at f_hz (Hz) the op-amp follows in its linear range:
    the sine's steepest slope 2 pi f Vpk (the full-power bandwidth relation of op-amp
    handbooks) within SLEW_SHARE of the slew rate, the share :func:`regime` counts as
    linear."""
    return SLEW_SHARE * op.slew_v_per_s / (2 * math.pi * f_hz)


def ideal_opamp() -> OpAmp:
    """An op-amp with no limits (1 THz gain-bandwidth, 180 dB, no headroom, 1 mohm
    out), for reference networks on which a control's own behaviour is measured."""
    return OpAmp(id="ideal", description="ideal op-amp", gbw_hz=1e12, a0=1e9, second_pole_hz=None,
                 slew_v_per_s=1e15, supply_min_v=1.0, supply_max_v=1e6, headroom_high_v=0.0, headroom_low_v=0.0,
                 output_current_a=1e3, output_resistance_ohm=1e-3, input_cm_low_v=-1e6, input_cm_high_v=-1e6,
                 rail_to_rail_in=True, rail_to_rail_out=True, channels=4, quiescent_current_a=1e-6, input_bias_a=0.0,
                 gbw_spread_frac=0.0, package="", price_unit=0.0, price_line=0.0)


def output_resistance(op: OpAmp) -> float:
    """Open-loop output resistance, ohm (at least 1 mohm, so an ideal part stays regular)."""
    return max(op.output_resistance_ohm, 1e-3)


def open_loop_gain(op: OpAmp, w_ref: float) -> Rational:
    """Open-loop gain A(p), p = s / w_ref (w_ref in rad/s): A0 wa / (s + wa)
    [* w2 / (s + w2)], wa = 2 pi GBW / A0."""
    a = 2 * math.pi * op.gbw_hz / op.a0 / w_ref
    out = Rational(np.array([op.a0 * a]), np.array([a, 1.0]))
    if op.second_pole_hz is not None:
        b = 2 * math.pi * op.second_pole_hz / w_ref
        out = out * Rational(np.array([b]), np.array([b, 1.0]))
    return out


@dataclass(frozen=True, slots=True)
class MacroParams:
    """Numbers of the op-amp macro-model (see module docstring); SI units."""

    c1_f: float
    gm_s: float
    r1_ohm: float
    imax_a: float
    gclamp_s: float
    head_high_v: float
    head_low_v: float
    ro_ohm: float
    ilim_a: float
    pole2_hz: float | None


def macro_params(op: OpAmp) -> MacroParams:
    """Macro-model values from catalog data: C1 = 1 nF sets the scale; gm = 2 pi GBW C1,
    R1 = A0 / gm, slew current SR C1; the clamp conductance is 100 gm, so clamping acts
    a hundred times faster than the unity-gain frequency."""
    c1 = 1e-9
    gm = 2 * math.pi * op.gbw_hz * c1
    return MacroParams(
        c1_f=c1,
        gm_s=gm,
        r1_ohm=op.a0 / gm,
        imax_a=op.slew_v_per_s * c1,
        gclamp_s=100 * gm,
        head_high_v=op.headroom_high_v,
        head_low_v=op.headroom_low_v,
        ro_ohm=output_resistance(op),
        ilim_a=op.output_current_a,
        pole2_hz=op.second_pole_hz,
    )


def swing_limits(op: OpAmp, rails: tuple[float, float, float]) -> tuple[float, float]:
    """(lowest, highest) output voltage relative to the signal reference, V, for rails
    (positive rail, negative rail, reference) in V: each rail less its headroom."""
    vcc, vee, ref = rails
    return vee + op.headroom_low_v - ref, vcc - op.headroom_high_v - ref


def regime(op: OpAmp, x_min_v: float, x_max_v: float, slew_v_per_s: float, limits: tuple[float, float], *,
           near_v: float = 0.0, iout_peak_a: float | None = None) -> str:
    """Which limit the op-amp's output meets: 'swing' when it comes within near_v (V) of
    a swing limit, else 'slew' when its slew exceeds SLEW_SHARE of the slew rate, else
    'current' when iout_peak_a (A, when given) exceeds CURRENT_SHARE of the current
    limit, else 'limiter' (the linear model holds and the amplitude control sets the
    amplitude). A simulated output settles a little inside the internal clamp (by the
    drop across Ro), hence near_v."""
    lo, hi = limits
    if near_v > 0:
        clipped = x_max_v >= hi - near_v or x_min_v <= lo + near_v
    else:
        clipped = x_max_v > hi or x_min_v < lo
    if clipped:
        return "swing"
    if slew_v_per_s > SLEW_SHARE * op.slew_v_per_s:
        return "slew"
    if iout_peak_a is not None and iout_peak_a > CURRENT_SHARE * op.output_current_a:
        return "current"
    return "limiter"


def class_b_loss(v_rail, v_pk, i_pk, power_factor=1.0):
    """Average output-stage loss, W, for a sine of v_pk (V peak) at i_pk (A peak) from
    rails +/- v_rail (V): what the rails supply, 2 V I / pi, less what the load takes,
    Vpk I cos(phi) / 2 (power_factor = cos(phi), 1 for a resistive load, 0 for a
    capacitive one, which takes nothing and leaves the whole supply power in the stage):
    the class-B result of any power-amplifier text (vectorises over numpy arrays)."""
    return np.maximum(2 * v_rail * i_pk / math.pi - v_pk * i_pk * power_factor / 2, 0.0)


def power_factor(y):
    """cos(phi) of a load of admittance y (S; complex, or an array of them): the share of
    Vpk I / 2 it takes as power (1 for an open load, which takes nothing either way)."""
    if np.ndim(y) == 0:
        return y.real / abs(y) if y else 1.0
    mag = np.abs(y)
    return np.where(mag > 0, np.real(y) / np.where(mag > 0, mag, 1.0), 1.0)


def loop_figures(amps, rails: tuple[float, float, float], probe, wave, rate) -> tuple[str, tuple]:
    """The regime of a settled oscillation's op-amps (the first limit any of them meets,
    :func:`regime`) and the worst of every op-amp's (x min, x max, slew, peak output
    current, rms output current) in V, V/s and A -- the lowest minimum, the largest of
    the rest, since any channel that meets a limit limits the circuit -- for the op-amp
    probes ``amps`` of a loop
    (:class:`partpick.physics.loop.AmpProbe`): probe(name) gives a probe's harmonics,
    wave(harmonics) its samples over one period, rate(harmonics) those of its rate of
    change."""
    reg = "limiter"
    main = None
    for amp in amps:
        x = probe(amp.x)
        x_t = wave(x)
        io_t = wave(probe(amp.iout))
        slew = float(np.max(np.abs(rate(x))))
        io_pk = float(np.max(np.abs(io_t)))
        r = regime(amp.opamp, float(x_t.min()), float(x_t.max()), slew, swing_limits(amp.opamp, rails),
                   iout_peak_a=io_pk)
        if reg == "limiter":
            reg = r
        here = (float(x_t.min()), float(x_t.max()), slew, io_pk, float(np.sqrt(np.mean(io_t ** 2))))
        main = here if main is None else (min(main[0], here[0]), *(max(a, b) for a, b in zip(main[1:], here[1:])))
    return reg, main if main is not None else (0.0, 0.0, 0.0, 0.0, 0.0)
