"""Standard-value search: from a spec and the allowed families to the best candidates.

The work is split where each method is strong (measured on this problem, see the
search issue): exact enumeration with numpy finds the arm sets (Rs, Cs, Rp, Cp) whose
frequency, with the op-amp's and the limiter's pull pre-compensated, is within reach
(a sorted meet-in-the-middle over log values); OR-Tools CP-SAT then makes the joint
discrete choice of arm set, gain network (Rg, Rf, limiter element, Rd), output stage
and op-amp under the startup-margin window, the amplitude window and the op-amp's
limits, minimising the ranking objective (frequency error, cost per part and per
distinct BOM line, part count).

Everything the solver sees is a *surrogate*: the limiter's amplitude, THD and harmonic
frequency pull come from harmonic balance on a reference network and are linearised in
the gain excess; the op-amp's pull from the linear loop analysis. In the log domain
(ln f0 = -ln 2 pi - (ln Rs + ln Rp + ln Cs + ln Cp) / 2) every constraint is linear, and
integer logs at a resolution of 0.01 ppm (``SCALE``) keep CP-SAT exact enough: the integer
model is relaxed by its rounding bound, and every solution is re-evaluated in floats
(:func:`evaluate`, the same function the exhaustive reference enumeration uses), so the
solver proposes and exact arithmetic decides. Verification (:mod:`partpick.verify`)
then judges the proposals with the full physics.

Only this module imports ortools, and only when a search runs.
"""

from __future__ import annotations

import dataclasses
import functools
import itertools
import math
from dataclasses import dataclass, field

import numpy as np

from partpick.catalog import Catalog, CapacitorFamily, Limiter, OpAmp, ResistorFamily
from partpick.errors import InfeasibleError
from partpick.physics.harmonic import harmonic_balance
from partpick.physics.linear import analyse_linear
from partpick.spec import Spec
from partpick.topologies.wien import Conditions, WienCircuit

__all__ = ["SCALE", "Arms", "GainNet", "Stage", "OpChoice", "Space", "Pick", "build_space", "evaluate",
           "solve", "enumerate_best", "Explanation"]

SCALE = 100_000_000         # integer units per neper: 0.01 ppm resolution of every logarithm
OBJ_SCALE = 10 ** 12        # integer units per unit of the objective
MARGIN_FLOOR = 0.004        # gain excess kept beyond the worst tolerance corner (common practice)
AMP_SHARE = 0.6             # share of the amplitude tolerance the nominal design may use
THD_SHARE = 0.8             # share of the THD limit the nominal design may use
FREQ_SHARE = 0.5            # share of the frequency tolerance the nominal design may use ...
FREQ_AIM = 0.0025           # ... and at most this: the built circuit should land close to the target
ARM_R = (1e3, 470e3)        # arm resistances, ohm: above op-amp loading, below bias/stray trouble
ARM_C_MIN = 100e-12         # arm capacitors, F: well above stray capacitance
MAX_ARMS = 90              # arm sets handed to the solver per family pair
REF_T = 298.15
DM_MAX = 0.02               # nepers: how far from its reference gain excess a linearised surrogate is trusted
AMP_SLOPE_MAX = 25.0        # ln amplitude per neper of gain excess: steeper designs are too fragile to build


@dataclass(frozen=True, slots=True)
class Arms:
    """An arm set; ln_f0 (ln Hz), ln_k = ln(1 + Rs/Rp + Cp/Cs); loss: worst-case margin
    loss from its tolerances (nepers); lines: ((family, value, quantity), ...)."""

    rs: float
    cs: float
    rp: float
    cp: float
    r_family: str
    c_family: str
    ln_f0: float
    ln_k: float
    loss: float
    r_max: float
    r_min: float
    lines: tuple
    drift: float = 0.0
    spread: float = 0.0      # frequency spread from the tolerances at the yield's z (nepers)
    sigma_k: float = 0.0     # standard deviation of ln(required gain) from the tolerances


@dataclass(frozen=True, slots=True)
class GainNet:
    """Gain network and limiter: Rg, Rf, Rd (ohm), limiter id; surrogate at the gain
    excess m_ref: ln_amp (ln of the op-amp output amplitude, V), thd (fraction), pull
    (relative harmonic frequency pull), each with its slope per neper of gain excess."""

    rg: float
    rf: float
    rd: float
    limiter: str
    r_family: str
    ln_g: float
    ln1m_ref: float
    ln_amp: float
    s_amp: float
    thd: float
    s_thd: float
    pull: float
    s_pull: float
    loss: float
    lines: tuple
    ln_amp_tmin: float = 0.0
    ln_amp_tmax: float = 0.0
    k_amp: float = 0.0       # |amplitude slope| times z: amplitude spread per unit of gain-excess sigma
    sigma_g: float = 0.0     # standard deviation of ln(gain) from the tolerances
    vf_spread: float = 0.0   # amplitude spread from the limiter's forward-voltage spread at the yield's z


@dataclass(frozen=True, slots=True)
class Stage:
    """Output stage: kind, Ra, Rb (ohm), ln of its gain into the load, ln of the load
    current per volt at the op-amp output (ln S), lines."""

    kind: str
    ra: float
    rb: float
    r_family: str
    ln_gain: float
    ln_y: float
    lines: tuple


@dataclass(frozen=True, slots=True)
class OpChoice:
    """An op-amp and what it allows: pull (relative frequency pull from GBW),
    margin_loss (gain excess it costs, nepers), ln_amp_max (ln V: swing at the minimum
    supply and slew), ln_i_max (ln A), ln_r_max / ln_r_min (ln ohm, arm bounds)."""

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


BUFFERED = ("follower", "gain")


@dataclass(frozen=True, slots=True)
class Space:
    """The whole discrete search space with its targets and objective weights."""

    arms: tuple[Arms, ...]
    gains: tuple[GainNet, ...]
    stages: tuple[Stage, ...]
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
    fixed_lines: tuple = ()
    explain: tuple[str, ...] = ()
    capacity: dict = field(default_factory=dict, hash=False, compare=False)  # (family, value) -> parts per board on the shelf


@dataclass(frozen=True, slots=True)
class Pick:
    """One complete choice and its surrogate figures: objective (float), ln_f (ln Hz),
    ln_amp_load (ln V), thd, ln_margin (nepers), cost (currency), parts."""

    arms: Arms
    gain: GainNet
    stage: Stage
    op: OpChoice
    objective: float
    ln_f: float
    ln_amp_load: float
    thd: float
    ln_margin: float
    cost: float
    parts: int

    def key(self) -> tuple:
        return (self.arms, self.gain, self.stage, self.op)


@dataclass(frozen=True, slots=True)
class Explanation:
    """Why parts were dropped before the search (family id -> reason)."""

    dropped: tuple[tuple[str, str], ...]


# -- the surrogate, in floats ---------------------------------------------------------------

def _lines_cost(space: Space, items) -> tuple[float, int]:
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


def evaluate(space: Space, a: Arms, g: GainNet, s: Stage, o: OpChoice) -> Pick | None:
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
    for a, g, s, o in itertools.product(space.arms, space.gains, space.stages, space.ops):
        p = evaluate(space, a, g, s, o)
        if p is not None:
            picks.append(p)
    picks.sort(key=lambda p: p.objective)
    return picks[:n]


# -- CP-SAT -------------------------------------------------------------------------------------

SLOPE = 1000  # surrogate slopes are kept as multiples of 1/SLOPE
REQUIREMENTS = ("frequency.tolerance", "amplitude.target", "distortion.max_thd",
                "startup margin (worst tolerance corner)", "op-amp swing, slew and current", "stock quantities")


def _i(x: float) -> int:
    return int(round(x * SCALE))


def _slope(x: float) -> float:
    """A slope rounded to 1/SLOPE: the surrogate is defined with it, so the integer model
    and the float evaluation use the same number."""
    return round(x * SLOPE) / SLOPE


def solve(space: Space, n: int, *, time_limit_s: float = 10.0, workers: int = 2, seed: int = 0,
          log: bool = False) -> list[Pick]:
    """The n best choices of ``space`` by the surrogate objective, proven by CP-SAT and
    exact float re-evaluation.

    Each round solves to optimality, then forbids the found combination (a no-good cut);
    rounds continue until the integer objective of the next solution exceeds the float
    objective of the n-th best found by more than the rounding bound, so nothing better
    can be missing.
    """
    from ortools.sat.python import cp_model

    m = cp_model.CpModel()
    # -- one literal per requirement, assumed true, so an infeasible model can say which bind
    req = {name: m.NewBoolVar(name) for name in REQUIREMENTS}
    # -- variables: one literal per item of each list
    xa = [m.NewBoolVar(f"arm{i}") for i in range(len(space.arms))]
    xg = [m.NewBoolVar(f"gain{i}") for i in range(len(space.gains))]
    xs = [m.NewBoolVar(f"stage{i}") for i in range(len(space.stages))]
    xo = [m.NewBoolVar(f"op{i}") for i in range(len(space.ops))]
    for group in (xa, xg, xs, xo):
        m.AddExactlyOne(group)
    big = 50 * SCALE
    slack = 8  # integer units: rounding of the terms, so the relaxed model keeps every float solution
    ln_k = m.NewIntVar(-big, big, "ln_k")
    m.Add(ln_k == sum(_i(a.ln_k) * x for a, x in zip(space.arms, xa)))
    ln_f0 = m.NewIntVar(-big, big, "ln_f0")
    m.Add(ln_f0 == sum(_i(a.ln_f0) * x for a, x in zip(space.arms, xa)))
    loss = m.NewIntVar(-big, big, "loss")
    m.Add(loss == sum(_i(a.loss) * x for a, x in zip(space.arms, xa))
          + sum(_i(o.margin_loss) * x for o, x in zip(space.ops, xo)))
    pull_o = m.NewIntVar(-big, big, "pull_op")
    m.Add(pull_o == sum(_i(o.pull) * x for o, x in zip(space.ops, xo)))
    ln_gain_s = m.NewIntVar(-big, big, "ln_gain_stage")
    m.Add(ln_gain_s == sum(_i(s.ln_gain) * x for s, x in zip(space.stages, xs)))
    ln_y_s = m.NewIntVar(-big, big, "ln_y_stage")
    m.Add(ln_y_s == sum(_i(s.ln_y) * x for s, x in zip(space.stages, xs)))
    ln_f = m.NewIntVar(-big, big, "ln_f")
    ln_amp = m.NewIntVar(-big, big, "ln_amp")
    thd = m.NewIntVar(-big, big, "thd")
    dm = m.NewIntVar(-big, big, "dm")
    ln_amp_lo_t = m.NewIntVar(-big, big, "ln_amp_tmin")
    ln_amp_hi_t = m.NewIntVar(-big, big, "ln_amp_tmax")
    drift = m.NewIntVar(-big, big, "drift")
    m.Add(drift == sum(_i(a.drift + a.spread) * x for a, x in zip(space.arms, xa)))
    sig_k = m.NewIntVar(-big, big, "sigma_k")
    m.Add(sig_k == sum(_i(a.sigma_k) * x for a, x in zip(space.arms, xa)))
    spread = m.NewIntVar(-big, big, "amp_spread")

    # -- constraints, each gain network enforcing its own linearised surrogate
    for g, x in zip(space.gains, xg):
        m.Add(dm == _i(g.ln_g - g.ln1m_ref) - ln_k).OnlyEnforceIf(x)
        m.Add(dm <= _i(DM_MAX) + slack).OnlyEnforceIf(x)
        m.Add(dm >= -_i(DM_MAX) - slack).OnlyEnforceIf(x)
        # The slopes are multiples of 1/SLOPE (see _slope), so 1000-fold sums are exact
        # integers and the quotient is pinned to within half a unit.
        sp_, sa, st = (int(round(v * SLOPE)) for v in (g.s_pull, g.s_amp, g.s_thd))
        # frequency.target: ln f = ln f0 + pull + s_pull dm + op pull
        e = SLOPE * ln_f0 + SLOPE * _i(g.pull) + sp_ * dm + SLOPE * pull_o
        m.Add(SLOPE * ln_f >= e - SLOPE // 2).OnlyEnforceIf(x)
        m.Add(SLOPE * ln_f <= e + SLOPE // 2).OnlyEnforceIf(x)
        e = SLOPE * _i(g.ln_amp) + sa * dm
        m.Add(SLOPE * ln_amp >= e - SLOPE // 2).OnlyEnforceIf(x)
        m.Add(SLOPE * ln_amp <= e + SLOPE // 2).OnlyEnforceIf(x)
        ka = int(round(g.k_amp * SLOPE))
        e = ka * sig_k + SLOPE * _i(g.k_amp * g.sigma_g + g.vf_spread)
        m.Add(SLOPE * spread >= e - SLOPE // 2).OnlyEnforceIf(x)
        m.Add(SLOPE * spread <= e + SLOPE // 2).OnlyEnforceIf(x)
        for ln_t, var in ((g.ln_amp_tmin, ln_amp_lo_t), (g.ln_amp_tmax, ln_amp_hi_t)):
            e = SLOPE * _i(ln_t) + sa * dm
            m.Add(SLOPE * var >= e - SLOPE // 2).OnlyEnforceIf(x)
            m.Add(SLOPE * var <= e + SLOPE // 2).OnlyEnforceIf(x)
        e = SLOPE * _i(g.thd) + st * dm
        m.Add(SLOPE * thd >= e - SLOPE // 2).OnlyEnforceIf(x)
        m.Add(SLOPE * thd <= e + SLOPE // 2).OnlyEnforceIf(x)
        # startup: gain excess above the worst-corner floor
        m.Add(_i(g.ln_g) - ln_k >= _i(space.ln_margin_floor + g.loss) + loss - slack).OnlyEnforceIf(
            [x, req["startup margin (worst tolerance corner)"]])
    # one resistor family per candidate (arms and gain network share it)
    fams = sorted({a.r_family for a in space.arms} | {g.r_family for g in space.gains})
    zf = {f: m.NewBoolVar(f"family_{f}") for f in fams}
    m.AddExactlyOne(zf.values())
    for a, x in zip(space.arms, xa):
        m.AddImplication(x, zf[a.r_family])
    for g, x in zip(space.gains, xg):
        m.AddImplication(x, zf[g.r_family])
    # distortion.max_thd
    m.Add(thd <= _i(space.thd_max) + slack).OnlyEnforceIf(req["distortion.max_thd"])
    m.Add(thd >= -slack)
    # amplitude.target at the load
    ln_load = m.NewIntVar(-big, big, "ln_load")
    m.Add(ln_load == ln_amp + ln_gain_s)
    m.Add(ln_load >= _i(space.ln_amp_lo) - slack).OnlyEnforceIf(req["amplitude.target"])
    m.Add(ln_load <= _i(space.ln_amp_hi) + slack).OnlyEnforceIf(req["amplitude.target"])
    for var in (ln_amp, ln_amp_lo_t, ln_amp_hi_t):
        if math.isfinite(space.ln_amp_lo_t):
            m.Add(var + ln_gain_s - spread >= _i(space.ln_amp_lo_t) - slack).OnlyEnforceIf(req["amplitude.target"])
            m.Add(var + ln_gain_s + spread <= _i(space.ln_amp_hi_t) + slack).OnlyEnforceIf(req["amplitude.target"])
    # op-amp limits: swing and slew, load current, arm impedance bounds
    ln_rmax = sum(_i(math.log(a.r_max)) * x for a, x in zip(space.arms, xa))
    ln_rmin = sum(_i(math.log(a.r_min)) * x for a, x in zip(space.arms, xa))
    lim_ = req["op-amp swing, slew and current"]
    for o, x in zip(space.ops, xo):
        m.Add(ln_amp <= _i(o.ln_amp_max) + slack).OnlyEnforceIf([x, lim_])
        m.Add(ln_load <= _i(o.ln_load_amp_max) + slack).OnlyEnforceIf([x, lim_])
        m.Add(ln_amp + ln_y_s <= _i(o.ln_i_max) + slack).OnlyEnforceIf([x, lim_])
        m.Add(ln_rmax <= _i(o.ln_r_max) + slack).OnlyEnforceIf([x, lim_])
        m.Add(ln_rmin >= _i(o.ln_r_min) - slack).OnlyEnforceIf([x, lim_])
    # frequency error |ln f - ln f_target| within the share of the tolerance
    err = m.NewIntVar(0, big, "freq_err")
    m.Add(err >= ln_f - _i(space.ln_f_target))
    m.Add(err >= _i(space.ln_f_target) - ln_f)
    m.Add(err <= _i(space.ln_f_tol) + slack).OnlyEnforceIf(req["frequency.tolerance"])
    if math.isfinite(space.ln_f_tol_t):
        m.Add(err + drift <= _i(space.ln_f_tol_t) + slack).OnlyEnforceIf(req["frequency.tolerance"])

    # -- cost: unit prices per slot, line prices per distinct (family, value)
    items = [(space.arms, xa), (space.gains, xg), (space.stages, xs), (space.ops, xo)]
    users: dict[tuple, list] = {}
    unit_terms = []
    for lst, xs_ in items:
        for item, x in zip(lst, xs_):
            u = sum(space.unit_price[(f, v)] * q for f, v, q in item.lines)
            unit_terms.append((u, x))
            for f, v, q in item.lines:
                users.setdefault((f, v), []).append(x)
    fixed_keys = {(f, v) for f, v, _ in space.fixed_lines}
    # stock: mode only: no value may be used more often than the shelf holds per board
    fixed_qty: dict = {}
    for f, v, q in space.fixed_lines:
        fixed_qty[(f, v)] = fixed_qty.get((f, v), 0) + q
    for key, cap in space.capacity.items():
        terms = [(q, x) for lst, xs_ in items for item, x in zip(lst, xs_) for f, v, q in item.lines if (f, v) == key]
        if terms:
            m.Add(sum(q * x for q, x in terms) <= cap - fixed_qty.get(key, 0)).OnlyEnforceIf(req["stock quantities"])
    line_lits = {}
    for key, xs_ in users.items():
        if key in fixed_keys:
            continue
        y = m.NewBoolVar(f"line_{key[0]}_{key[1]:g}")
        for x in xs_:
            m.AddImplication(x, y)
        line_lits[key] = y
    w = dict(space.weights)
    parts_terms = [(sum(q for _, _, q in item.lines), x) for lst, xs_ in items for item, x in zip(lst, xs_)]
    parts_terms += [(1, x) for s_, x in zip(space.stages, xs) if s_.kind in BUFFERED]
    # a buffer on a single-channel op-amp needs a second package
    for o, xo_i in zip(space.ops, xo):
        if o.channels != 1:
            continue
        for s_, xs_i in zip(space.stages, xs):
            if s_.kind in BUFFERED:
                both = m.NewBoolVar(f"second_package_{o.opamp}")
                m.AddBoolOr([xo_i.Not(), xs_i.Not(), both])
                unit_terms.append((space.unit_price[(o.opamp, 0.0)], both))
    int_terms, bool_terms = [], []  # (coefficient per unit, variable)
    if "frequency_error" in w:
        int_terms.append((w["frequency_error"] / space.ln_f_tol / SCALE, err, space.ln_f_tol))
    if "cost" in w:
        bool_terms += [(w["cost"] * u, x) for u, x in unit_terms]
        bool_terms += [(w["cost"] * space.line_price[k], y) for k, y in line_lits.items()]
    if "parts" in w:
        bool_terms += [(w["parts"] * q / 10.0, x) for q, x in parts_terms]
    if "thd" in w:
        int_terms.append((w["thd"] / space.thd_max / SCALE, thd, space.thd_max))
    if "amplitude_error" in w:
        mid = _i(0.5 * (space.ln_amp_lo + space.ln_amp_hi))
        aerr = m.NewIntVar(0, big, "amp_err")
        m.Add(aerr >= ln_load - mid)
        m.Add(aerr >= mid - ln_load)
        int_terms.append((w["amplitude_error"] / max(space.ln_amp_hi - space.ln_amp_lo, 1e-12) / SCALE, aerr,
                          space.ln_amp_hi - space.ln_amp_lo))
    m.Minimize(sum(int(round(c * OBJ_SCALE)) * v for c, v, *_ in int_terms + bool_terms))
    # How far the integer objective can sit from the float one: each integer-valued term
    # (errors, THD) is off by up to three units of SCALE, and each rounded coefficient by
    # half a unit of OBJ_SCALE times the largest value its variable can take.
    obj_slack = (sum(3 * abs(c) + 0.5 * (vmax + 1e-3) * SCALE / OBJ_SCALE for c, _, vmax in int_terms)
                 + (len(bool_terms) + len(int_terms) + 1) / OBJ_SCALE)

    solver = cp_model.CpSolver()
    solver.parameters.max_time_in_seconds = time_limit_s
    solver.parameters.num_search_workers = workers
    solver.parameters.random_seed = seed
    solver.parameters.log_search_progress = log
    # the fixed parts (single-supply bias and coupling) add the same to every choice
    fixed_cost = (sum(space.unit_price[(f, v)] * q for f, v, q in space.fixed_lines)
                  + sum(space.line_price[k] for k in {(f, v) for f, v, _ in space.fixed_lines}))
    const_obj = w.get("cost", 0.0) * fixed_cost + w.get("parts", 0.0) * sum(q for *_, q in space.fixed_lines) / 10.0
    m.AddAssumptions(list(req.values()))
    found: dict[tuple, Pick] = {}
    first = True
    while True:
        status = solver.Solve(m)
        if first and status == cp_model.INFEASIBLE:
            raise InfeasibleError(*_diagnose(space, m, req, solver, (ln_load, thd, err, ln_amp)))
        first = False
        if status not in (cp_model.OPTIMAL, cp_model.FEASIBLE):
            break
        ia = next(i for i, x in enumerate(xa) if solver.Value(x))
        ig = next(i for i, x in enumerate(xg) if solver.Value(x))
        is_ = next(i for i, x in enumerate(xs) if solver.Value(x))
        io = next(i for i, x in enumerate(xo) if solver.Value(x))
        int_obj = solver.ObjectiveValue() / OBJ_SCALE + const_obj
        best = sorted(p.objective for p in found.values())
        if len(best) >= n and int_obj > best[n - 1] + obj_slack:
            break
        pick = evaluate(space, space.arms[ia], space.gains[ig], space.stages[is_], space.ops[io])
        if pick is not None:
            found[pick.key()] = pick
        m.AddBoolOr([xa[ia].Not(), xg[ig].Not(), xs[is_].Not(), xo[io].Not()])
        if len(found) > 6 * n + 20:
            break
    index = {id(x): i for lst in (space.arms, space.gains, space.stages, space.ops) for i, x in enumerate(lst)}
    # ties in the objective go by the items' order, so the answer is the same on every run
    return sorted(found.values(), key=lambda p: (p.objective, index[id(p.arms)], index[id(p.gain)],
                                                 index[id(p.stage)], index[id(p.op)]))[:n]


def _shelf_shortfall(space: Space, m, solver) -> str:
    """Which values the best design without the quantity limits takes more of than the
    shelf holds."""
    # read the chosen items back through their literal names
    chosen = []
    names = {v.name: idx for idx, v in enumerate(m.Proto().variables)}
    need: dict = {}
    for lst, prefix in ((space.arms, "arm"), (space.gains, "gain"), (space.stages, "stage"), (space.ops, "op")):
        for i, item in enumerate(lst):
            idx = names.get(f"{prefix}{i}")
            if idx is not None and solver.Value(m.GetBoolVarFromProtoIndex(idx)):
                chosen.append(item)
                for f, v, q in item.lines:
                    need[(f, v)] = need.get((f, v), 0) + q
    for f, v, q in space.fixed_lines:
        need[(f, v)] = need.get((f, v), 0) + q
    short = [f"{f} {v:g} (needs {q} per board, the shelf gives {space.capacity.get((f, v), 0)})"
             for (f, v), q in sorted(need.items()) if q > space.capacity.get((f, v), q)]
    return "the shelf runs out of " + (", ".join(short) if short else "a value the design needs")


def _in(ln_load_units: int, space: Space) -> bool:
    return _i(space.ln_amp_lo) <= ln_load_units <= _i(space.ln_amp_hi)


def _diagnose(space: Space, m, req: dict, solver, probes) -> tuple[str, tuple[str, ...]]:
    """Which requirements bind, and what the best candidate reaches without each."""
    from ortools.sat.python import cp_model

    ln_load, thd, err, ln_amp = probes
    binding = []
    reached = []
    for name, lit in req.items():
        m.ClearAssumptions()
        m.AddAssumptions([l_ for n, l_ in req.items() if n != name])
        status = solver.Solve(m)
        if status not in (cp_model.OPTIMAL, cp_model.FEASIBLE):
            continue
        binding.append(name)
        if name == "amplitude.target":
            reached.append(f"the nearest design gives {math.exp(solver.Value(ln_load) / SCALE):.3g} V peak at the "
                           f"load at the nominal temperature (wanted {math.exp(space.ln_amp_lo):.3g}.."
                           f"{math.exp(space.ln_amp_hi):.3g} V) but drifts outside "
                           f"{math.exp(space.ln_amp_lo_t):.3g}..{math.exp(space.ln_amp_hi_t):.3g} V at an end of the "
                           f"temperature range (limiter tempco)" if _in(solver.Value(ln_load), space)
                           else f"the nearest amplitude at the load is {math.exp(solver.Value(ln_load) / SCALE):.3g} "
                           f"V peak (wanted {math.exp(space.ln_amp_lo):.3g}..{math.exp(space.ln_amp_hi):.3g} V)")
        elif name == "distortion.max_thd":
            reached.append(f"the lowest THD that meets the rest is {solver.Value(thd) / SCALE * 100:.3g} % "
                           f"(limit {space.thd_max * 100:.3g} % with headroom)")
        elif name == "frequency.tolerance":
            reached.append(f"the closest frequency is {solver.Value(err) / SCALE * 100:.3g} % off "
                           f"(allowed {space.ln_f_tol * 100:.3g} %)")
        elif name == "stock quantities":
            reached.append(_shelf_shortfall(space, m, solver))
        elif name == "op-amp swing, slew and current":
            reached.append(f"it needs {math.exp(solver.Value(ln_amp) / SCALE):.3g} V peak at the op-amp output, "
                           f"beyond what the allowed op-amps swing, slew or drive")
        else:
            reached.append("no gain network keeps enough gain excess for the worst tolerance corner")
    m.ClearAssumptions()
    if not binding:
        return ("no candidate meets the spec: several requirements conflict together ("
                + ", ".join(req) + ")", tuple(req))
    return "no candidate meets the spec; " + "; ".join(f"{b} binds: {r}" for b, r in zip(binding, reached)), tuple(binding)


# -- building the space from a spec and the catalog --------------------------------------------

def _ideal_opamp(like: OpAmp) -> OpAmp:
    """An op-amp with no limits, for the limiter's own surrogate."""
    return dataclasses.replace(like, id="ideal", gbw_hz=1e12, a0=1e9, second_pole_hz=None, slew_v_per_s=1e15,
                               headroom_high_v=0.0, headroom_low_v=0.0, output_current_a=1e3,
                               output_resistance_ohm=1e-3)


def _swing_pk(op: OpAmp, spec: Spec) -> float:
    """Largest peak the op-amp's output reaches around the signal reference at the
    minimum supply, V."""
    vcc, vee, ref = Conditions(spec.supply.min_v, REF_T, math.inf).rails(spec.supply.kind)
    return min(vcc - op.headroom_high_v - ref, ref - vee - op.headroom_low_v)


def _drop_opamp(op: OpAmp, spec: Spec) -> str | None:
    """Why ``op`` cannot serve this spec, or None."""
    s, f, a = spec.supply, spec.frequency.target_hz, spec.amplitude
    amp = a.peak_v * (1 + a.tolerance_frac)
    if op.supply_min_v > s.span_min_v or op.supply_max_v < s.span_max_v:
        return (f"supply range {op.supply_min_v:g}..{op.supply_max_v:g} V does not cover the spec's "
                f"{s.span_min_v:g}..{s.span_max_v:g} V across the rails")
    swing = _swing_pk(op, spec)
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


def _arm_cap_families(spec: Spec, catalog: Catalog) -> list[CapacitorFamily]:
    allowed = spec.parts.capacitors
    return [c for c in catalog.capacitors if (allowed is None or c.id in allowed)
            and "electrolytic" not in c.dielectric.lower()]


def _res_families(spec: Spec, catalog: Catalog) -> list[ResistorFamily]:
    allowed = spec.parts.resistors
    return [r for r in catalog.resistors if allowed is None or r.id in allowed]


def _dt(spec: Spec) -> float:
    t = spec.temperature
    return max(t.max_k - t.nominal_k, t.nominal_k - t.min_k)


def _cap_tc(c: CapacitorFamily) -> float:
    """Worst relative drift of one capacitor against another of its family, per K."""
    if c.has_band:
        return c.band_frac / (0.5 * (c.band_max_k - c.band_min_k))
    return c.tempco_spread_per_k


def _values(fam, shelf=None) -> tuple[float, ...]:
    """The family's series values, only those on the shelf when ``shelf`` is given."""
    vals = fam.values()
    return vals if shelf is None else tuple(v for v in vals if shelf.quantity(fam.id, v) > 0)


def _arm_sets(spec: Spec, rf: ResistorFamily, cf: CapacitorFamily, ln_lo: float, ln_hi: float,
              price, r_bounds: tuple[float, float] = ARM_R, centres: np.ndarray | None = None,
              half_width: float = 0.0, shelf=None) -> list[Arms]:
    """Arm sets of one family pair with ln f0 in [ln_lo, ln_hi]: a sorted
    meet-in-the-middle over ln(Rs Rp) and ln(Cs Cp), ratios kept near 1 so the
    required gain stays near 3."""
    r = np.array([v for v in _values(rf, shelf) if max(ARM_R[0], r_bounds[0]) <= v <= min(ARM_R[1], r_bounds[1])])
    c = np.array([v for v in _values(cf, shelf) if v >= ARM_C_MIN])
    if r.size == 0 or c.size == 0:
        return []
    ri, rj = np.meshgrid(np.arange(r.size), np.arange(r.size), indexing="ij")
    rat = r[ri] / r[rj]
    keep = (rat >= 0.8) & (rat <= 1.25)
    rs_i, rp_i = ri[keep], rj[keep]
    ci, cj = np.meshgrid(np.arange(c.size), np.arange(c.size), indexing="ij")
    crat = c[cj] / c[ci]
    keep = (crat >= 0.8) & (crat <= 1.25)
    cs_i, cp_i = ci[keep], cj[keep]
    lr = np.log(r[rs_i]) + np.log(r[rp_i])
    lc = np.log(c[cs_i]) + np.log(c[cp_i])
    order = np.argsort(lc)
    lc_sorted = lc[order]
    # ln f0 = -ln(2 pi) - (lr + lc)/2  in [ln_lo, ln_hi]  <=>  lc in [a - lr, b - lr]
    a_ = -2 * (ln_hi + math.log(2 * math.pi))
    b_ = -2 * (ln_lo + math.log(2 * math.pi))
    lo = np.searchsorted(lc_sorted, a_ - lr, side="left")
    hi = np.searchsorted(lc_sorted, b_ - lr, side="right")
    counts = hi - lo
    if counts.sum() == 0:
        return []
    ki = np.repeat(np.arange(lr.size), counts)
    offs = np.arange(counts.sum()) - np.repeat(np.cumsum(counts) - counts, counts)
    ci_ = order[np.repeat(lo, counts) + offs]
    rs, rp = r[rs_i[ki]], r[rp_i[ki]]
    cs, cp = c[cs_i[ci_]], c[cp_i[ci_]]
    ln_f0 = -math.log(2 * math.pi) - 0.5 * (lr[ki] + lc[ci_])
    if centres is not None:
        # only arm sets that some gain network and op-amp pull onto the target
        near = np.min(np.abs(ln_f0[:, None] - centres[None, :]), axis=1) <= half_width
        ki, ci_, ln_f0 = ki[near], ci_[near], ln_f0[near]
        if ki.size == 0:
            return []
        rs, rp = r[rs_i[ki]], r[rp_i[ki]]
        cs, cp = c[cs_i[ci_]], c[cp_i[ci_]]
    cost = 2 * rf.price_unit + np.array([cf.unit_price(x) for x in cs]) + np.array([cf.unit_price(x) for x in cp]) \
        if rs.size < 5000 else 2 * rf.price_unit + 2 * np.interp(np.log(cs * cp) / 2, np.log(c), [cf.unit_price(x) for x in c])
    # Keep the cheapest few in each narrow frequency bin, so the whole reachable band
    # stays covered for every pull the solver may pair with it; equal values (one BOM
    # line) win ties.
    distinct = (rs != rp).astype(int) + (cs != cp).astype(int)
    width = max(half_width / 4, 1e-6) if centres is not None else (ln_hi - ln_lo) / max(MAX_ARMS // 9, 1)
    b = np.floor((ln_f0 - ln_lo) / width).astype(int)
    # ... and in each third of a decade of impedance, since op-amps bound it differently
    b = b * 100 + np.floor(np.log10(np.maximum(rs, rp)) * 3).astype(int)
    pick = np.lexsort((distinct, cost, b))
    rank = np.zeros(pick.size, dtype=int)
    sb = b[pick]
    for i in range(1, pick.size):
        rank[i] = rank[i - 1] + 1 if sb[i] == sb[i - 1] else 0
    keep = pick[rank < 1]
    if keep.size > MAX_ARMS and centres is not None:
        # too many: keep the ones the pulls land closest to the target
        dist = np.min(np.abs(ln_f0[keep][:, None] - centres[None, :]), axis=1)
        keep = keep[np.argsort(dist, kind="stable")[:MAX_ARMS]]
    dt = _dt(spec)
    # f0 ~ (Rs Rp Cs Cp)^(-1/2): each pair of parts drifts by its tempco bound over dt
    c_tc = (_cap_tc(cf) + abs(cf.tempco_per_k)) if not cf.has_band else _cap_tc(cf)
    drift = (rf.tempco_per_k + c_tc) * dt
    u_r, u_c = _sigma(rf), _sigma(cf)
    z = _z(spec)
    # f0 ~ (Rs Rp Cs Cp)^(-1/2): first-order propagation (JCGM 100, the GUM)
    f_spread = z * 0.5 * math.sqrt(2 * u_r ** 2 + 2 * u_c ** 2)
    out: list[Arms] = []
    for j in keep:
        rs_, rp_, cs_, cp_ = float(rs[j]), float(rp[j]), float(cs[j]), float(cp[j])
        kk = 1 + rs_ / rp_ + cp_ / cs_
        # margin the arms can lose: the tolerance spread at the yield's z (the Monte Carlo
        # confirms), plus the two parts of each ratio drifting apart over temperature
        sigma_k = math.sqrt((rs_ / rp_) ** 2 * 2 * u_r ** 2 + (cp_ / cs_) ** 2 * 2 * u_c ** 2) / kk
        loss = z * sigma_k + (rs_ / rp_ * 2 * rf.tempco_per_k * dt + cp_ / cs_ * 2 * _cap_tc(cf) * dt) / kk
        lines = _merge_lines([(rf.id, rs_, 1), (rf.id, rp_, 1), (cf.id, cs_, 1), (cf.id, cp_, 1)])
        out.append(Arms(rs_, cs_, rp_, cp_, rf.id, cf.id, float(ln_f0[j]), math.log(kk), loss, max(rs_, rp_),
                        min(rs_, rp_), lines, drift, f_spread, sigma_k))
    return out


def _sigma(fam) -> float:
    """Standard deviation of a part's relative value: tolerance / sqrt 3 (uniform) or
    tolerance / 3 (normal, tolerance at 3 sigma)."""
    return fam.tolerance_frac / (3.0 if fam.distribution == "normal" else math.sqrt(3.0))


def _z(spec: Spec) -> float:
    """Two-sided normal quantile for the spec's yield: 2.58 for 99 %, 1.96 for 95 %."""
    from statistics import NormalDist

    return NormalDist().inv_cdf(0.5 + 0.5 * min(max(spec.yield_min_frac, 0.5), 0.9999))


def _merge_lines(lines) -> tuple:
    merged: dict[tuple[str, float], int] = {}
    for fam, value, qty in lines:
        merged[(fam, value)] = merged.get((fam, value), 0) + qty
    return tuple((f, v, q) for (f, v), q in merged.items())


def _nearest(values, target: float) -> float:
    return min(values, key=lambda v: abs(math.log(v / target)))


def _gain_nets(spec: Spec, rf: ResistorFamily, lims: list[Limiter], ideal: OpAmp, f_hz: float,
               amp_targets: list[float], m_floor: float, shelf=None) -> list[GainNet]:
    """Gain networks of one resistor family: Rg near 10 kohm, Rf for a ladder of gain
    excesses, Rd = 0 or bracketing the target amplitude; each with its surrogate from
    harmonic balance on a reference network (equal arms at f, an ideal op-amp)."""
    from partpick.physics.harmonic import _df_amplitude  # noqa: PLC2701 - same package
    from partpick.physics.junction import forward_voltage, limiter_table

    values = _values(rf, shelf)
    if not values:
        return []
    rg = _nearest(values, 10e3)
    temp = spec.temperature.nominal_k
    cref = 1 / (2 * math.pi * f_hz * rg)
    cond = Conditions(1e3, temp, math.inf)
    dt = _dt(spec)
    # Rf/Rg: the tolerance spread at the yield's z, and the two drifting apart
    loss_g = _z(spec) * math.sqrt(2) * _sigma(rf) + 2 * rf.tempco_per_k * dt
    out: list[GainNet] = []
    ladder = (m_floor, 2 * m_floor, 4 * m_floor, 8 * m_floor)
    rfs = sorted({_nearest(values, rg * 2 * (1 + m)) for m in ladder} if shelf is None else
                 {v for v in values if 2 * (1 + m_floor / 2) <= v / rg <= 2 * (1 + 10 * m_floor)})
    for lim in lims:
        for rf_v in rfs:
            g = 1 + rf_v / rg
            if g <= 3.0:
                continue
            need = 1 / (rg * 2) - 1 / rf_v  # extra conductance the limiter adds at K = 3
            rds = [0.0]
            cand = [v for v in values if 0.05 * rf_v <= v <= 20 * rf_v]

            def amp(k: int) -> float:
                # describing-function amplitude at the op-amp output (vo = 1.5 vf at K = 3)
                a_vf = _df_amplitude(limiter_table(lim, cand[k], temp), need)
                return math.inf if a_vf is None else a_vf * 1.5

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
                net = _surrogate(lim, rg, rf_v, rd, cref, ideal, cond,
                                 (spec.temperature.min_k, spec.temperature.max_k))
                if net is None:
                    continue
                ln_amp, thd, pull, s_amp, s_thd, s_pull, ends = net
                z = _z(spec)
                k_amp = _slope(abs(s_amp) * z)
                sigma_g = (g - 1) / g * math.sqrt(2) * _sigma(rf)
                vf = forward_voltage(lim, 20e-6, temp)
                vf_spread = z * lim.vf_spread_v / 3 / max(vf, 1e-3)
                lines = _merge_lines([(rf.id, rg, 1), (rf.id, rf_v, 1)] + ([(rf.id, rd, 1)] if rd else [])
                                     + [(lim.id, 0.0, 1)])
                out.append(GainNet(rg, rf_v, rd, lim.id, rf.id, math.log(g), math.log(g / 3), ln_amp, s_amp, thd,
                                   s_thd, pull, s_pull, (g - 1) / g * loss_g, lines, ends[0], ends[1], k_amp,
                                   sigma_g, vf_spread))
    return out


def _reference(lim, rg, rf, rd, cref, ideal, cond, start=None):
    c = WienCircuit(rg, cref, rg, cref, rg, rf, ideal, lim, rd_ohm=rd)
    # 11 harmonics to start with: the surrogate needs 1e-3, not the verification's 1e-4
    hb = harmonic_balance(c, cond, analyse_linear(c, cond), start=start, kmax=11)
    return (hb, c) if hb is not None and hb.converged else (None, c)


@functools.lru_cache(maxsize=4096)
def _surrogate(lim, rg, rf, rd, cref, ideal, cond, temps):
    """(ln amplitude, THD, pull, their slopes per neper of gain excess, and ln amplitude
    at each temperature of ``temps``) of the reference network, from harmonic-balance
    runs at Rf and at Rf raised by 0.5 % and, for designs not too steep to build, at
    the temperature ends, each warm-started from the first."""
    base, c0 = _reference(lim, rg, rf, rd, cref, ideal, cond)
    if base is None:
        return None
    up, c1 = _reference(lim, rg, rf * 1.005, rd, cref, ideal, cond, base)
    if up is None:
        return None
    d = math.log(c1.gain / c0.gain)
    a0, a1 = math.log(base.osc_peak_v), math.log(up.osc_peak_v)
    s_amp = _slope((a1 - a0) / d)
    if abs(s_amp) > AMP_SLOPE_MAX:
        return None  # amplitude too steep in the gain excess: too fragile to build
    ends = []
    for t in temps:
        hb, _ = _reference(lim, rg, rf, rd, cref, ideal, dataclasses.replace(cond, temp_k=t), base)
        if hb is None:
            return None
        ends.append(math.log(hb.osc_peak_v))
    p0, p1 = (math.log(h.freq_hz / c.f0_hz) for h, c in ((base, c0), (up, c1)))
    return (a0, base.osc_thd, p0, s_amp, _slope((up.osc_thd - base.osc_thd) / d), _slope((p1 - p0) / d),
            tuple(ends))


def _stages(spec: Spec, rf: ResistorFamily, kinds: tuple[str, ...], shelf=None) -> list[Stage]:
    """Output stages of one resistor family, with their gain into the load."""
    r_load = spec.load.resistance_ohm
    y_load = (0.0 if math.isinf(r_load) else 1 / r_load) + 2 * math.pi * spec.frequency.target_hz * spec.load.capacitance_f
    ln_y = math.log(max(y_load, 1e-9))
    values = [v for v in _values(rf, shelf) if 1e3 <= v <= 1e6]
    out = []
    if not values:
        kinds = tuple(k for k in kinds if k in ("none", "follower"))
    base = _nearest(values, 10e3) if values else 0.0
    if "none" in kinds:
        out.append(Stage("none", 0.0, 0.0, rf.id, 0.0, ln_y, ()))
    if "follower" in kinds:
        out.append(Stage("follower", 0.0, 0.0, rf.id, 0.0, -20.0, ()))
    if "gain" in kinds:
        for rb in values:
            gain = 1 + rb / base
            if 1.05 <= gain <= 8:
                out.append(Stage("gain", base, rb, rf.id, math.log(gain), -20.0,
                                 _merge_lines([(rf.id, base, 1), (rf.id, rb, 1)])))
    if "attenuator" in kinds:
        for ra in values:
            shunt = base if math.isinf(r_load) else base * r_load / (base + r_load)
            gain = shunt / (ra + shunt)
            if 0.05 <= gain <= 0.95:
                out.append(Stage("attenuator", ra, base, rf.id, math.log(gain), -math.log(ra + shunt),
                                 _merge_lines([(rf.id, ra, 1), (rf.id, base, 1)])))
    return out


def _op_choice(op: OpAmp, spec: Spec, f_hz: float, m_typ: float) -> OpChoice:
    """What one op-amp allows, and the pull and margin it costs (linear loop analysis on
    an equal-arm reference network at the target frequency)."""
    rg = 10e3
    cref = 1 / (2 * math.pi * f_hz * rg)
    c = WienCircuit(rg, cref, rg, cref, rg, 2 * rg * (1 + m_typ), op)
    lin = analyse_linear(c, Conditions(spec.supply.min_v, spec.temperature.nominal_k, math.inf))
    pull = math.log(lin.marginal_hz / c.f0_hz) if math.isfinite(lin.marginal_hz) else -1.0
    margin_loss = math.log(1 + c.ideal_margin) - math.log(max(1 + lin.margin, 1e-6))
    swing = _swing_pk(op, spec)
    slew_amp = 0.2 * op.slew_v_per_s / (2 * math.pi * f_hz)
    load_slew_amp = 0.5 * op.slew_v_per_s / (2 * math.pi * f_hz)
    r_max = min(1e6, 5e-3 / op.input_bias_a) if op.input_bias_a > 0 else 1e6
    return OpChoice(op.id, pull, margin_loss, math.log(0.9 * min(swing, slew_amp)),
                    math.log(0.9 * min(swing, load_slew_amp)), math.log(0.6 * op.output_current_a), math.log(r_max),
                    math.log(max(20 * op.output_resistance_ohm, 1.0)), ((op.id, 0.0, 1),), op.channels)


def build_space(spec: Spec, catalog: Catalog, *, weights: tuple[tuple[str, float], ...] | None = None,
                stock=None) -> Space:
    """The search space for ``spec`` over the catalog families it allows.

    Raises :class:`InfeasibleError` naming the binding requirement when no op-amp or no
    limiter qualifies, or no arm set reaches the frequency.
    """
    f = spec.frequency.target_hz
    a = spec.amplitude
    dropped: list[tuple[str, str]] = []
    ops_all = [o for o in catalog.opamps if spec.parts.opamps is None or o.id in spec.parts.opamps]
    ops = []
    for op in ops_all:
        why = _drop_opamp(op, spec)
        if why:
            dropped.append((op.id, why))
        else:
            ops.append(op)
    if not ops:
        raise InfeasibleError(_no_opamp_message(spec, ops_all, dropped), ("amplitude", "supply", "load"))
    best_swing = max(_swing_pk(op, spec) for op in ops)
    lims_all = [l_ for l_ in catalog.limiters if spec.parts.limiters is None or l_.id in spec.parts.limiters]
    from partpick.physics.junction import forward_voltage

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
    rfams = _res_families(spec, catalog)
    cfams = _arm_cap_families(spec, catalog)
    if not rfams or not cfams:
        raise InfeasibleError("the spec allows no resistor or no non-polarised capacitor family for the "
                              "frequency-setting arms", ("parts",))
    ideal = _ideal_opamp(ops[0])
    dt = _dt(spec)
    tol_loss = min(_z(spec) * 2 * _sigma(r) + 2 * r.tempco_per_k * dt for r in rfams)
    m_floor = MARGIN_FLOOR + tol_loss
    kinds = ("none", "follower", "gain", "attenuator") if spec.output_stage == "auto" else (spec.output_stage,)
    op_choices = [_op_choice(op, spec, f, 2 * m_floor) for op in ops]

    gains: list[GainNet] = []
    stages: list[Stage] = []
    only = stock is not None and spec.stock is not None and spec.stock.mode == "only"
    shelf = stock if only else None
    if shelf is not None:
        lims = [x for x in lims if shelf.quantity(x.id) > 0]
        op_choices = [o for o in op_choices if shelf.quantity(o.opamp) > 0]
        if not lims or not op_choices:
            raise InfeasibleError(f"stock.mode only: the shelf ({shelf.source}) holds no qualifying "
                                  f"{'limiter' if not lims else 'op-amp'}", ("stock",))
    for rf in rfams:
        gains += _gain_nets(spec, rf, lims, ideal, f, [a.peak_v], m_floor, shelf)
        stages += _stages(spec, rf, kinds, shelf)
    stages = _useful_stages(stages, gains, rfams, a)
    if not gains:
        raise InfeasibleError("no gain network settles with the allowed limiters", ("amplitude",))

    pulls = [g.pull for g in gains]
    opp = [o.pull for o in op_choices]
    tol = spec.frequency.tolerance_frac
    ln_t = math.log(f)
    ln_lo = ln_t - FREQ_SHARE * tol - max(pulls) - max(opp) - 0.03
    ln_hi = ln_t + FREQ_SHARE * tol - min(pulls) - min(opp) + 0.03
    price = _pricer(catalog, stock)
    # aim close for a fresh design; from the shelf, take what the tolerance allows
    aim = min(FREQ_SHARE * tol, FREQ_AIM) if shelf is None else FREQ_SHARE * tol
    centres = np.unique(np.round([ln_t - g.pull - o.pull for g in gains for o in op_choices], 4))
    arms: list[Arms] = []
    for rf in rfams:
        for cf in cfams:
            arms += _arm_sets(spec, rf, cf, ln_lo, ln_hi, lambda fam, v: price(fam, v),
                              (min(math.exp(o.ln_r_min) for o in op_choices),
                               max(math.exp(o.ln_r_max) for o in op_choices)), centres, aim + 0.002, shelf)
    if not arms:
        raise InfeasibleError(_no_arms_message(spec, rfams, cfams), ("frequency",))
    fixed = _fixed_lines(spec, catalog, rfams, price, shelf)
    capacity: dict = {}
    if only:
        def stocked(item) -> bool:
            return all(stock.quantity(f, v) > 0 for f, v, _ in item.lines)

        arms = [x for x in arms if stocked(x)]
        gains = [x for x in gains if stocked(x)]
        stages = [x for x in stages if stocked(x)]
        op_choices = [x for x in op_choices if stocked(x)]
        for what, lst in (("arm set", arms), ("gain network and limiter", gains), ("output stage", stages),
                          ("op-amp", op_choices)):
            if not lst:
                raise InfeasibleError(f"stock.mode only: no {what} can be built from the shelf "
                                      f"({stock.source})", ("stock",))
        capacity = {(it.family, it.value): it.quantity // spec.builds for it in stock.items}
    keys = {(fam, v) for item in itertools.chain(arms, gains, stages, op_choices) for fam, v, _ in item.lines}
    keys |= {(fam, v) for fam, v, _ in fixed}
    unit_price = {k: price(*k) for k in keys}
    line_price = {k: _line_price(catalog, k, stock) for k in keys}
    return Space(tuple(arms), tuple(gains), tuple(stages), tuple(op_choices), ln_t,
                 aim, math.log(a.peak_v * (1 - AMP_SHARE * a.tolerance_frac)),
                 math.log(a.peak_v * (1 + AMP_SHARE * a.tolerance_frac)), THD_SHARE * spec.max_thd_frac,
                 math.log(1 + MARGIN_FLOOR), weights or rank_weights(spec.rank_by),
                 math.log(a.peak_v * (1 - 0.9 * a.tolerance_frac)), math.log(a.peak_v * (1 + 0.9 * a.tolerance_frac)),
                 0.9 * tol, unit_price, line_price, fixed, tuple(f"{i}: {w}" for i, w in dropped), capacity)


def _useful_stages(stages: list[Stage], gains: list[GainNet], rfams, a) -> list[Stage]:
    """The stages worth offering: 'none' and 'follower' once, and from the cheapest
    family's scaling stages the few whose gain maps some gain network's amplitude
    nearest the target (the others only repeat what those do at the same cost)."""
    cheapest = min(rfams, key=lambda r: r.price_unit).id
    out, seen = [], set()
    for s in stages:
        if s.kind in ("none", "follower") and s.kind not in seen:
            seen.add(s.kind)
            out.append(s)
    want = math.log(a.peak_v)
    scaling = [s for s in stages if s.kind in ("gain", "attenuator") and s.r_family == cheapest]
    chosen: set[int] = set()
    for g in gains:
        need = want - g.ln_amp
        if abs(need) < 0.02:
            continue  # no stage needed for this one
        near = sorted(range(len(scaling)), key=lambda i: abs(scaling[i].ln_gain - need))[:2]
        chosen.update(i for i in near if abs(scaling[i].ln_gain - need) < 0.05 + AMP_SLOPE_MAX * DM_MAX / 4)
    return out + [scaling[i] for i in sorted(chosen)]


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


ORDER_LINE = 0.50  # ordering cost of a BOM line not on the shelf, in the catalog's currency (stock: prefer)


def _pricer(catalog: Catalog, stock=None):
    """Unit price of (family, value): from the shelf when the stock list has it (its
    listed price, else nothing), else the catalog's."""
    def price(fam_id: str, value: float) -> float:
        if stock is not None:
            item = stock.find(fam_id, value)
            if item is not None and item.quantity > 0:
                return item.unit_price or 0.0
        kind = catalog.kind_of(fam_id)
        fam = catalog.find(kind, fam_id)
        return fam.unit_price(value) if kind in ("resistors", "capacitors") else fam.price_unit * (
            fam.parts if kind == "limiters" else 1)
    return price


def _line_price(catalog: Catalog, key: tuple[str, float], stock=None) -> float:
    """Price of one BOM line: nothing for a stocked part, else the family's line price,
    plus the ordering cost when a stock list is in use."""
    fam_id, value = key
    if stock is None:
        return catalog.find(catalog.kind_of(fam_id), fam_id).price_line
    item = stock.find(fam_id, value)
    if item is not None and item.quantity > 0:
        return 0.0
    return catalog.find(catalog.kind_of(fam_id), fam_id).price_line + ORDER_LINE


def _fixed_lines(spec: Spec, catalog: Catalog, rfams, price, shelf=None) -> tuple:
    """Single supply: the mid-rail divider, its decoupling and the output coupling
    capacitor (the same for every candidate)."""
    if spec.supply.kind != "single":
        return ()
    fam = min(rfams, key=lambda r: r.price_unit)
    rb = _nearest(fam.values(), 47e3)
    if shelf is not None:
        on = [(r.id, v) for r in rfams for v in r.values() if shelf.quantity(r.id, v) >= 2 * spec.builds]
        if on:
            fid, rb = min(on, key=lambda k: abs(math.log(k[1] / 47e3)))
            fam = catalog.find("resistors", fid)
    caps = [c for c in catalog.capacitors if spec.parts.capacitors is None or c.id in spec.parts.capacitors]
    f = spec.frequency.target_hz
    need_b = 100 / (2 * math.pi * f * rb / 2)       # bias corner a hundredth of f
    r_load = spec.load.resistance_ohm if not math.isinf(spec.load.resistance_ohm) else 1e7
    need_c = 10 / (2 * math.pi * f * r_load)        # coupling corner a tenth of f: under 0.5 % loss
    out = [(fam.id, rb, 2)]
    for need in (need_b, need_c):
        options = [(price(c.id, v), c.id, v) for c in caps for v in c.values() if v >= need
                   and c.voltage_v >= spec.supply.max_v and (shelf is None or shelf.quantity(c.id, v) >= spec.builds)]
        if not options:
            raise InfeasibleError(f"no allowed capacitor reaches {need * 1e6:.3g} uF for the single-supply bias "
                                  f"and coupling at {f:g} Hz", ("parts",))
        _, cid, v = min(options)
        out.append((cid, v, 1))
    return tuple(out)


def _no_opamp_message(spec: Spec, ops, dropped) -> str:
    """Say what binds when no op-amp qualifies: the most common reason, with the best
    value any allowed op-amp reaches."""
    a = spec.amplitude
    if not ops:
        return "the spec allows no op-amp (parts.opamps is empty)"
    amp = a.peak_v * (1 + a.tolerance_frac)
    tags = [w.split(" ")[0] for _, w in dropped]
    common = max(set(tags), key=tags.count)
    # the best of those that at least take the supply
    powered = {i for i, w in dropped if not w.startswith("supply")}
    ops = [o for o in ops if o.id in powered] or ops
    if common == "output":
        best = max(ops, key=lambda o: o.output_current_a)
        i_load = amp / spec.load.resistance_ohm
        head = (f"load.resistance binds: {units_amp(a)} into {spec.load.resistance_ohm:g} ohm draws {i_load * 1e3:.3g} mA "
                f"peak; the strongest op-amp ({best.id}) gives {best.output_current_a * 1e3:.3g} mA (60 % may be used)")
    elif common == "supply":
        head = (f"supply binds: no allowed op-amp takes {spec.supply.span_min_v:g}..{spec.supply.span_max_v:g} V "
                f"across its rails")
    elif common == "slew":
        best = max(ops, key=lambda o: o.slew_v_per_s)
        head = (f"frequency.target binds: {units_amp(a)} at {spec.frequency.target_hz:g} Hz needs "
                f"{2 * 2 * math.pi * spec.frequency.target_hz * amp / 1e6:.3g} V/us of slew rate; the fastest op-amp "
                f"({best.id}) gives {best.slew_v_per_s / 1e6:.3g} V/us")
    elif common == "gain-bandwidth":
        best = max(ops, key=lambda o: o.gbw_hz)
        head = (f"frequency.target binds: {spec.frequency.target_hz:g} Hz needs 30 times that in gain-bandwidth; "
                f"the fastest op-amp ({best.id}) has {best.gbw_hz:.3g} Hz")
    else:
        best = max(ops, key=lambda o: _swing_pk(o, spec))
        head = (f"amplitude.target binds: {units_amp(a)} at the load needs {amp:.3g} V peak; the best op-amp "
                f"({best.id}) swings {max(_swing_pk(best, spec), 0):.3g} V at {spec.supply.min_v:g} V supply")
    return head + ". Dropped: " + "; ".join(f"{i}: {w}" for i, w in dropped)


def units_amp(a) -> str:
    from partpick import units

    return units.format_amplitude(a.target)


def _no_arms_message(spec: Spec, rfams, cfams) -> str:
    lo = min(1 / (2 * math.pi * r.max_ohm * c.max_f) for r in rfams for c in cfams)
    hi = max(1 / (2 * math.pi * max(r.min_ohm, ARM_R[0]) * max(c.min_f, ARM_C_MIN)) for r in rfams for c in cfams)
    return (f"frequency {spec.frequency.target_hz:g} Hz is out of reach of the allowed families: their arms span "
            f"about {lo:.3g} Hz to {hi:.3g} Hz")


def retune_arms(spec: Spec, catalog: Catalog, arms: Arms, pull: float, r_bounds: tuple[float, float]) -> Arms | None:
    """Arm values of the same families that land closest on target once the pull
    measured by verification (``pull``: ln of verified over textbook frequency) is
    known, keeping the required gain within 0.2 % (so margin and amplitude stay put);
    the cheapest among the closest. None when no arm set does better."""
    rf = catalog.find("resistors", arms.r_family)
    cf = catalog.find("capacitors", arms.c_family)
    target = math.log(spec.frequency.target_hz) - pull
    price = _pricer(catalog)
    found = _arm_sets(spec, rf, cf, target - 0.01, target + 0.01, price, r_bounds, np.array([target]), 0.001)
    found = [a for a in found if abs(a.ln_k - arms.ln_k) <= 0.002]
    if not found:
        return None

    def score(a: Arms):
        return (round(abs(a.ln_f0 - target) / 1e-4), sum(price(f, v) * q for f, v, q in a.lines))

    best = min(found, key=score)
    return best if abs(best.ln_f0 - target) < abs(arms.ln_f0 - target) else None
