"""Why a spec does not design: which requirements bind, and what is reachable.

The solver's model carries one enforcement literal per requirement; dropping each in
turn and solving again tells which bind and what the best choice without that one
reaches. When no op-amp or no network qualifies before the search, the messages name
the best value any allowed part reaches.
"""

from __future__ import annotations

import math

from partpick import units
from partpick.search.solver import SCALE, scaled
from partpick.search.space import Space, swing_peak
from partpick.spec import Spec

__all__ = ["diagnose", "no_opamp_message", "no_network_message"]


def _shelf_shortfall(space: Space, m, solver) -> str:
    """Which values the best design without the quantity limits takes more of than the
    shelf holds."""
    # read the chosen items back through their literal names
    chosen = []
    names = {v.name: idx for idx, v in enumerate(m.Proto().variables)}
    need: dict = {}
    for lst, prefix in ((space.nets, "net"), (space.ctls, "ctl"), (space.stages, "stage"), (space.ops, "op")):
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
    return scaled(space.ln_amp_lo) <= ln_load_units <= scaled(space.ln_amp_hi)


def diagnose(space: Space, m, req: dict, solver, probes) -> tuple[str, tuple[str, ...]]:
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


def no_opamp_message(spec: Spec, ops, dropped) -> str:
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
        head = (f"load.resistance binds: {_amp_text(a)} into {spec.load.resistance_ohm:g} ohm draws {i_load * 1e3:.3g} mA "
                f"peak; the strongest op-amp ({best.id}) gives {best.output_current_a * 1e3:.3g} mA (60 % may be used)")
    elif common == "supply":
        head = (f"supply binds: no allowed op-amp takes {spec.supply.span_min_v:g}..{spec.supply.span_max_v:g} V "
                f"across its rails")
    elif common == "slew":
        best = max(ops, key=lambda o: o.slew_v_per_s)
        head = (f"frequency.target binds: {_amp_text(a)} at {spec.frequency.target_hz:g} Hz needs "
                f"{2 * 2 * math.pi * spec.frequency.target_hz * amp / 1e6:.3g} V/us of slew rate; the fastest op-amp "
                f"({best.id}) gives {best.slew_v_per_s / 1e6:.3g} V/us")
    elif common == "gain-bandwidth":
        best = max(ops, key=lambda o: o.gbw_hz)
        head = (f"frequency.target binds: {spec.frequency.target_hz:g} Hz needs 30 times that in gain-bandwidth; "
                f"the fastest op-amp ({best.id}) has {best.gbw_hz:.3g} Hz")
    else:
        best = max(ops, key=lambda o: swing_peak(o, spec))
        head = (f"amplitude.target binds: {_amp_text(a)} at the load needs {amp:.3g} V peak; the best op-amp "
                f"({best.id}) swings {max(swing_peak(best, spec), 0):.3g} V at {spec.supply.min_v:g} V supply")
    return head + ". Dropped: " + "; ".join(f"{i}: {w}" for i, w in dropped)


def _amp_text(a) -> str:
    return units.format_amplitude(a.target)


def no_network_message(spec: Spec, topo, rfams, cfams) -> str:
    """Say how far the allowed families' networks reach in frequency."""
    r_lo, r_hi = topo.arm_r
    lo = min(1 / (2 * math.pi * r.max_ohm * c.max_f) for r in rfams for c in cfams)
    hi = max(1 / (2 * math.pi * max(r.min_ohm, r_lo) * max(c.min_f, topo.arm_c_min)) for r in rfams for c in cfams)
    return (f"frequency {spec.frequency.target_hz:g} Hz is out of reach of the allowed families: their arms span "
            f"about {lo:.3g} Hz to {hi:.3g} Hz")
