"""The coverage oracle's output stages and single-supply bias: none, follower, gain
(1 + Rb/Ra), attenuator (Ra in series, Rb to the reference, the load across Rb) and,
where partpick has it, the buffered attenuator (the divider, then a follower), each
with a sweep of its ratio around what the amplitude needs; the bias divider and the
coupling capacitor of a single supply from the allowed families.
"""

from __future__ import annotations

import math
from dataclasses import replace


from oracle_model import (CURRENT_TEXTBOOK, SLEW_TEXTBOOK, SWING_SHARE, Design, Problem, nearest_values, sigma,
                          values_of)

__all__ = ["bias_parts", "coupling_gain", "stage_options", "with_stage", "GAIN_MAX"]

GAIN_MAX = 20.0     # the largest output-stage gain offered


# Rg (down to 1 kohm) and the stage's lower resistor return to mid-rail: its decoupling
# must be a small fraction of them at f, or the gain and the stage ratio move (a 400 ohm
# mid-rail at f put load amplitudes 13..40 % off in ngspice; oracle version 3).
BIAS_REACTANCE_OHM = 20.0


def bias_parts(p: Problem) -> tuple | None:
    """Single supply: the mid-rail divider (two equal resistors near 47 kohm from the
    cheapest allowed family), its decoupling capacitor (at most BIAS_REACTANCE_OHM at f,
    else the largest allowed) and the output coupling capacitor (corner a twentieth of f
    into the load), each the cheapest allowed value that reaches it with the supply's
    voltage; None when no allowed capacitor takes the supply (common practice, no
    published source)."""
    if not p.single:
        return ()
    rfam = min(p.rfams, key=lambda f: (f.price_unit, f.tolerance_frac))
    rb = nearest_values(values_of(rfam), 47e3)[0]
    r_load = p.spec.load.resistance_ohm if math.isfinite(p.spec.load.resistance_ohm) else 1e7
    out = [("bias_top", rfam.id, rb), ("bias_bottom", rfam.id, rb)]
    for role, need in (("bias_c", 1 / (2 * math.pi * p.f_hz * BIAS_REACTANCE_OHM)),
                       ("coupling_c", 20 / (2 * math.pi * p.f_hz * r_load))):
        rated = [(c.unit_price(v), c.id, v) for c in p.cfams for v in c.values() if c.voltage_v >= p.spec.supply.max_v]
        if not rated:
            return None
        opts = [o for o in rated if o[2] >= need]
        _, cid, v = min(opts) if opts else max(rated, key=lambda o: o[2])
        out.append((role, cid, v))
    return tuple(out)


def coupling_gain(p: Problem, bias: tuple) -> float:
    """|load / (load + coupling capacitor)| at the target frequency (1 on a dual supply)."""
    if not p.single:
        return 1.0
    c = dict((role, v) for role, _, v in bias)["coupling_c"]
    zl = 1.0 / p.load_y
    return abs(zl / (zl + 1 / (2j * math.pi * p.f_hz * c)))


def stage_options(p: Problem, k_need: float) -> list[tuple[str, str, float, float, float, float]]:
    """Output stages whose ratio (load amplitude over oscillator amplitude, with the
    load) is near k_need: (kind, family, Ra, Rb, ratio, ratio spread). Ratios from the
    two series values around the ideal at a few resistor levels."""
    out = []
    zl = 1.0 / p.load_y if abs(p.load_y) > 0 else math.inf
    for fam in {min(p.rfams, key=lambda f: (f.price_unit, f.tolerance_frac)),
                min(p.rfams, key=lambda f: (f.tolerance_frac, f.price_unit))}:
        vals = values_of(fam)
        s = sigma(fam)
        if "none" in p.stages:
            out.append(("none", "", 0.0, 0.0, 1.0, 0.0))
        if "follower" in p.stages:
            out.append(("follower", "", 0.0, 0.0, 1.0, 0.0))
        if 1.005 < k_need < GAIN_MAX and "gain" in p.stages:
            for ra in nearest_values(vals, 10e3):
                for rb in nearest_values(vals, ra * (k_need - 1), 2):
                    kk = 1 + rb / ra
                    out.append(("gain", fam.id, ra, rb, kk, (kk - 1) / kk * math.sqrt(2) * s))
        if k_need < 0.995:
            for kind in ("attenuator", "buffered-attenuator"):
                if kind not in p.stages:
                    continue
                for level in (100.0, 1e3, 10e3):
                    for rb in nearest_values(vals, level):
                        shunt = rb if kind != "attenuator" or math.isinf(abs(zl)) else rb * zl / (rb + zl)
                        ra_ideal = abs(shunt) * (1 / k_need - 1)
                        for ra in nearest_values(vals, max(ra_ideal, vals[0]), 2):
                            kk = abs(shunt / (ra + shunt))
                            out.append((kind, fam.id, ra, rb, kk, (1 - kk) * math.sqrt(2) * s))
    return list(dict.fromkeys(out))


def with_stage(p: Problem, d: Design, bias: tuple, stage) -> Design | None:
    """``d`` with output ``stage`` and its amplitude margin and currents estimated; None
    when the stage cannot drive the load."""
    kind, fam, ra, rb, kk, s_k = stage
    op = p.catalog.find("opamps", d.opamp)
    coup = coupling_gain(p, bias)
    target = p.spec.amplitude.peak_v
    err = d.get("ln_vo") + math.log(kk * coup / target)
    tol = p.spec.amplitude.tolerance_frac
    tol_ln = min(math.log1p(tol), -math.log1p(-tol))
    s = math.hypot(d.get("s_amp"), s_k)
    half_t = d.get("half_t")
    m_a = (tol_ln - abs(err) - max(half_t, math.hypot(p.z * s, 0.6 * half_t))) / tol_ln
    a_max = d.get("vo_max") * kk * coup
    y = abs(p.load_y)
    i_osc = d.get("i_osc")
    if kind == "none":
        i_osc += d.get("vo_max") * y
    elif kind == "attenuator":
        i_osc += d.get("vo_max") / (ra + (rb if y == 0 else abs(1 / (1 / rb + p.load_y))))
    elif kind == "buffered-attenuator":
        i_osc += d.get("vo_max") / (ra + rb)
    if i_osc > p.i_max(op):
        return None
    i_buf = 0.0
    if kind in ("follower", "gain", "buffered-attenuator"):
        i_buf = a_max * (y + (1 / (ra + rb) if kind == "gain" else 0.0))
        if i_buf > p.i_max(op) or a_max > SWING_SHARE * p.swing_v(op):
            return None
    # the op-amp's current and slew headroom against textbook practice
    buffered = kind in ("follower", "gain", "buffered-attenuator")
    i_total = max(i_osc, i_buf if buffered else 0.0)
    m_i = 1 - i_total / (CURRENT_TEXTBOOK * p.i_max(op))
    slew = 2 * math.pi * p.f_hz * max(d.get("vo_max"), a_max if buffered else 0.0)
    m_sl = 1 - slew / (SLEW_TEXTBOOK * op.slew_v_per_s)
    est = dict(d.est, m_a=m_a, m_i=min(m_i, m_sl), stage_ratio=kk, coupling=coup)
    return replace(d, stage=kind, sfam=fam, ra=ra, rb=rb, est=est)
