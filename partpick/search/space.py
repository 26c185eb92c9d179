"""The search space: from a spec and the allowed families to the options the plug-ins
offer, and the float surrogate that defines the objective and the constraints.

The topology's hook lists network options (for the Wien bridge the arm sets whose
frequency, with the op-amp's and the control's pull pre-compensated, is within reach),
the amplitude control's hook lists control options (gain network and control parts,
with a surrogate of amplitude, THD and pull from harmonic balance on a reference
network, linearised in the gain excess), the periphery lists output stages; op-amp
choices carry the pull and margin they cost (linear loop analysis on the topology's
reference network) and what they allow (swing, slew, current, impedance bounds).

Everything the solver sees is a *surrogate*: :func:`evaluate` defines it in floats; the
CP-SAT model (:mod:`partpick.search.solver`) encodes the same in integers, and the
exhaustive reference :func:`enumerate_best` uses it too. In the log domain every
constraint is linear. Verification (:mod:`partpick.verify`) then judges the proposals
with the full physics.
"""

from __future__ import annotations

import dataclasses
import itertools
import math
from dataclasses import dataclass, field

import numpy as np

from partpick.catalog import Catalog, OpAmp
from partpick.circuits import CONTROLS, TOPOLOGIES, Conditions, linear, periphery
from partpick.circuits.options import (DM_MAX, CtlOption, NetOption, StageOption, arm_capacitor_families, dt_of,
                                       resistor_families, sigma, z_of)
from partpick.errors import InfeasibleError
from partpick.physics.junction import forward_voltage
from partpick.pricing import Pricer
from partpick.spec import Spec

__all__ = ["OpChoice", "Space", "Pick", "build_space", "evaluate", "enumerate_best", "rank_weights",
           "swing_peak", "BUFFERED", "MARGIN_FLOOR"]

MARGIN_FLOOR = 0.004        # gain excess kept beyond the worst tolerance corner (common practice)
AMP_SHARE = 0.6             # share of the amplitude tolerance the nominal design may use
THD_SHARE = 0.8             # share of the THD limit the nominal design may use
FREQ_SHARE = 0.5            # share of the frequency tolerance the nominal design may use ...
FREQ_AIM = 0.0025           # ... and at most this: the built circuit should land close to the target
REF_T = 298.15
BUFFERED = periphery.BUFFERED
SEARCHED_CONTROL = "diode-limiter"   # the amplitude control the search designs


@dataclass(frozen=True, slots=True)
class OpChoice:
    """An op-amp and what it allows: pull (relative frequency pull from GBW),
    margin_loss (gain excess it costs, nepers), ln_amp_max (ln V: swing at the minimum
    supply and slew), ln_i_max (ln A), ln_r_max / ln_r_min (ln ohm, network bounds)."""

    opamp: str
    pull: float
    margin_loss: float
    ln_amp_max: float
    ln_load_amp_max: float
    ln_i_max: float
    ln_r_max: float
    ln_r_min: float
    lines: tuple
    channels: int = 2


@dataclass(frozen=True, slots=True)
class Space:
    """The whole discrete search space with its targets and objective weights.

    fixed: (role, family, value) of the parts every candidate carries (single-supply
    bias and coupling); fixed_lines: the same as purchasing lines."""

    nets: tuple[NetOption, ...]
    ctls: tuple[CtlOption, ...]
    stages: tuple[StageOption, ...]
    ops: tuple[OpChoice, ...]
    ln_f_target: float
    ln_f_tol: float
    ln_amp_lo: float
    ln_amp_hi: float
    thd_max: float
    ln_margin_floor: float
    weights: tuple[tuple[str, float], ...]
    ln_amp_lo_t: float = -math.inf
    ln_amp_hi_t: float = math.inf
    ln_f_tol_t: float = math.inf
    unit_price: dict = field(default_factory=dict, hash=False, compare=False)
    line_price: dict = field(default_factory=dict, hash=False, compare=False)
    fixed: tuple = ()
    explain: tuple[str, ...] = ()
    capacity: dict = field(default_factory=dict, hash=False, compare=False)  # (family, value) -> parts per board on the shelf
    topology: str = "wien-bridge"
    control: str = SEARCHED_CONTROL

    @property
    def fixed_lines(self) -> tuple:
        """The fixed parts as purchasing lines (family, value, quantity)."""
        return tuple((fam, v, 1) for _, fam, v in self.fixed)


@dataclass(frozen=True, slots=True)
class Pick:
    """One complete choice and its surrogate figures: objective (float), ln_f (ln Hz),
    ln_amp_load (ln V), thd, ln_margin (nepers), cost (currency), parts."""

    net: NetOption
    ctl: CtlOption
    stage: StageOption
    op: OpChoice
    objective: float
    ln_f: float
    ln_amp_load: float
    thd: float
    ln_margin: float
    cost: float
    parts: int

    def key(self) -> tuple:
        return (self.net, self.ctl, self.stage, self.op)


# -- the surrogate, in floats ---------------------------------------------------------------

def _lines_cost(space: Space, items) -> tuple[float, int] | None:
    seen: dict[tuple[str, float], int] = {}
    for item in items:
        for fam, value, qty in item.lines:
            seen[(fam, value)] = seen.get((fam, value), 0) + qty
    for fam, value, qty in space.fixed_lines:
        seen[(fam, value)] = seen.get((fam, value), 0) + qty
    if space.capacity and any(q > space.capacity.get(k, q) for k, q in seen.items()):
        return None
    unit = sum(space.unit_price[k] * q for k, q in seen.items())
    line = sum(space.line_price[k] for k in seen)
    return unit + line, sum(seen.values())


def evaluate(space: Space, a: NetOption, g: CtlOption, s: StageOption, o: OpChoice) -> Pick | None:
    """The surrogate figures and objective of one choice, or None when it breaks a
    constraint. This is the definition both the solver and the exhaustive reference
    enumeration work to."""
    if a.r_family != g.r_family:
        return None
    ln_m = g.ln_g - a.ln_k
    if ln_m < space.ln_margin_floor + a.loss + g.loss + o.margin_loss:
        return None
    dm = ln_m - g.ln1m_ref
    if abs(dm) > DM_MAX:
        return None
    thd = g.thd + g.s_thd * dm
    if thd > space.thd_max or thd < 0:
        return None
    ln_amp = g.ln_amp + g.s_amp * dm
    ln_load = ln_amp + s.ln_gain
    if not space.ln_amp_lo <= ln_load <= space.ln_amp_hi:
        return None
    spread = g.k_amp * (a.sigma_k + g.sigma_g) + g.vf_spread
    for ln_t in (g.ln_amp, g.ln_amp_tmin, g.ln_amp_tmax):
        if not space.ln_amp_lo_t + spread <= ln_t + g.s_amp * dm + s.ln_gain <= space.ln_amp_hi_t - spread:
            return None
    if ln_amp > o.ln_amp_max or ln_load > o.ln_load_amp_max or ln_amp + s.ln_y > o.ln_i_max:
        return None
    if math.log(a.r_max) > o.ln_r_max or math.log(a.r_min) < o.ln_r_min:
        return None
    ln_f = a.ln_f0 + g.pull + g.s_pull * dm + o.pull
    err = abs(ln_f - space.ln_f_target)
    if err > space.ln_f_tol or err + a.drift + a.spread > space.ln_f_tol_t:
        return None
    lc = _lines_cost(space, (a, g, s, o))
    if lc is None:
        return None  # the shelf runs out
    cost, parts = lc
    if s.kind in BUFFERED:
        parts += 1  # the buffer amplifier itself (second channel or its own package)
        if o.channels == 1:
            cost += space.unit_price[(o.opamp, 0.0)]
    metrics = {"frequency_error": err / space.ln_f_tol, "cost": cost, "parts": parts / 10.0,
               "amplitude_error": abs(ln_load - 0.5 * (space.ln_amp_lo + space.ln_amp_hi)) /
               max(space.ln_amp_hi - space.ln_amp_lo, 1e-12), "thd": thd / space.thd_max}
    obj = sum(w * metrics[k] for k, w in space.weights)
    return Pick(a, g, s, o, obj, ln_f, ln_load, thd, ln_m, cost, parts)


def enumerate_best(space: Space, n: int) -> list[Pick]:
    """Exhaustive reference: every combination evaluated in floats, best n first
    (ties broken by the items' order). Only for small spaces (tests)."""
    picks = []
    for a, g, s, o in itertools.product(space.nets, space.ctls, space.stages, space.ops):
        p = evaluate(space, a, g, s, o)
        if p is not None:
            picks.append(p)
    picks.sort(key=lambda p: p.objective)
    return picks[:n]


def rank_weights(rank_by: tuple[str, ...]) -> tuple[tuple[str, float], ...]:
    """Objective weights from the spec's ranking order: each key weighs 1/20 of the one
    before; keys the surrogate cannot judge (yield, startup margin) wait for verification."""
    known = [k for k in rank_by if k in ("frequency_error", "cost", "parts", "amplitude_error", "thd")]
    # the others follow, so that equal costs are settled by accuracy, then by parts,
    # then by how close the amplitude sits to its target (no two choices tie)
    for k in ("frequency_error", "cost", "parts", "amplitude_error"):
        if k not in known:
            known.append(k)
    return tuple((k, 0.05 ** i) for i, k in enumerate(known))


# -- op-amps ------------------------------------------------------------------------------------

def ideal_opamp(like: OpAmp) -> OpAmp:
    """An op-amp with no limits, for the control's own surrogate."""
    return dataclasses.replace(like, id="ideal", gbw_hz=1e12, a0=1e9, second_pole_hz=None, slew_v_per_s=1e15,
                               headroom_high_v=0.0, headroom_low_v=0.0, output_current_a=1e3,
                               output_resistance_ohm=1e-3)


def swing_peak(op: OpAmp, spec: Spec) -> float:
    """Largest peak the op-amp's output reaches around the signal reference at the
    minimum supply, V."""
    vcc, vee, ref = Conditions(spec.supply.min_v, REF_T, math.inf).rails(spec.supply.kind)
    return min(vcc - op.headroom_high_v - ref, ref - vee - op.headroom_low_v)


def drop_opamp(op: OpAmp, spec: Spec) -> str | None:
    """Why ``op`` cannot serve this spec, or None."""
    s, f, a = spec.supply, spec.frequency.target_hz, spec.amplitude
    amp = a.peak_v * (1 + a.tolerance_frac)
    if op.supply_min_v > s.span_min_v or op.supply_max_v < s.span_max_v:
        return (f"supply range {op.supply_min_v:g}..{op.supply_max_v:g} V does not cover the spec's "
                f"{s.span_min_v:g}..{s.span_max_v:g} V across the rails")
    swing = swing_peak(op, spec)
    if swing < amp:
        return (f"swings {max(swing, 0):.3g} V peak at the minimum supply; the load needs {amp:.3g} V peak")
    if 2 * math.pi * f * amp > 0.5 * op.slew_v_per_s:
        return (f"slew rate {op.slew_v_per_s / 1e6:.3g} V/us is under twice the {2 * math.pi * f * amp / 1e6:.3g} V/us "
                f"a {amp:.3g} V peak sine at {f:g} Hz needs")
    if op.gbw_hz < 30 * f:
        return f"gain-bandwidth {op.gbw_hz:.3g} Hz is under 30 times the frequency"
    r_load = spec.load.resistance_ohm
    i_load = amp / r_load + amp * 2 * math.pi * f * spec.load.capacitance_f
    if i_load > 0.6 * op.output_current_a:
        return (f"output current {op.output_current_a * 1e3:.3g} mA: the load draws {i_load * 1e3:.3g} mA peak, "
                f"over 60 % of it")
    if spec.supply.kind == "single":
        vcc, vee, ref = Conditions(s.min_v, REF_T, math.inf).rails("single")
        vin = amp / 2
        if ref + vin > vcc - op.input_cm_high_v or ref - vin < vee + op.input_cm_low_v:
            return "input common-mode range does not reach around mid-rail at the minimum supply"
    return None


def _op_choice(topo, op: OpAmp, spec: Spec, f_hz: float, m_typ: float) -> OpChoice:
    """What one op-amp allows, and the pull and margin it costs (linear loop analysis on
    the topology's reference network at the target frequency)."""
    c = topo.opamp_reference(f_hz, m_typ, op)
    lin = linear(c, Conditions(spec.supply.min_v, spec.temperature.nominal_k, math.inf))
    pull = math.log(lin.marginal_hz / c.f0_hz) if math.isfinite(lin.marginal_hz) else -1.0
    margin_loss = math.log(1 + c.ideal_margin) - math.log(max(1 + lin.margin, 1e-6))
    swing = swing_peak(op, spec)
    slew_amp = 0.2 * op.slew_v_per_s / (2 * math.pi * f_hz)
    load_slew_amp = 0.5 * op.slew_v_per_s / (2 * math.pi * f_hz)
    r_max = min(1e6, 5e-3 / op.input_bias_a) if op.input_bias_a > 0 else 1e6
    return OpChoice(op.id, pull, margin_loss, math.log(0.9 * min(swing, slew_amp)),
                    math.log(0.9 * min(swing, load_slew_amp)), math.log(0.6 * op.output_current_a), math.log(r_max),
                    math.log(max(20 * op.output_resistance_ohm, 1.0)), ((op.id, 0.0, 1),), op.channels)


# -- the space --------------------------------------------------------------------------------------

def build_space(spec: Spec, catalog: Catalog, *, weights: tuple[tuple[str, float], ...] | None = None,
                stock=None) -> Space:
    """The search space for ``spec`` over the catalog families it allows.

    Raises :class:`InfeasibleError` naming the binding requirement when no op-amp or no
    limiter qualifies, or no network option reaches the frequency.
    """
    from partpick.search.explain import no_network_message, no_opamp_message

    topo = TOPOLOGIES[spec.topology]
    ctl = CONTROLS[SEARCHED_CONTROL]
    f = spec.frequency.target_hz
    a = spec.amplitude
    dropped: list[tuple[str, str]] = []
    ops_all = [o for o in catalog.opamps if spec.parts.opamps is None or o.id in spec.parts.opamps]
    ops = []
    for op in ops_all:
        why = drop_opamp(op, spec)
        if why:
            dropped.append((op.id, why))
        else:
            ops.append(op)
    if not ops:
        raise InfeasibleError(no_opamp_message(spec, ops_all, dropped), ("amplitude", "supply", "load"))
    best_swing = max(swing_peak(op, spec) for op in ops)
    lims_all = [l_ for l_ in catalog.limiters if spec.parts.limiters is None or l_.id in spec.parts.limiters]
    lims = []
    for lim in lims_all:
        knee = forward_voltage(lim, 10e-6, spec.temperature.nominal_k)
        if 1.5 * knee > 0.9 * best_swing:
            dropped.append((lim.id, f"limits near {1.5 * knee:.3g} V peak at the op-amp output; the best op-amp "
                                    f"swings {best_swing:.3g} V at the minimum supply"))
        else:
            lims.append(lim)
    dropped.append(("(no limiter)", "the op-amp's clipping would set the amplitude: THD well over 10 %, not "
                                    "searched"))
    if not lims:
        raise InfeasibleError("no limiter element can act inside the op-amp's swing: " +
                              "; ".join(f"{i}: {w}" for i, w in dropped), ("amplitude", "supply"))
    rfams = resistor_families(spec, catalog)
    cfams = arm_capacitor_families(spec, catalog)
    if not rfams or not cfams:
        raise InfeasibleError("the spec allows no resistor or no non-polarised capacitor family for the "
                              "frequency-setting arms", ("parts",))
    ideal = ideal_opamp(ops[0])
    dt = dt_of(spec)
    tol_loss = min(z_of(spec) * 2 * sigma(r) + 2 * r.tempco_per_k * dt for r in rfams)
    m_floor = MARGIN_FLOOR + tol_loss
    kinds = ("none", "follower", "gain", "attenuator") if spec.output_stage == "auto" else (spec.output_stage,)
    op_choices = [_op_choice(topo, op, spec, f, 2 * m_floor) for op in ops]

    ctls: list[CtlOption] = []
    stages: list[StageOption] = []
    only = stock is not None and spec.stock is not None and spec.stock.mode == "only"
    shelf = stock if only else None
    if shelf is not None:
        lims = [x for x in lims if shelf.quantity(x.id) > 0]
        op_choices = [o for o in op_choices if shelf.quantity(o.opamp) > 0]
        if not lims or not op_choices:
            raise InfeasibleError(f"stock.mode only: the shelf ({shelf.source}) holds no qualifying "
                                  f"{'limiter' if not lims else 'op-amp'}", ("stock",))
    for rfam in rfams:
        ctls += ctl.options(topo, spec, rfam, lims, ideal, f, [a.peak_v], m_floor, shelf)
        stages += periphery.stage_options(spec, rfam, kinds, shelf)
    stages = periphery.useful_stages(stages, ctls, rfams, a)
    if not ctls:
        raise InfeasibleError("no gain network settles with the allowed limiters", ("amplitude",))

    pulls = [g.pull for g in ctls]
    opp = [o.pull for o in op_choices]
    tol = spec.frequency.tolerance_frac
    ln_t = math.log(f)
    ln_lo = ln_t - FREQ_SHARE * tol - max(pulls) - max(opp) - 0.03
    ln_hi = ln_t + FREQ_SHARE * tol - min(pulls) - min(opp) + 0.03
    pricer = Pricer(catalog, stock)
    price = pricer.unit
    # aim close for a fresh design; from the shelf, take what the tolerance allows
    aim = min(FREQ_SHARE * tol, FREQ_AIM) if shelf is None else FREQ_SHARE * tol
    centres = np.unique(np.round([ln_t - g.pull - o.pull for g in ctls for o in op_choices], 4))
    nets: list[NetOption] = []
    for rfam in rfams:
        for cf in cfams:
            nets += topo.network_options(spec, rfam, cf, ln_lo, ln_hi, price,
                                         (min(math.exp(o.ln_r_min) for o in op_choices),
                                          max(math.exp(o.ln_r_max) for o in op_choices)), centres, aim + 0.002, shelf)
    if not nets:
        raise InfeasibleError(no_network_message(spec, topo, rfams, cfams), ("frequency",))
    fixed = periphery.fixed_parts(spec, catalog, rfams, price, shelf)
    capacity: dict = {}
    if only:
        def stocked(item) -> bool:
            return all(stock.quantity(fam, v) > 0 for fam, v, _ in item.lines)

        nets = [x for x in nets if stocked(x)]
        ctls = [x for x in ctls if stocked(x)]
        stages = [x for x in stages if stocked(x)]
        op_choices = [x for x in op_choices if stocked(x)]
        for what, lst in (("frequency network", nets), ("gain network and limiter", ctls), ("output stage", stages),
                          ("op-amp", op_choices)):
            if not lst:
                raise InfeasibleError(f"stock.mode only: no {what} can be built from the shelf "
                                      f"({stock.source})", ("stock",))
        capacity = {(it.family, it.value): it.quantity // spec.builds for it in stock.items}
    keys = {(fam, v) for item in itertools.chain(nets, ctls, stages, op_choices) for fam, v, _ in item.lines}
    keys |= {(fam, v) for _, fam, v in fixed}
    unit_price = {k: price(*k) for k in keys}
    line_price = {k: pricer.line(*k) for k in keys}
    return Space(tuple(nets), tuple(ctls), tuple(stages), tuple(op_choices), ln_t,
                 aim, math.log(a.peak_v * (1 - AMP_SHARE * a.tolerance_frac)),
                 math.log(a.peak_v * (1 + AMP_SHARE * a.tolerance_frac)), THD_SHARE * spec.max_thd_frac,
                 math.log(1 + MARGIN_FLOOR), weights or rank_weights(spec.rank_by),
                 math.log(a.peak_v * (1 - 0.9 * a.tolerance_frac)), math.log(a.peak_v * (1 + 0.9 * a.tolerance_frac)),
                 0.9 * tol, unit_price, line_price, fixed, tuple(f"{i}: {w}" for i, w in dropped), capacity,
                 topo.name, ctl.name)
