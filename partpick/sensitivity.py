"""What moves the frequency that the catalog's figures do not pin down, judged against
the spec's frequency tolerance: the capacitance across the amplitude control's element
(its junction charge is a fit to typical curves) and the capacitance at an op-amp input
that a frequency-setting capacitor shares (the op-amp's own input capacitance and the
board's, which the physics leaves out). Either becomes a caution where it could move
the frequency by more than a quarter of the tolerance."""

from __future__ import annotations

import math
from dataclasses import dataclass

from partpick import units
from partpick.circuits import Circuit, input_cap_shift
from partpick.spec import Spec

__all__ = ["CAP_UNCERTAINTY", "NODE_CAP_F", "CAUTION_SHARE", "CapSensitivity", "capacitance_sensitivity",
           "limiter_capacitance", "input_capacitance"]

# How far a catalog's junction charge may be off, as a fraction of the capacitance the
# control's element presents at its working amplitude: datasheets give typical capacitance
# curves at best (no limits), the SPICE law is a fit, and plausible parameter sets for one
# class of part differ by about this much (our assumption: common practice, no published source).
CAP_UNCERTAINTY = 0.5
# The capacitance at an op-amp input beside a frequency-setting capacitor that the physics
# leaves out, F: the op-amp's common-mode input capacitance (a few pF for general-purpose
# parts, from memory; its datasheet gives it) and the pad and trace of the node (1 to 2 pF:
# common practice, no published source)
NODE_CAP_F = 5e-12
# the share of the frequency tolerance a movement of either may take before a caution says so
CAUTION_SHARE = 0.25


@dataclass(frozen=True, slots=True)
class CapSensitivity:
    """How the settled frequency depends on the capacitance across the amplitude
    control's element: hz_per_pf (Hz per pF added), frac_per_pf (the same relative to
    the frequency, 1/pF), cap_eff_f (F, the capacitance the element presents to the
    fundamental at its working amplitude, Re(Q1 / V1)), movement_frac (the relative
    frequency change CAP_UNCERTAINTY of cap_eff_f would cause)."""

    hz_per_pf: float
    frac_per_pf: float
    cap_eff_f: float
    movement_frac: float


def capacitance_sensitivity(p) -> CapSensitivity | None:
    """The frequency's sensitivity to capacitance across the control's element at the
    operating point ``p`` (a :class:`partpick.verify.OperatingPoint`, from its harmonic
    balance: :attr:`partpick.physics.harmonic.BalanceResult.freq_per_cap_hz_f`); None when
    no harmonic balance solved it."""
    if not (p.method == "harmonic balance" and math.isfinite(p.freq_per_cap_hz_f)):
        return None
    hz_per_pf = p.freq_per_cap_hz_f * 1e-12
    frac = hz_per_pf / p.freq_hz
    return CapSensitivity(hz_per_pf, frac, p.cap_eff_f, abs(frac) * CAP_UNCERTAINTY * p.cap_eff_f * 1e12)


def limiter_capacitance(spec: Spec, p) -> tuple[float, str, str | None] | None:
    """(Hz per pF, the note of check's information row, a caution or None) on the
    capacitance across the control's element at operating point ``p``: a caution when
    the frequency its uncertainty could move exceeds a quarter of the frequency
    tolerance; None without a harmonic balance."""
    sens = capacitance_sensitivity(p)
    if sens is None:
        return None
    quarter = spec.frequency.tolerance_frac * CAUTION_SHARE
    cap_pf = sens.cap_eff_f * 1e12
    note = (f"{sens.frac_per_pf * 100:+.3g} %/pF; {cap_pf:.3g} pF at its amplitude, +/-{CAP_UNCERTAINTY:.0%} of "
            f"it moves f by +/-{sens.movement_frac * 100:.3g} % (a quarter of the tolerance: {quarter * 100:.3g} %)")
    if sens.movement_frac <= quarter:
        return sens.hz_per_pf, note, None
    tol_pct = spec.frequency.tolerance_frac * 100
    return sens.hz_per_pf, note, (
        f"the limiter's capacitance sets the frequency: {sens.hz_per_pf:+.3g} Hz per pF, and an error of "
        f"{CAP_UNCERTAINTY:.0%} in the {cap_pf:.3g} pF it presents would move the frequency by "
        f"{sens.movement_frac * 100:.3g} %, more than a quarter of the {tol_pct:.3g} % tolerance: check the "
        "catalog's junction capacitance (CJO, VJ, M, TT) against the part's datasheet or a measurement")


def input_capacitance(spec: Spec, c: Circuit) -> str | None:
    """A caution where NODE_CAP_F at the op-amp input that a frequency-setting capacitor
    shares (:func:`partpick.circuits.input_cap_shift`) would move the textbook frequency
    by more than a quarter of the frequency tolerance; None elsewhere, and for a
    topology whose op-amp inputs sit at virtual grounds."""
    shifted = input_cap_shift(c, NODE_CAP_F)
    if shifted is None or abs(shifted[1]) <= spec.frequency.tolerance_frac * CAUTION_SHARE:
        return None
    role, shift = shifted
    value = units.format_quantity(c.value(role), "capacitance")
    return (f"the op-amp input beside {role} ({value}) carries capacitance partpick does not model: "
            f"{NODE_CAP_F * 1e12:.0f} pF there (the op-amp's input capacitance and the board's) moves the frequency "
            f"by {shift * 100:+.2f} %, more than a quarter of the {spec.frequency.tolerance_frac * 100:.3g} % "
            "tolerance: choose larger frequency-setting capacitors (smaller resistors), or trim the built board")
