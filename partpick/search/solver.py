"""CP-SAT over the search space: the n best choices by the surrogate objective, proven.

Laid out like the OR-Tools samples: data, variables, constraints, objective, solve. One
literal per item of each option list, exactly one per list; every surrogate relation of
:func:`partpick.search.space.evaluate` written in integer logarithms at SCALE units per
neper (0.01 ppm), relaxed by its rounding bound; each requirement's constraints carry an
enforcement literal named after the spec field, so an infeasible model can say which
requirements conflict (:mod:`partpick.search.explain`). The only importer of ortools,
and only when a search runs.
"""

from __future__ import annotations

import math

from partpick.circuits.options import DM_MAX, SLOPE
from partpick.errors import InfeasibleError
from partpick.search.space import BUFFERED, Pick, Space, evaluate

__all__ = ["SCALE", "OBJ_SCALE", "REQUIREMENTS", "solve", "scaled"]

SCALE = 100_000_000         # integer units per neper: 0.01 ppm resolution of every logarithm
OBJ_SCALE = 10 ** 12        # integer units per unit of the objective


REQUIREMENTS = ("frequency.tolerance", "amplitude.target", "distortion.max_thd",
                "startup margin (worst tolerance corner)", "op-amp swing, slew and current", "stock quantities")


def scaled(x: float) -> int:
    """x (nepers, or a fraction) in integer units of the model."""
    return int(round(x * SCALE))


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

    from partpick.search.explain import diagnose

    m = cp_model.CpModel()
    # -- one literal per requirement, assumed true, so an infeasible model can say which bind
    req = {name: m.NewBoolVar(name) for name in REQUIREMENTS}
    # -- variables: one literal per item of each list
    xa = [m.NewBoolVar(f"net{i}") for i in range(len(space.nets))]
    xg = [m.NewBoolVar(f"ctl{i}") for i in range(len(space.ctls))]
    xs = [m.NewBoolVar(f"stage{i}") for i in range(len(space.stages))]
    xo = [m.NewBoolVar(f"op{i}") for i in range(len(space.ops))]
    for group in (xa, xg, xs, xo):
        m.AddExactlyOne(group)
    big = 50 * SCALE
    slack = 8  # integer units: rounding of the terms, so the relaxed model keeps every float solution
    ln_k = m.NewIntVar(-big, big, "ln_k")
    m.Add(ln_k == sum(scaled(a.ln_k) * x for a, x in zip(space.nets, xa)))
    ln_f0 = m.NewIntVar(-big, big, "ln_f0")
    m.Add(ln_f0 == sum(scaled(a.ln_f0) * x for a, x in zip(space.nets, xa)))
    loss = m.NewIntVar(-big, big, "loss")
    m.Add(loss == sum(scaled(a.loss) * x for a, x in zip(space.nets, xa))
          + sum(scaled(o.margin_loss) * x for o, x in zip(space.ops, xo)))
    pull_o = m.NewIntVar(-big, big, "pull_op")
    m.Add(pull_o == sum(scaled(o.pull) * x for o, x in zip(space.ops, xo)))
    ln_gain_s = m.NewIntVar(-big, big, "ln_gain_stage")
    m.Add(ln_gain_s == sum(scaled(s.ln_gain) * x for s, x in zip(space.stages, xs)))
    ln_y_s = m.NewIntVar(-big, big, "ln_y_stage")
    m.Add(ln_y_s == sum(scaled(s.ln_y) * x for s, x in zip(space.stages, xs)))
    ln_f = m.NewIntVar(-big, big, "ln_f")
    ln_amp = m.NewIntVar(-big, big, "ln_amp")
    thd = m.NewIntVar(-big, big, "thd")
    dm = m.NewIntVar(-big, big, "dm")
    ln_amp_lo_t = m.NewIntVar(-big, big, "ln_amp_tmin")
    ln_amp_hi_t = m.NewIntVar(-big, big, "ln_amp_tmax")
    drift = m.NewIntVar(-big, big, "drift")
    m.Add(drift == sum(scaled(a.drift + a.spread) * x for a, x in zip(space.nets, xa)))
    sig_k = m.NewIntVar(-big, big, "sigma_k")
    m.Add(sig_k == sum(scaled(a.sigma_k) * x for a, x in zip(space.nets, xa)))
    spread = m.NewIntVar(-big, big, "amp_spread")

    # -- constraints, each gain network enforcing its own linearised surrogate
    for g, x in zip(space.ctls, xg):
        m.Add(dm == scaled(g.ln_g - g.ln1m_ref) - ln_k).OnlyEnforceIf(x)
        m.Add(dm <= scaled(DM_MAX) + slack).OnlyEnforceIf(x)
        m.Add(dm >= -scaled(DM_MAX) - slack).OnlyEnforceIf(x)
        # The slopes are multiples of 1/SLOPE (see circuits.options.slope), so 1000-fold sums are exact
        # integers and the quotient is pinned to within half a unit.
        sp_, sa, st = (int(round(v * SLOPE)) for v in (g.s_pull, g.s_amp, g.s_thd))
        # frequency.target: ln f = ln f0 + pull + s_pull dm + op pull
        e = SLOPE * ln_f0 + SLOPE * scaled(g.pull) + sp_ * dm + SLOPE * pull_o
        m.Add(SLOPE * ln_f >= e - SLOPE // 2).OnlyEnforceIf(x)
        m.Add(SLOPE * ln_f <= e + SLOPE // 2).OnlyEnforceIf(x)
        e = SLOPE * scaled(g.ln_amp) + sa * dm
        m.Add(SLOPE * ln_amp >= e - SLOPE // 2).OnlyEnforceIf(x)
        m.Add(SLOPE * ln_amp <= e + SLOPE // 2).OnlyEnforceIf(x)
        ka = int(round(g.k_amp * SLOPE))
        e = ka * sig_k + SLOPE * scaled(g.k_amp * g.sigma_g + g.vf_spread)
        m.Add(SLOPE * spread >= e - SLOPE // 2).OnlyEnforceIf(x)
        m.Add(SLOPE * spread <= e + SLOPE // 2).OnlyEnforceIf(x)
        for ln_t, var in ((g.ln_amp_tmin, ln_amp_lo_t), (g.ln_amp_tmax, ln_amp_hi_t)):
            e = SLOPE * scaled(ln_t) + sa * dm
            m.Add(SLOPE * var >= e - SLOPE // 2).OnlyEnforceIf(x)
            m.Add(SLOPE * var <= e + SLOPE // 2).OnlyEnforceIf(x)
        e = SLOPE * scaled(g.thd) + st * dm
        m.Add(SLOPE * thd >= e - SLOPE // 2).OnlyEnforceIf(x)
        m.Add(SLOPE * thd <= e + SLOPE // 2).OnlyEnforceIf(x)
        # startup: gain excess above the worst-corner floor
        m.Add(scaled(g.ln_g) - ln_k >= scaled(space.ln_margin_floor + g.loss) + loss - slack).OnlyEnforceIf(
            [x, req["startup margin (worst tolerance corner)"]])
    # one resistor family per candidate (arms and gain network share it)
    fams = sorted({a.r_family for a in space.nets} | {g.r_family for g in space.ctls})
    zf = {f: m.NewBoolVar(f"family_{f}") for f in fams}
    m.AddExactlyOne(zf.values())
    for a, x in zip(space.nets, xa):
        m.AddImplication(x, zf[a.r_family])
    for g, x in zip(space.ctls, xg):
        m.AddImplication(x, zf[g.r_family])
    # distortion.max_thd
    m.Add(thd <= scaled(space.thd_max) + slack).OnlyEnforceIf(req["distortion.max_thd"])
    m.Add(thd >= -slack)
    # amplitude.target at the load
    ln_load = m.NewIntVar(-big, big, "ln_load")
    m.Add(ln_load == ln_amp + ln_gain_s)
    m.Add(ln_load >= scaled(space.ln_amp_lo) - slack).OnlyEnforceIf(req["amplitude.target"])
    m.Add(ln_load <= scaled(space.ln_amp_hi) + slack).OnlyEnforceIf(req["amplitude.target"])
    for var in (ln_amp, ln_amp_lo_t, ln_amp_hi_t):
        if math.isfinite(space.ln_amp_lo_t):
            m.Add(var + ln_gain_s - spread >= scaled(space.ln_amp_lo_t) - slack).OnlyEnforceIf(req["amplitude.target"])
            m.Add(var + ln_gain_s + spread <= scaled(space.ln_amp_hi_t) + slack).OnlyEnforceIf(req["amplitude.target"])
    # op-amp limits: swing and slew, load current, arm impedance bounds
    ln_rmax = sum(scaled(math.log(a.r_max)) * x for a, x in zip(space.nets, xa))
    ln_rmin = sum(scaled(math.log(a.r_min)) * x for a, x in zip(space.nets, xa))
    lim_ = req["op-amp swing, slew and current"]
    for o, x in zip(space.ops, xo):
        m.Add(ln_amp <= scaled(o.ln_amp_max) + slack).OnlyEnforceIf([x, lim_])
        m.Add(ln_load <= scaled(o.ln_load_amp_max) + slack).OnlyEnforceIf([x, lim_])
        m.Add(ln_amp + ln_y_s <= scaled(o.ln_i_max) + slack).OnlyEnforceIf([x, lim_])
        m.Add(ln_rmax <= scaled(o.ln_r_max) + slack).OnlyEnforceIf([x, lim_])
        m.Add(ln_rmin >= scaled(o.ln_r_min) - slack).OnlyEnforceIf([x, lim_])
    # frequency error |ln f - ln f_target| within the share of the tolerance
    err = m.NewIntVar(0, big, "freq_err")
    m.Add(err >= ln_f - scaled(space.ln_f_target))
    m.Add(err >= scaled(space.ln_f_target) - ln_f)
    m.Add(err <= scaled(space.ln_f_tol) + slack).OnlyEnforceIf(req["frequency.tolerance"])
    if math.isfinite(space.ln_f_tol_t):
        m.Add(err + drift <= scaled(space.ln_f_tol_t) + slack).OnlyEnforceIf(req["frequency.tolerance"])

    # -- cost: unit prices per slot, line prices per distinct (family, value)
    items = [(space.nets, xa), (space.ctls, xg), (space.stages, xs), (space.ops, xo)]
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
        mid = scaled(0.5 * (space.ln_amp_lo + space.ln_amp_hi))
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
            raise InfeasibleError(*diagnose(space, m, req, solver, (ln_load, thd, err, ln_amp)))
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
        pick = evaluate(space, space.nets[ia], space.ctls[ig], space.stages[is_], space.ops[io])
        if pick is not None:
            found[pick.key()] = pick
        m.AddBoolOr([xa[ia].Not(), xg[ig].Not(), xs[is_].Not(), xo[io].Not()])
        if len(found) > 6 * n + 20:
            break
    index = {id(x): i for lst in (space.nets, space.ctls, space.stages, space.ops) for i, x in enumerate(lst)}
    # ties in the objective go by the items' order, so the answer is the same on every run
    return sorted(found.values(), key=lambda p: (p.objective, index[id(p.net)], index[id(p.ctl)],
                                                 index[id(p.stage)], index[id(p.op)]))[:n]
