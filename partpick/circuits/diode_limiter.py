"""The diode limiter: an anti-parallel junction pair (silicon, Schottky, LED) or two
opposed Zeners, optionally behind a series resistor Rd, at the topology's 'feedback'
port. Its conductance grows with the amplitude and brings the loop gain down to one.

The pair's i(v) is the Shockley junction with series resistance and the SPICE
temperature law (:mod:`partpick.physics.junction`); its junction capacitance sits
across the pair, behind Rd. THD rises with the small-signal gain excess the pair must
remove; the amplitude drifts with the forward voltage.
"""

from __future__ import annotations

import dataclasses
import functools
import math

import numpy as np

from partpick.circuits.base import Circuit, Conditions, Slot, Values
from partpick.circuits.options import (AMP_SLOPE_MAX, CtlOption, dt_of, merge_lines, nearest, sigma, slope,
                                       values_of, z_of)
from partpick.physics.envelope import START_V, limiter_settling
from partpick.physics.harmonic import describing_amplitude, harmonic_balance
from partpick.physics.junction import forward_voltage, limiter_table
from partpick.physics.linear import analyse_linear
from partpick.physics.loop import Branch
from partpick.physics.netlist import LimiterX, Resistor

__all__ = ["DiodeLimiter", "CONTROL", "SLOTS", "pair_capacitance"]

SLOTS = (
    Slot("rd", "resistors", "R5", "resistor in series with the limiter", optional=True),
    Slot("limiter", "limiters", "D1,D2", "limiter pair"),
)

# The limiter works near its forward voltage at tens of microamps (its knee).
KNEE_A = 20e-6


def pair_capacitance(lim) -> float:
    """Junction capacitance across the pair, F: two diodes in parallel, or two Zeners
    in series."""
    if lim is None:
        return 0.0
    return 2 * lim.cj_f if lim.kind != "zener-pair" else lim.cj_f / 2


class DiodeLimiter:
    """The diode-limiter amplitude control (see module docstring)."""

    name = "diode-limiter"
    slots = SLOTS
    port = "feedback"
    slow = False        # sets the amplitude within a few cycles of reaching it

    def branch(self, c: Circuit, temp_k: float, cond=None) -> Branch:
        """The pair (tabulated i(v) at temp_k, K) with its capacitance, behind Rd."""
        lim = c.part("limiter")
        rd = c.value("rd")
        table = limiter_table(lim, 0.0, temp_k)
        g0 = float(table.conductance([0.0])[0])
        return Branch(table, rd, pair_capacitance(lim), g0, limiter_table(lim, rd, temp_k))

    def balance(self, c: Circuit, cond, loop, lin, *, kmax: int = 21, start=None):
        """The settled oscillation by harmonic balance with the pair's i(v)
        (:func:`partpick.physics.harmonic.harmonic_balance`)."""
        return harmonic_balance(loop, self.branch(c, cond.temp_k), lin, cond.rails(c.supply_kind), kmax=kmax,
                                start=start)

    def netlist(self, c: Circuit, a: str, b: str, nodes: dict | None = None) -> list:
        """Rd (R5) from a, then the pair (D1) to b; the pair straight across without Rd."""
        els: list = []
        if c.value("rd") > 0:
            els.append(Resistor("R5", a, "dl", c.value("rd")))
            a = "dl"
        lim = c.part("limiter")
        els.append(LimiterX("D1", a, b, lim, pair_capacitance(lim)))
        return els

    def settling(self, c: Circuit, cond, loop, lin, hb, band: tuple[float, float], start_v: float = START_V,
                 clip_v: float = math.inf):
        """The envelope from start_v to the settled amplitude (V at the output; band in
        V there): :func:`partpick.physics.envelope.limiter_settling` with the pair's
        describing function; None when there is no settled oscillation."""
        if hb is None:
            return None
        p = np.array([2j * math.pi * hb.freq_hz / loop.w_ref])
        per = complex(loop.probe("osc", p, np.ones(1), np.full(1, lin.marginal_g_s))[0])
        return limiter_settling(loop, self.branch(c, cond.temp_k), hb.osc_peak_v, per, band, start_v, clip_v)

    def amplitude_spread(self, c: Circuit, temp_k: float, cond=None) -> float:
        """The forward-voltage spread (3 sigma) relative to the forward voltage at the
        knee current, where the limiter works."""
        lim = c.part("limiter")
        if lim.vf_spread_v <= 0:
            return 0.0
        return lim.vf_spread_v / max(forward_voltage(lim, KNEE_A, temp_k), 1e-3)

    # -- search hook ------------------------------------------------------------------------------
    def options(self, topology, spec, rf, lims, ideal, f_hz: float, amp_targets: list[float], m_floor: float,
                shelf=None) -> list[CtlOption]:
        """Gain networks of one resistor family with each allowed limiter: Rg near
        10 kohm, Rf for a ladder of gain excesses (the topology's), Rd = 0 or bracketing
        the target amplitude; each with its surrogate from harmonic balance on the
        topology's reference network (at f, an ideal op-amp)."""
        values = values_of(rf, shelf)
        if not values:
            return []
        rg = nearest(values, 10e3)
        temp = spec.temperature.nominal_k
        cond = Conditions(1e3, temp, math.inf)
        dt = dt_of(spec)
        # the gain ratio: the tolerance spread at the yield's z, and the two drifting apart
        loss_g = z_of(spec) * math.sqrt(2) * sigma(rf) + 2 * rf.tempco_per_k * dt
        out: list[CtlOption] = []
        rfs = topology.gain_ratios(values, rg, m_floor, shelf)
        for lim in lims:
            for rf_v in rfs:
                gv = topology.gain_values(rg, rf_v)
                g = float(topology.gain(gv))
                k_ref = topology.reference_required_gain
                if g <= k_ref:
                    continue
                need = topology.port_conductance_needed(gv)  # what the limiter adds at the nominal point
                rds = [0.0]
                cand = [v for v in values if 0.05 * rf_v <= v <= 20 * rf_v]

                def amp(k: int) -> float:
                    # describing-function amplitude at the output
                    a_vf = describing_amplitude(limiter_table(lim, cand[k], temp), need)
                    return math.inf if a_vf is None else a_vf * topology.osc_per_port(gv)

                for target in amp_targets:
                    lo_k, hi_k = 0, len(cand)  # the amplitude grows with Rd: bisect for the bracket
                    while lo_k < hi_k:
                        mid = (lo_k + hi_k) // 2
                        if amp(mid) < target:
                            lo_k = mid + 1
                        else:
                            hi_k = mid
                    # the bracketing value nearer the target on a log scale
                    near = [k for k in (lo_k - 1, lo_k) if 0 <= k < len(cand)]
                    if near:
                        rds.append(cand[min(near, key=lambda k: abs(math.log(max(amp(k), 1e-12) / target)))])
                for rd in sorted(set(rds)):
                    net = _surrogate(topology, lim, rg, rf_v, rd, f_hz, ideal, cond,
                                     (spec.temperature.min_k, spec.temperature.max_k))
                    if net is None:
                        continue
                    ln_amp, thd, pull, s_amp, s_thd, s_pull, ends = net
                    z = z_of(spec)
                    k_amp = slope(abs(s_amp) * z)
                    sigma_g = (g - 1) / g * math.sqrt(2) * sigma(rf)
                    vf = forward_voltage(lim, KNEE_A, temp)
                    vf_spread = z * lim.vf_spread_v / 3 / max(vf, 1e-3)
                    lines = merge_lines([(rf.id, rg, 1), (rf.id, rf_v, 1)] + ([(rf.id, rd, 1)] if rd else [])
                                        + [(lim.id, 0.0, 1)])
                    vals = {**gv, "rd": rd} if rd else dict(gv)
                    out.append(CtlOption(Values(vals), (("limiter", lim.id),), rf.id, math.log(g), math.log(g / k_ref),
                                         ln_amp, s_amp, thd, s_thd, pull, s_pull, (g - 1) / g * loss_g, lines,
                                         ends[0], ends[1], k_amp, sigma_g, vf_spread))
        return out


def _reference(topology, lim, rg, rf, rd, f_hz, ideal, cond, start=None):
    c = topology.reference(f_hz, topology.gain_values(rg, rf), ideal, CONTROL.name, {"limiter": lim}, {"rd": rd})
    # 11 harmonics to start with: the surrogate needs 1e-3, not the verification's 1e-4
    from partpick.circuits import build_loop

    loop = build_loop(c, cond)
    br = CONTROL.branch(c, cond.temp_k)
    lin = analyse_linear(loop, br)
    hb = None
    if lin.starts and math.isfinite(lin.marginal_g_s):
        hb = harmonic_balance(loop, br, lin, cond.rails(c.supply_kind), start=start, kmax=11)
    return (hb, c) if hb is not None and hb.converged else (None, c)


@functools.lru_cache(maxsize=4096)
def _surrogate(topology, lim, rg, rf, rd, f_hz, ideal, cond, temps):
    """(ln amplitude, THD, pull, their slopes per neper of gain excess, and ln amplitude
    at each temperature of ``temps``) of the reference network, from harmonic-balance
    runs at Rf and at Rf raised by 0.5 % and, for designs not too steep to build, at
    the temperature ends, each warm-started from the first."""
    base, c0 = _reference(topology, lim, rg, rf, rd, f_hz, ideal, cond)
    if base is None:
        return None
    up, c1 = _reference(topology, lim, rg, rf * 1.005, rd, f_hz, ideal, cond, base)
    if up is None:
        return None
    d = math.log(c1.gain / c0.gain)
    a0, a1 = math.log(base.osc_peak_v), math.log(up.osc_peak_v)
    s_amp = slope((a1 - a0) / d)
    if abs(s_amp) > AMP_SLOPE_MAX:
        return None  # amplitude too steep in the gain excess: too fragile to build
    ends = []
    for t in temps:
        hb, _ = _reference(topology, lim, rg, rf, rd, f_hz, ideal, dataclasses.replace(cond, temp_k=t), base)
        if hb is None:
            return None
        ends.append(math.log(hb.osc_peak_v))
    p0, p1 = (math.log(h.freq_hz / c.f0_hz) for h, c in ((base, c0), (up, c1)))
    return (a0, base.osc_thd, p0, s_amp, slope((up.osc_thd - base.osc_thd) / d), slope((p1 - p0) / d),
            tuple(ends))


CONTROL = DiodeLimiter()
