"""What part-to-part spread does to a JFET amplitude control, build by build, for the
tolerance Monte Carlo (:mod:`partpick.tolerance`): the JFET's VTO and BETA (two to three
times from part to part), the voltage reference, the reference divider and the detector
diode.

The JFET's share is tabulated: the settled oscillation (amplitude, THD) and the startup
margin at rest are computed by the control's physics on a 3 x 3 grid of VTO (min,
nominal, max) and ln BETA (min, nominal, max) at the nominal operating point, and each
build interpolates bilinearly. VTO is drawn from a normal distribution about its
nominal with the wider side of its range at 3 sigma, truncated to the range; BETA the
same in ln BETA (a guaranteed range read as 3 sigma: common practice, no published
source). With an integrator the amplitude is A = V+ + V_drop (the hold's mean equals the
reference), so a build's divider ratio, reference voltage (its tolerance and its tempco
over the build's temperature, each uniform or 3-sigma normal as the catalog says) and
detector forward voltage (3 sigma) move A volt for volt; a compensating diode's
forward-voltage spread (3 sigma, independent of the detector's) moves it back, and the
divider's output reaches V+ through it with the slope dV+/dV_th of the nominal circuit.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from partpick.circuits.base import Circuit, Conditions

__all__ = ["AgcSpread", "spread_model"]

T0_K = 298.15


def _truncated(rng, n: int, centre: float, lo: float, hi: float) -> np.ndarray:
    """n draws of a normal about centre, sigma = the wider side of [lo, hi] over 3,
    truncated to [lo, hi] (redrawn where outside)."""
    sig = max(centre - lo, hi - centre) / 3.0
    if sig <= 0:
        return np.full(n, centre)
    x = rng.normal(centre, sig, n)
    bad = (x < lo) | (x > hi)
    while np.any(bad):
        x[bad] = rng.normal(centre, sig, int(bad.sum()))
        bad = (x < lo) | (x > hi)
    return x


@dataclass(frozen=True, slots=True)
class AgcSpread:
    """The grid and the control's other spreads (see module docstring). vto, lnb: grid
    axes (V, ln A/V^2); ln_amp, thd, ln_m: the grid's values relative to the nominal
    part (ln amplitude, THD, ln(1 + startup margin)); ranges: the JFET's (vto min,
    nominal, max) and (ln beta min, nominal, max); amp_v: the nominal amplitude (V);
    v_plus: (divider upper role, lower role, source voltage V, nominal divider output V,
    dV+ / d(divider output), sigma of the compensating diode's drop V) or None;
    reference: (tolerance, 'uniform' or 'normal', tempco 1/K) or None; vf_sigma_v: the
    detector's forward-voltage sigma (V)."""

    vto: tuple
    lnb: tuple
    ln_amp: np.ndarray
    thd: np.ndarray
    ln_m: np.ndarray
    ranges: tuple
    amp_v: float
    v_plus: tuple | None
    reference: tuple | None
    vf_sigma_v: float

    def draw(self, rng, builds: dict) -> dict:
        """Per build: 'ln_amp' (ln amplitude change), 'thd' (THD), 'ln_margin' (change of
        ln(1 + startup margin)), from the builds' drawn values (role -> array) and
        temperatures (K)."""
        n = builds["t"].size
        (v_lo, v_nom, v_hi), (b_lo, b_nom, b_hi) = self.ranges
        vto = _truncated(rng, n, v_nom, v_lo, v_hi)
        lnb = _truncated(rng, n, b_nom, b_lo, b_hi)
        ln_amp, thd, ln_m = (_bilinear(self.vto, self.lnb, g, vto, lnb) for g in (self.ln_amp, self.thd, self.ln_m))
        if self.v_plus is not None:
            up, low, src, v_th_nom, slope, comp_sigma = self.v_plus
            v = builds["v"]
            ratio = v[low] / (v[up] + v[low])
            if self.reference is not None:
                tol, dist, tc = self.reference
                x = _truncated(rng, n, 0.0, -1.0, 1.0) if dist == "normal" else rng.uniform(-1, 1, n)
                src = src * (1 + tol * x) * (1 + tc * rng.uniform(-1, 1, n) * (builds["t"] - T0_K))
            shift = slope * (src * ratio - v_th_nom) + rng.normal(0, self.vf_sigma_v, n)
            if comp_sigma > 0:
                shift = shift - rng.normal(0, comp_sigma, n)
            amp = np.exp(ln_amp) * self.amp_v + shift
            ln_amp = np.log(np.maximum(amp, 1e-9) / self.amp_v)
        return {"ln_amp": ln_amp, "thd": thd, "ln_margin": ln_m}


def _bilinear(xs, ys, grid: np.ndarray, x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """Bilinear interpolation of grid (len(xs) x len(ys)) at the points (x, y)."""
    xs, ys = np.asarray(xs), np.asarray(ys)
    i = np.clip(np.searchsorted(xs, x) - 1, 0, xs.size - 2)
    j = np.clip(np.searchsorted(ys, y) - 1, 0, ys.size - 2)
    tx = np.clip((x - xs[i]) / (xs[i + 1] - xs[i]), 0, 1)
    ty = np.clip((y - ys[j]) / (ys[j + 1] - ys[j]), 0, 1)
    return ((1 - tx) * (1 - ty) * grid[i, j] + tx * (1 - ty) * grid[i + 1, j] + (1 - tx) * ty * grid[i, j + 1]
            + tx * ty * grid[i + 1, j + 1])


def spread_model(c: Circuit, cond: Conditions) -> AgcSpread | None:
    """The spread model of ``c`` at ``cond`` (see module docstring); None when the
    nominal circuit has no settled oscillation."""
    from partpick.circuits.jfet_agc import has_integrator, reference_source_v, solved, v_plus

    jfet = c.part("jfet")
    vtos = (jfet.vto_min_v, jfet.vto_v, jfet.vto_max_v)
    betas = (jfet.beta_min_a_per_v2, jfet.beta_a_per_v2, jfet.beta_max_a_per_v2)
    base = solved(c, cond)
    if base[2] is None:
        return None
    a0, m0 = base[2].osc_peak_v, math.log1p(base[1].margin)
    shape = (len(vtos), len(betas))
    ln_amp, thd, ln_m = np.zeros(shape), np.zeros(shape), np.zeros(shape)
    for i, vto in enumerate(vtos):
        for j, beta in enumerate(betas):
            cj = Circuit(c.topology, c.control, c.values, c.parts.replace(jfet=jfet.with_parameters(vto, beta)),
                         c.stage, c.supply_kind)
            _, lin, hb, _ = solved(cj, cond)
            ok = hb is not None and hb.holds
            ln_amp[i, j] = math.log(hb.osc_peak_v / a0) if ok else 0.0
            thd[i, j] = hb.osc_thd if ok else 1.0
            ln_m[i, j] = math.log1p(max(lin.margin, -0.999)) - m0
    vp = None
    ref = None
    if has_integrator(c):
        src = reference_source_v(c, cond)
        r1, r2 = c.value("agc_rr1"), c.value("agc_rr2")
        v_th = src * r2 / (r1 + r2)
        slope = (v_plus(c, cond, src * 1.001) - v_plus(c, cond, src * 0.999)) / (0.002 * v_th)
        comp = c.part("comp")
        vp = ("agc_rr1", "agc_rr2", src, v_th, slope, comp.vf_spread_v / 3 if comp is not None else 0.0)
        r = c.part("vref")
        if r is not None:
            ref = (r.tolerance_frac, r.distribution, r.tempco_per_k)
    det = c.part("detector")
    lnb = tuple(math.log(b) for b in betas)
    return AgcSpread(vtos, lnb, ln_amp, thd, ln_m, (vtos, lnb), a0, vp, ref, det.vf_spread_v / 3)
