"""The design problem as the search sees it: targets in logarithms, the statistics of
the requirement (the z of the yield, the temperatures), and the allowed parts screened
for facts that no choice of values can change (an op-amp that cannot take the supply,
a capacitor family whose tolerance alone breaks the frequency yield).

Every screening rule here is a proof that the part cannot serve, never a preference:
what it drops, no design with that part would pass verification. Each drop is kept
with its reason for the why-not message.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from statistics import NormalDist

import numpy as np

from partpick.catalog import Catalog, OpAmp
from partpick.circuits import CONTROLS, TOPOLOGIES, Conditions, linear
from partpick.circuits.options import (
    arm_capacitor_families,
    cap_tempco,
    resistor_families,
    sigma,
)
from partpick.derating import bias_r_max
from partpick.physics.opamp import swing_limits
from partpick.spec import Spec

__all__ = ["Problem", "OpInfo", "build_problem", "NORMAL", "m_sigma", "r_limits"]

NORMAL = NormalDist()
REF_T = 298.15


@dataclass(frozen=True, slots=True)
class OpInfo:
    """An op-amp and what it does to the loop: pull (ln of the marginal over the
    textbook frequency on the topology's reference network), loss (nepers of gain the
    loop loses to it), swing_v (peak output around the reference at the minimum supply),
    slew_v_per_s, current_a (its limit)."""

    opamp: OpAmp
    pull: float
    loss: float
    swing_v: float

    @property
    def id(self) -> str:
        return self.opamp.id


@dataclass(frozen=True, slots=True)
class Problem:
    """One spec's design problem (see module docstring). Frequencies in Hz and ln Hz,
    amplitudes peak V at the load, fractions for tolerances."""

    spec: Spec
    catalog: Catalog
    topology: object
    control: object
    ops: tuple[OpInfo, ...]
    limiters: tuple
    r_families: tuple
    c_families: tuple
    shelf: object | None
    stock: object | None
    ln_f: float
    tol_f: float
    amp_v: float
    tol_a: float
    thd_max: float
    y_min: float
    z: float
    temps_k: tuple[float, float, float]   # min, nominal, max
    thd_aim: float                         # the nominal THD a design may have (derating rule thd_share)
    current_share: float                   # of an op-amp's output current a design may plan for (output_current)
    dropped: tuple[tuple[str, str], ...] = ()
    notes: tuple[str, ...] = field(default=())
    designed: tuple = ()                   # controls with a design hook to search (search/designed.py)
    fallback: bool = False                 # ... only when the limiter's designs are not enough ('auto')
    amp_sigma: float = 0.0                 # spread (ln) of the load amplitude from parts after the
                                           # oscillator's output (a small coupling capacitor)
    load_gain: float = 1.0                 # |V_load / V| of those parts (amp_v is the target before them)
    drive_y: complex | None = None         # what the output stage drives at the target frequency, S
                                           # (None: the load itself)

    @property
    def rails_min(self) -> tuple[float, float, float]:
        return Conditions(self.spec.supply.min_v, REF_T, math.inf).rails(self.spec.supply.kind)

    def freq_sigma(self, rfam, cfam) -> float:
        """Relative standard deviation of the textbook frequency over builds from the
        arm families' tolerances (first-order propagation, JCGM 100: each of the four
        arm parts enters f0 with exponent -1/2)."""
        return 0.5 * math.sqrt(2 * sigma(rfam) ** 2 + 2 * sigma(cfam) ** 2)

    def freq_drift(self, rfam, cfam) -> float:
        """Bound of the relative frequency drift at the temperature end farthest from
        25 degC from the arm parts' tempcos (resistor bound, capacitor nominal and
        spread), a fraction."""
        dt = max(abs(self.temps_k[0] - REF_T), abs(self.temps_k[2] - REF_T))
        c_tc = (cap_tempco(cfam) + abs(cfam.tempco_per_k)) if not cfam.has_band else cap_tempco(cfam)
        return (rfam.tempco_per_k + c_tc) * dt


def _op_info(topo, op: OpAmp, spec: Spec, gain_excess: float) -> OpInfo:
    c = topo.opamp_reference(spec.frequency.target_hz, gain_excess, op)
    lin = linear(c, Conditions(spec.supply.min_v, spec.temperature.nominal_k, math.inf))
    pull = math.log(lin.marginal_hz / c.f0_hz) if math.isfinite(lin.marginal_hz) else -1.0
    loss = math.log(1 + c.ideal_margin) - math.log(max(1 + lin.margin, 1e-6))
    lo, hi = swing_limits(op, Conditions(spec.supply.min_v, REF_T, math.inf).rails(spec.supply.kind))
    return OpInfo(op, pull, loss, min(-lo, hi))


def _drop_opamp(op: OpAmp, spec: Spec, swing: float) -> str | None:
    """Why ``op`` cannot serve this spec whatever the values, or None. The load always
    sees an op-amp output (the oscillator's or the buffer's, the same type), except
    behind a passive attenuator, whose input is larger still: so the load's lower
    amplitude limit must fit the swing."""
    s, a = spec.supply, spec.amplitude
    if op.supply_min_v > s.span_min_v or op.supply_max_v < s.span_max_v:
        return (f"supply range {op.supply_min_v:g}..{op.supply_max_v:g} V does not cover the spec's "
                f"{s.span_min_v:g}..{s.span_max_v:g} V across the rails")
    low = a.peak_v * (1 - a.tolerance_frac)
    if swing < low:
        return f"swings {max(swing, 0):.3g} V peak at the minimum supply; the load needs at least {low:.3g} V peak"
    slew = 2 * math.pi * spec.frequency.target_hz * low
    if slew > op.slew_v_per_s:
        return (f"slew rate {op.slew_v_per_s / 1e6:.3g} V/us is under the {slew / 1e6:.3g} V/us a {low:.3g} V peak "
                f"sine at {spec.frequency.target_hz:g} Hz needs")
    return None


def build_problem(spec: Spec, catalog: Catalog, stock=None) -> Problem:
    """The problem for ``spec``: targets, statistics and the screened parts."""
    topo = TOPOLOGIES[spec.topology]
    ctl = CONTROLS["diode-limiter"]
    # the controls the spec lets the search use: the limiter, searched over its surface,
    # and those that design themselves through a hook; 'auto' tries the hooked ones when
    # the limiter does not give the designs asked (their first design costs seconds)
    hooked = tuple(c for c in CONTROLS.values() if hasattr(c, "search_designs") and c.port in topo.ports
                   and spec.supply.kind in getattr(c, "supplies", (spec.supply.kind,)))
    choice = spec.amplitude_control
    designed = () if choice == "diode" else hooked if choice == "auto" else (CONTROLS[choice],)
    dropped: list[tuple[str, str]] = []
    notes: list[str] = []
    shelf = stock if (stock is not None and spec.stock is not None and spec.stock.mode == "only") else None
    ops: list[OpInfo] = []
    for op in catalog.opamps:
        if spec.parts.opamps is not None and op.id not in spec.parts.opamps:
            continue
        if shelf is not None and shelf.quantity(op.id) <= 0:
            dropped.append((op.id, "not on the shelf (stock mode only)"))
            continue
        lo, hi = swing_limits(op, Conditions(spec.supply.min_v, REF_T, math.inf).rails(spec.supply.kind))
        why = _drop_opamp(op, spec, min(-lo, hi))
        if why:
            dropped.append((op.id, why))
            continue
        ops.append(_op_info(topo, op, spec, 0.02))
    lims = []
    for lim in (catalog.limiters if choice in ("auto", "diode") else ()):
        if spec.parts.limiters is not None and lim.id not in spec.parts.limiters:
            continue
        if shelf is not None and shelf.quantity(lim.id) <= 0:
            dropped.append((lim.id, "not on the shelf (stock mode only)"))
            continue
        lims.append(lim)
    rfams = tuple(resistor_families(spec, catalog))
    cfams = tuple(arm_capacitor_families(spec, catalog))
    t = spec.temperature
    y = spec.yield_min_frac
    z = NORMAL.inv_cdf(0.5 + 0.5 * min(max(y, 0.5), 0.9999))
    return Problem(spec, catalog, topo, ctl, tuple(ops), tuple(lims), rfams, cfams, shelf, stock,
                   math.log(spec.frequency.target_hz), spec.frequency.tolerance_frac, spec.amplitude.peak_v,
                   spec.amplitude.tolerance_frac, spec.max_thd_frac, y, z, (t.min_k, t.nominal_k, t.max_k),
                   spec.derating.thd_share * spec.max_thd_frac, spec.derating.output_current, tuple(dropped),
                   tuple(notes), designed, choice == "auto")


def m_sigma(problem: Problem, gf, gain: np.ndarray, sigma_lnk, loss, gbw_spread) -> np.ndarray:
    """Standard deviation of the gain excess over builds (nepers): the gain network's
    ratio (two resistors of the family, each with the topology's sensitivity of ln gain),
    the arms' required gain, the op-amp's gain-bandwidth spread acting on its loss
    (nepers; spread a fraction, 3 sigma), and the two gain resistors drifting apart over
    temperature (uniform)."""
    sens = problem.topology.gain_sensitivity(gain)
    s_g = sens * math.sqrt(2) * sigma(gf)
    s_op = np.asarray(loss) * np.asarray(gbw_spread) / 3
    dt = max(abs(problem.temps_k[0] - REF_T), abs(problem.temps_k[2] - REF_T))
    s_t = sens * 2 * gf.tempco_per_k * dt / math.sqrt(3)
    return np.sqrt(s_g ** 2 + np.asarray(sigma_lnk) ** 2 + s_op ** 2 + s_t ** 2)


def r_limits(op, derating) -> tuple[float, float]:
    """Arm resistors the op-amp tolerates, ohm: above 20 times its output resistance
    (a planning rule of the search: the loop analysis judges the loading), and up to
    the value at which its bias current drops the derating rule bias_drop, which check
    judges (:func:`partpick.derating.bias_r_max`)."""
    return max(20 * op.output_resistance_ohm, 1.0), bias_r_max(op, derating)
