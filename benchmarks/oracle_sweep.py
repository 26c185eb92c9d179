"""The coverage oracle's sweep: every allowed op-amp, near-equal Wien arms from the
allowed families' standard values, Rg at 10, 3.3 and 1 kohm with a sweep of Rf over
gain excesses of 0.2..25 %, every allowed limiter behind no Rd or a sweep of Rd from
100 ohm to 100 kohm, every output stage with a sweep of its ratio; ranked by the
oracle's own textbook estimates (benchmarks/oracle_physics.py). Shares no code with
partpick's search or the circuit plug-ins' search hooks; partpick supplies only the
catalog and spec records and each family's IEC 60063 values (``partpick.series``).

Pruning is only what is physically impossible for any circuit of this shape: an op-amp
whose supply range excludes the spec's supply, whose swing at the minimum supply, slew
rate or output current cannot give the smallest amplitude the load accepts, or whose
gain-bandwidth is below the frequency times the Wien network's gain of about 3 (the
oracle builds near-equal arms only).
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np

from oracle_model import (SWING_SHARE, Arms, Design, Problem, base_score, nearest_values, prices_of, sigma,
                          values_of)
from oracle_physics import (f0_hz, harmonic_ratio, limiter_curve, loop_solution, oscillation, pair_small_signal,
                            required_gain)
from oracle_stage import bias_parts, coupling_gain, stage_options, with_stage

__all__ = ["sweep", "arms_for", "retune_arms", "rf_for_excess", "with_arms", "RD_LEVELS"]


# Rg around 10 kohm, and lower: the pair's current at a given gain excess grows as Rg
# falls, and with it its forward voltage, so its amplitude drifts less with temperature.
RG_LEVELS = (10e3, 3.3e3, 1e3)
RD_LEVELS = (100.0, 220.0, 470.0, 1e3, 2.2e3, 4.7e3, 10e3, 22e3, 47e3, 100e3)
EXCESS = (0.002, 0.25)      # the swept range of the ideal gain excess (1 + Rf/Rg)/G - 1
ARMS_PER_OPAMP = 8
CAP_LIMIT = 0.3             # largest w Rd C of the pair the memoryless estimate is used for
KEEP = 1200                 # gain-network candidates kept for the stage sweep
KEEP_STAGED = 800           # staged candidates offered on every arm set of their op-amp


# -- frequency: the arms ---------------------------------------------------------------------------

def _arm_sets(p: Problem, rfam, cfam, f_text: float, cap_max_v: float):
    """Every near-equal arm set of one family pair around textbook frequency f_text:
    each capacitor value in range with Cp the same or a neighbour, Rs and Rp each one
    of the two series values around R = 1/(2 pi f sqrt(Cs Cp))."""
    if cfam.voltage_v < cap_max_v:
        return None
    caps = values_of(cfam)
    rvals = values_of(rfam)
    if len(caps) < 1 or len(rvals) < 2:
        return None
    cs = np.concatenate([caps, caps[1:], caps[:-1]])
    cp = np.concatenate([caps, caps[:-1], caps[1:]])
    r = 1.0 / (2 * math.pi * f_text * np.sqrt(cs * cp))
    inside = (r >= rvals[0]) & (r <= rvals[-1])
    cs, cp, r = cs[inside], cp[inside], r[inside]
    if len(r) == 0:
        return None
    k = np.clip(np.searchsorted(rvals, r), 1, len(rvals) - 1)
    lo, hi = rvals[k - 1], rvals[k]
    out = []
    for rs in (lo, hi):
        for rp in (lo, hi):
            out.append((rs, cs, rp, cp))
    rs = np.concatenate([o[0] for o in out])
    cs = np.concatenate([o[1] for o in out])
    rp = np.concatenate([o[2] for o in out])
    cp = np.concatenate([o[3] for o in out])
    return rs, cs, rp, cp


def _frequency_margin(p: Problem, rfam, cfam, err, rho_spread: float) -> np.ndarray:
    """Estimated frequency margin, as a share of the tolerance: bias, the parts' spread
    at the yield's z (first-order propagation, JCGM 100) and the worst temperature drift."""
    tol = p.spec.frequency.tolerance_frac
    s = 0.5 * math.sqrt(2 * sigma(rfam) ** 2 + 2 * sigma(cfam) ** 2)
    s = math.hypot(s, rho_spread)
    tn, tmin, tmax = p.temps
    dt = max(tn - tmin, tmax - tn)
    if cfam.has_band:
        c_drift = cfam.band_frac * min(1.0, dt / max(0.5 * (cfam.band_max_k - cfam.band_min_k), 1.0))
    else:
        c_drift = (abs(cfam.tempco_per_k) + cfam.tempco_spread_per_k) * dt
    drift = 0.5 * (2 * rfam.tempco_per_k * dt + 2 * c_drift)
    need = np.abs(err) + max(drift, math.hypot(p.z * s, 0.6 * drift))
    return (tol - need) / tol


def arms_for(p: Problem, op, rho: float, f_need: float | None = None, n: int = ARMS_PER_OPAMP) -> list[Arms]:
    """The best near-equal arm sets for op-amp ``op`` whose pull is rho (f_osc / f0):
    the best per family pair first, then the best of what is left, one per decade of R."""
    f_need = f_need or p.f_hz
    f_text = f_need / rho
    rho_spread = abs(math.log(rho)) * op.gbw_spread_frac / 3
    scored = []
    for rfam in p.rfams:
        for cfam in p.cfams:
            sets = _arm_sets(p, rfam, cfam, f_text, p.spec.supply.span_max_v if p.single else p.spec.supply.max_v)
            if sets is None:
                continue
            rs, cs, rp, cp = sets
            ok = np.maximum(rs, rp) <= p.r_max(op)    # the bias-drop rule check judges
            if not ok.any():
                continue
            rs, cs, rp, cp = rs[ok], cs[ok], rp[ok], cp[ok]
            err = f0_hz(rs, cs, rp, cp) * rho / p.f_hz - 1
            m = _frequency_margin(p, rfam, cfam, err, rho_spread)
            caps, prices = values_of(cfam), prices_of(cfam)
            cost = 2 * rfam.price_unit + prices[np.searchsorted(caps, cs)] + prices[np.searchsorted(caps, cp)]
            # one per decade of R and family pair: the best margin, then the cheaper
            dec = np.floor(np.log10(np.sqrt(rs * rp)) * 2)
            order = np.lexsort((cost, -np.round(m, 2)))
            seen = set()
            for i in order:
                key = (rfam.id, cfam.id, dec[i])
                if key in seen:
                    continue
                seen.add(key)
                scored.append((float(m[i]), float(cost[i]), Arms(rfam.id, cfam.id, float(rs[i]), float(cs[i]),
                                                                 float(rp[i]), float(cp[i]))))
    scored.sort(key=lambda t: (-round(t[0], 2), t[1]))
    out, pairs = [], set()
    for _, _, a in scored:          # the best of each family pair first
        if (a.rfam, a.cfam) not in pairs:
            pairs.add((a.rfam, a.cfam))
            out.append(a)
    out = out[: max(2, n // 2)]
    for _, _, a in scored:
        if len(out) >= n:
            break
        if a not in out:
            out.append(a)
    return out


def retune_arms(p: Problem, arms: Arms, f_text: float) -> Arms:
    """The arm set of the same families nearest textbook frequency f_text (Hz) with the
    needed gain nearest the old one's: every series value within a step or two of each
    old value."""
    rfam = p.catalog.find("resistors", arms.rfam)
    cfam = p.catalog.find("capacitors", arms.cfam)
    rvals, cvals = values_of(rfam), values_of(cfam)
    scale = arms.f0 / f_text            # how much the RC product must grow

    def around(vals, x, want):
        i = int(np.argmin(np.abs(np.log(vals / (x * want)))))
        return vals[max(i - 2, 0): i + 3]
    best, best_key = arms, math.inf
    g_old = arms.gain
    s = math.sqrt(scale)
    for cs in around(cvals, arms.cs, 1.0):
        for cp in around(cvals, arms.cp, 1.0):
            need_rr = arms.rs * arms.rp * arms.cs * arms.cp * scale ** 2 / (cs * cp)
            for rs in around(rvals, arms.rs, s * math.sqrt(need_rr / (arms.rs * arms.rp * scale))):
                for rp in around(rvals, arms.rp, s * math.sqrt(need_rr / (arms.rs * arms.rp * scale))):
                    f = float(f0_hz(rs, cs, rp, cp))
                    g = float(required_gain(rs, cs, rp, cp))
                    key = abs(math.log(f / f_text)) + 0.05 * abs(math.log(g / g_old))
                    if key < best_key:
                        best, best_key = Arms(arms.rfam, arms.cfam, float(rs), float(cs), float(rp), float(cp)), key
    return best


def rf_for_excess(p: Problem, gfam_id: str, rg: float, gain: float, excess: float) -> float:
    """The series value of Rf nearest the ideal excess: (1 + Rf/Rg) = (1 + excess) G."""
    vals = values_of(p.catalog.find("resistors", gfam_id))
    return nearest_values(vals, max(((1 + excess) * gain - 1) * rg, vals[0]))[0]


# -- amplitude, THD, startup: the gain network and the limiter --------------------------------------

def _gain_families(p: Problem) -> list:
    """The tightest and the cheapest allowed resistor families (one when they agree)."""
    tight = min(p.rfams, key=lambda f: (f.tolerance_frac, f.price_unit))
    cheap = min(p.rfams, key=lambda f: (f.price_unit, f.tolerance_frac))
    return [tight] if tight.id == cheap.id else [tight, cheap]


def _rd_values(p: Problem):
    fam = min(p.rfams, key=lambda f: (f.price_unit, f.tolerance_frac))
    vals = values_of(fam)
    rds = sorted({v for x in RD_LEVELS for v in nearest_values(vals, x) if fam.min_ohm <= v <= fam.max_ohm})
    return fam, [0.0] + rds


def _block(p: Problem, op, arms: Arms, rho: float, m_f_arms: float, gfam, lim, rdfam, rd: float):
    """Estimates for one (op-amp, arms, gain family, limiter, Rd) over the Rf sweep:
    the Designs whose oscillator the op-amp can physically run."""
    sp = p.spec
    g = arms.gain
    vals = values_of(gfam)
    rgs, rfs = [], []
    for level in RG_LEVELS:
        rg1 = nearest_values(vals, level)[0]
        rf1 = vals[(vals >= rg1 * (g * (1 + EXCESS[0]) - 1)) & (vals <= rg1 * (g * (1 + EXCESS[1]) - 1))]
        rgs.append(np.full(len(rf1), rg1))
        rfs.append(rf1)
    rg, rf = np.concatenate(rgs), np.concatenate(rfs)
    if len(rf) == 0:
        return []
    # the small-signal loop with the op-amp and the pair's capacitance: frequency and margin
    g0, c0 = pair_small_signal(lim)
    rho_f, margin = loop_solution(op, arms.rs, arms.cs, arms.rp, arms.cp, rg, rf, rd, c0, g0)
    # the limiter brings the gain down by the margin: an ideal gain k, a branch conductance
    k = (1 + rf / rg) / (1 + margin)
    geff = 1.0 / ((k - 1) * rg) - 1.0 / rf
    tn, tmin, tmax = p.temps
    curves = [limiter_curve(lim, rd, t) for t in (tn, tmin, tmax)]
    ab = np.array([c.amplitude(geff) for c in curves])          # branch amplitude per temperature
    vo = ab * k / (k - 1)
    dv = lim.vf_spread_v
    ab_sp = np.array([limiter_curve(lim, rd, tn, s).amplitude(geff) for s in (dv, -dv)])
    valid = (np.all(np.isfinite(ab), axis=0) & np.all(np.isfinite(ab_sp), axis=0) & (geff > 0) & (margin > 0)
             & np.isfinite(rho_f))
    if not np.any(valid):
        return []
    w = 2 * math.pi * p.f_hz
    thd = np.max([harmonic_ratio(c, a, arms.rs, arms.cs, arms.rp, arms.cp, rg, rf, w) for c, a in zip(curves, ab)],
                 axis=0)
    s_vf = np.abs(np.log(ab_sp[0] / ab_sp[1])) / 6
    # amplitude sensitivity to the gain network: d ln A / d ln Geff, times Geff's spread
    up, dn = curves[0].amplitude(geff * 1.02), curves[0].amplitude(geff / 1.02)
    slope = np.abs(np.log(up / dn)) / (2 * math.log(1.02))
    rfam = p.catalog.find("resistors", arms.rfam)
    cfam = p.catalog.find("capacitors", arms.cfam)
    s_g = math.sqrt((arms.rs / arms.rp) ** 2 * 2 * sigma(rfam) ** 2 + (arms.cp / arms.cs) ** 2 * 2 * sigma(cfam) ** 2) / g
    s_gf = sigma(gfam)
    dgeff = np.sqrt((s_gf / ((k - 1) * rg)) ** 2 + (s_gf / rf) ** 2 + (s_g * k / ((k - 1) ** 2 * rg)) ** 2)
    s_amp = np.hypot(s_vf, slope * dgeff / np.maximum(geff, 1e-15))
    ln_vo = np.log(vo)
    half_t = (ln_vo.max(axis=0) - ln_vo.min(axis=0)) / 2
    center = (ln_vo.max(axis=0) + ln_vo.min(axis=0)) / 2
    tol = sp.amplitude.tolerance_frac
    tol_ln = min(math.log1p(tol), -math.log1p(-tol))
    m_a = (tol_ln - np.maximum(half_t, np.hypot(p.z * s_amp, 0.6 * half_t))) / tol_ln
    # startup: the small-signal margin against the spread of the gain ratios and of GBW
    s_e = np.hypot(rf / (rg + rf) * math.sqrt(2) * s_gf, s_g)
    s_e = np.hypot(s_e, np.abs(np.log(rho_f)) * op.gbw_spread_frac / 3)
    # frequency: the arms will be retuned to this estimate; a third of its pull is doubt
    m_f = m_f_arms - 0.3 * np.abs(np.log(rho_f / rho)) / sp.frequency.tolerance_frac
    # what the op-amp must do for the oscillator itself
    vo_max = np.exp(ln_vo.max(axis=0) + 3 * s_vf)
    y_net = abs(1.0 / (arms.rs + 1 / (1j * w * arms.cs) + arms.rp / (1 + 1j * w * arms.rp * arms.cp)))
    i_osc = vo_max * (y_net + 1.0 / (rg + rf))
    vin = vo_max / g
    if p.single:
        half = sp.supply.span_min_v / 2
        cm_ok = (half - op.input_cm_high_v - vin >= 0) & (half - vin - op.input_cm_low_v >= 0)
    else:
        v = sp.supply.min_v
        cm_ok = (v - op.input_cm_high_v - vin >= 0) & (v - vin - op.input_cm_low_v >= 0)
    phys = (vo_max <= SWING_SHARE * p.swing_v(op)) & (w * vo_max <= op.slew_v_per_s) & (i_osc <= p.i_max(op))
    # where Rd and the pair's capacitance have a time constant near the period, the
    # capacitance carries the branch current and the describing function of the
    # memoryless pair says nothing: such a limiter does not limit as a textbook one
    resistive = w * rd * c0 < CAP_LIMIT
    keep = valid & phys & cm_ok & resistive
    out = []
    for i in np.nonzero(keep)[0]:
        est = {"rho": float(rho_f[i]), "margin": float(margin[i]), "s_e": float(s_e[i]), "ln_vo": float(center[i]),
               "ln_vo_nom": float(ln_vo[0, i]), "half_t": float(half_t[i]), "s_amp": float(s_amp[i]),
               "vo_max": float(vo_max[i]), "thd": float(thd[i]), "m_f": float(m_f[i]), "m_a0": float(m_a[i]),
               "i_osc": float(i_osc[i]), "z": p.z, "rho_op": rho, "m_f_arms": m_f_arms}
        out.append(Design(op.id, arms, gfam.id, float(rg[i]), float(rf[i]), lim.id, rdfam.id, float(rd), est=est))
    return out


def arms_margin(p: Problem, op, arms: Arms, rho: float) -> float:
    rfam = p.catalog.find("resistors", arms.rfam)
    cfam = p.catalog.find("capacitors", arms.cfam)
    err = arms.f0 * rho / p.f_hz - 1
    return float(_frequency_margin(p, rfam, cfam, np.array([err]), abs(math.log(rho)) * op.gbw_spread_frac / 3)[0])


def with_arms(p: Problem, d: Design, arms: Arms, rho: float, loss: float, m_f: float) -> Design:
    """``d`` on another arm set (the op-amp's pull rho with it), Rf re-chosen to keep
    its ideal gain excess; the other estimates carry over."""
    if arms == d.arms:
        return d
    excess = (1 + d.rf / d.rg) / d.arms.gain - 1
    rf = rf_for_excess(p, d.gfam, d.rg, arms.gain, excess)
    doubt = d.get("m_f") - d.get("m_f_arms", m_f)
    return replace(d, arms=arms, rf=rf, est=dict(d.est, rho=d.get("rho") * rho / d.get("rho_op", rho),
                                                 m_f=m_f + doubt))


def sweep(p: Problem) -> tuple[list[Design], dict]:
    """Every candidate the sweep finds physically possible, best estimate first, and
    notes (op-amps dropped and why, counts). The gain network, limiter and output
    stage are estimated on each op-amp's best arm set, then every candidate is offered
    on each of the op-amp's arm sets (the arms set the frequency; the rest barely
    depends on them)."""
    ops, dropped = p.physical_opamps()
    notes = {"dropped": dropped, "blocks": 0}
    bias = bias_parts(p)
    if bias is None:
        notes["bias"] = "no allowed capacitor reaches the single-supply bias or coupling value"
        return [], notes
    notes["bias_parts"] = bias
    rdfam, rds = _rd_values(p)
    gfams = _gain_families(p)
    pool: list[Design] = []
    arm_sets: dict[str, list] = {}
    for op in ops:
        c_ref = 1 / (2 * math.pi * p.f_hz * 10e3)
        rho0, _ = oscillation(op, 3.0, 10e3, c_ref, 10e3, c_ref)
        sets = []
        for arms in arms_for(p, op, rho0):
            rho, loss = oscillation(op, arms.gain, arms.rs, arms.cs, arms.rp, arms.cp)
            if loss > 0.5:
                sets.append((arms, rho, loss, arms_margin(p, op, arms, rho)))
        if not sets:
            continue
        arm_sets[op.id] = sets
        ref, rho, _, m_f = sets[0]
        for gfam in gfams:
            for lim in p.limiters:
                for rd in rds:
                    notes["blocks"] += 1
                    pool += _block(p, op, ref, rho, m_f, gfam, lim, rdfam, rd)
    max_thd = p.spec.max_thd_frac
    pool.sort(key=lambda d: -base_score(d, 1.0, max_thd))
    staged = []
    options: dict[float, list] = {}
    coup = coupling_gain(p, bias)
    for d in pool[:KEEP]:
        k_need = p.spec.amplitude.peak_v / (math.exp(d.get("ln_vo")) * coup)
        key = round(math.log(k_need), 3)
        if key not in options:
            options[key] = stage_options(p, k_need)
        for st in options[key]:
            s = with_stage(p, d, bias, st)
            if s is not None:
                staged.append(s)
    staged.sort(key=lambda d: -base_score(d, 1.0, max_thd))
    out = [with_arms(p, d, *a) for d in staged[:KEEP_STAGED] for a in arm_sets[d.opamp]]
    out.sort(key=lambda d: -base_score(d, 1.0, max_thd))
    notes["candidates"] = len(out)
    return out, notes
