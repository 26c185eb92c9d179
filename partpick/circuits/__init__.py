"""What can be built: the registry of topologies and amplitude controls, and the few
functions that assemble a circuit from its plug-ins (its netlist, its loop, its branch).

Every plug-in is one module of this package with the same shape (see DEVELOPERS.md,
"Adding a topology" and "Adding an amplitude control"); this file lists them. Spec
validation (:func:`check_spec`) and the BOM roles (:func:`all_slots`) come from here.
"""

from __future__ import annotations

import math
from dataclasses import replace

from partpick.circuits import clipping, diode_limiter, jfet_agc, periphery, quadrature, wien
from partpick.circuits.base import (STAGES, SUPPLY_KINDS, Circuit, Conditions, Core, Slot, Values)
from partpick.errors import SpecError
from partpick.physics.harmonic import BalanceResult
from partpick.physics.linear import LinearResult, analyse_linear
from partpick.physics.loop import Branch, Loop
from partpick.physics.netlist import Capacitor, Kick, Netlist, Resistor

__all__ = ["TOPOLOGIES", "CONTROLS", "Circuit", "Conditions", "Core", "Slot", "Values", "STAGES", "SUPPLY_KINDS",
           "topology", "control", "all_slots", "fitting_topologies", "slots_for", "control_for_roles", "check_spec",
           "make_circuit", "build_netlist", "build_loop", "branch", "linear", "balance", "small_signal", "settled",
           "designators", "log_sensitivities", "margin_fn",
           "rest_conductance", "input_cap_shift"]

TOPOLOGIES = {t.name: t for t in (wien.TOPOLOGY, quadrature.TOPOLOGY)}
CONTROLS = {c.name: c for c in (diode_limiter.CONTROL, jfet_agc.CONTROL, clipping.CONTROL)}


def topology(name: str):
    """The topology plug-in called ``name`` (KeyError when unknown)."""
    return TOPOLOGIES[name]


def control(name: str):
    """The amplitude-control plug-in called ``name`` (KeyError when unknown)."""
    return CONTROLS[name]


def all_slots() -> dict[str, Slot]:
    """Every role any plug-in declares, role -> slot (roles are unique across plug-ins:
    the conformance test checks it)."""
    out: dict[str, Slot] = {}
    for plug in (*TOPOLOGIES.values(), *CONTROLS.values()):
        for s in plug.slots:
            out.setdefault(s.role, s)
    for s in periphery.SLOTS:
        out.setdefault(s.role, s)
    return out


def slots_for(topology_name: str, control_name: str, stage: str, supply_kind: str) -> tuple[Slot, ...]:
    """The slots of one circuit shape, in BOM order: the topology's, the control's,
    then the periphery's."""
    return (*TOPOLOGIES[topology_name].slots, *CONTROLS[control_name].slots,
            *periphery.slots_for(stage, supply_kind))


def designators() -> dict[str, str]:
    """Role -> reference designator, shared by BOM, netlist and report."""
    return {role: s.designator for role, s in all_slots().items()}


def control_for_roles(topology_name: str, roles) -> str:
    """The amplitude control whose required slots a set of BOM roles holds (the
    clipping 'none' control when no other fits)."""
    roles = set(roles)
    for name, ctl in CONTROLS.items():
        needed = {s.role for s in ctl.slots if not s.optional}
        if needed and needed <= roles:
            return name
    return clipping.CONTROL.name


# the spec's amplitude_control word -> the control plug-in it names
_SPEC_CONTROLS = {"diode": "diode-limiter", "jfet-agc": "jfet-agc"}


def _misfit(topo, spec) -> tuple[str, str] | None:
    """(field, why) when ``spec`` asks of topology ``topo`` what it does not offer (an
    output stage, a supply kind, a second output, a control at a port it lacks), else
    None."""
    if spec.output_stage != "auto" and spec.output_stage not in topo.stages:
        return "output_stage", (f"'{spec.output_stage}' is not offered by the {topo.title} (it offers "
                                f"{', '.join(topo.stages)})")
    if spec.supply.kind not in topo.supplies:
        return "supply", f"'{spec.supply.kind}' supply is not offered by the {topo.title} (it takes " \
                         f"{', '.join(topo.supplies)})"
    for key in ("load_cosine", "quadrature"):
        if getattr(spec, key) is not None and not topo.outputs:
            return key, f"applies to a topology with a second output (quadrature); the {topo.title} has one"
    ctl = CONTROLS.get(_SPEC_CONTROLS.get(spec.amplitude_control, ""))
    if ctl is not None and spec.supply.kind not in getattr(ctl, "supplies", SUPPLY_KINDS):
        return "amplitude_control", f"'{spec.amplitude_control}' needs a {' or '.join(ctl.supplies)} supply"
    if ctl is not None and ctl.port not in topo.ports:
        return "amplitude_control", f"'{spec.amplitude_control}' needs a '{ctl.port}' port, which the {topo.title} " \
                                    f"lacks"
    return None


def fitting_topologies(spec) -> tuple[str, ...]:
    """The topologies ``spec`` can be built with (for ``topology: auto``)."""
    return tuple(name for name, topo in TOPOLOGIES.items() if _misfit(topo, spec) is None)


def check_spec(spec) -> None:
    """Refuse a spec whose topology the registry does not hold, or that asks of its
    topology what it does not offer (:func:`_misfit`), naming the line; 'auto' needs one
    topology that fits."""
    def fail(field: str, message: str) -> SpecError:
        return SpecError(message, source=spec.source, line=spec.line_of(field), field=field)

    if spec.topology == "auto":
        if not fitting_topologies(spec):
            field, why = next(m for t in TOPOLOGIES.values() if (m := _misfit(t, spec)) is not None)
            raise fail("topology", f"'auto' finds no topology that fits: {', '.join(TOPOLOGIES)} each refuse "
                                   f"(e.g. '{field}' {why})")
        return
    if spec.topology not in TOPOLOGIES:
        raise fail("topology", f"must be one of {', '.join(TOPOLOGIES)} or auto (got '{spec.topology}')")
    misfit = _misfit(TOPOLOGIES[spec.topology], spec)
    if misfit is not None:
        raise fail(*misfit)


def make_circuit(topology_name: str, control_name: str, values: dict, parts: dict, *, stage: str = "none",
                 supply_kind: str = "dual") -> Circuit:
    """A circuit from plug-in names, values by role (ohm, F; zero values of optional
    slots dropped) and catalog records by role."""
    vals = {k: float(v) for k, v in values.items() if v}
    return Circuit(TOPOLOGIES[topology_name], CONTROLS[control_name], Values(vals),
                   Values({k: v for k, v in parts.items() if v is not None}), stage, supply_kind)


# -- assembly -----------------------------------------------------------------------------------

def build_netlist(c: Circuit, cond: Conditions, *, kick_v: float = 0.01) -> Netlist:
    """The circuit of ``c`` at ``cond`` as elements (see :mod:`partpick.physics.netlist`):
    supplies and bias, the topology's core, the control at its port, the output stage
    and load. A kick of charge C * kick_v into the topology's kick node at t = 0 starts
    the oscillation from the DC operating point."""
    els, ref, neg = periphery.supplies(c, cond)
    core = c.topology.netlist(c, ref, neg)
    els += list(core.elements)
    a, b = core.ports[c.control.port]
    els += c.control.netlist(c, a, b, {"out": core.out, "ref": ref, "vcc": "vcc", "neg": neg})
    out_els, load = periphery.output(c, cond, core.out, ref, neg)
    els += out_els
    probes = {"osc": core.out, "load": load}
    for name, node in core.outputs.items():
        # a further output drives the operating point's second load straight
        probes[name] = node
        if not math.isinf(cond.load2_r_ohm):
            els.append(Resistor("RLOAD2", node, "0", cond.load2_r_ohm))
        if cond.load2_c_f > 0:
            els.append(Capacitor("CLOAD2", node, "0", cond.load2_c_f))
    f_hint = c.f0_hz
    els.append(Kick("IKICK", core.kick_node, core.kick_cap_f * kick_v, 0.0, 0.02 / f_hint))
    return Netlist(
        title=f"partpick {c.topology.title}, f0 {f_hint:.6g} Hz",
        elements=tuple(els),
        temp_k=cond.temp_k,
        f_hint_hz=f_hint,
        probes=probes,
    )


def build_loop(c: Circuit, cond: Conditions, w_ref: float | None = None) -> Loop:
    """The loop of ``c`` at ``cond``, seen from its control's port."""
    return c.topology.loop(c, cond, w_ref)


def branch(c: Circuit, temp_k: float, cond: Conditions | None = None) -> Branch:
    """The control branch of ``c`` at temp_k (K) (at rest, under ``cond`` when the rest
    state depends on the supply)."""
    return c.control.branch(c, temp_k, cond)


def linear(c: Circuit, cond: Conditions, loop: Loop | None = None) -> LinearResult:
    """Poles, startup, margin and marginal frequency of ``c`` at ``cond``."""
    return analyse_linear(loop or build_loop(c, cond), branch(c, cond.temp_k, cond))


def balance(c: Circuit, cond: Conditions, lin: LinearResult, *, loop: Loop | None = None,
            start: BalanceResult | None = None, kmax: int = 21) -> BalanceResult | None:
    """The settled oscillation of ``c`` at ``cond`` as its amplitude control finds it
    (harmonic balance for a limiter); None when the control sets no amplitude (then the
    op-amp's swing does, and the transient simulation must answer)."""
    if not lin.starts or not math.isfinite(lin.marginal_g_s):
        return None
    return c.control.balance(c, cond, loop or build_loop(c, cond), lin, kmax=kmax, start=start)


_SETTLED: dict = {}   # settled(): the nominal point of a candidate is analysed when it is refined and verified
_SMALL: dict = {}     # small_signal(): a supply corner's loop is the nominal point's where no plug-in reads the supply


def _kept(memo: dict, key, make):
    """memo[key], made once (None: not kept); a memo of a few hundred circuits at most."""
    if key is not None and key in memo:
        return memo[key]
    got = make()
    if key is not None:
        if len(memo) > 256:
            memo.clear()
        memo[key] = got
    return got


def small_signal(c: Circuit, cond: Conditions) -> tuple:
    """(loop, linear result) of ``c`` at ``cond``; where neither the topology's loop nor
    the control's branch at rest reads the supply (their ``reads_supply``; undeclared
    counts as reading it), kept per process under the point less its supply: the
    supply corners of verification are the nominal point's loop, only the op-amp's
    swing, which the balance judges at the corner's rails, differs."""
    free = not (getattr(c.topology, "reads_supply", True) or getattr(c.control, "reads_supply", True))

    def make():
        loop = build_loop(c, cond)
        return loop, linear(c, cond, loop)

    return _kept(_SMALL, (c, replace(cond, supply_v=0.0)) if free else None, make)


def settled(c: Circuit, cond: Conditions, start: BalanceResult | None = None) -> tuple:
    """(loop, linear result, settled oscillation) of ``c`` at ``cond``: small_signal and
    balance (None where it does not start); without a ``start``, kept per process (a
    candidate's nominal point is analysed again when it is verified, unchanged by the
    refinement in a quarter of the candidates: measured on four requirements)."""
    def make():
        loop, lin = small_signal(c, cond)
        return loop, lin, balance(c, cond, lin, loop=loop, start=start)

    return _kept(_SETTLED, (c, cond) if start is None else None, make)


def input_cap_shift(c: Circuit, cap_f: float) -> tuple[str, float] | None:
    """(role, relative change of the textbook frequency) with cap_f (F) more across the
    topology's ``input_cap_role``, the frequency-setting capacitor that an op-amp input
    node shares (its input capacitance and the board's add to it); None for a topology
    without one (op-amp inputs at virtual grounds)."""
    role = c.topology.input_cap_role
    if role is None or c.value(role) <= 0:
        return None
    return role, c.with_values(**{role: c.value(role) + cap_f}).f0_hz / c.f0_hz - 1


def log_sensitivities(values, fn, roles=None, h: float = 1e-6) -> dict[str, float]:
    """d ln fn / d ln value of each role (central differences of step h, relative),
    for the roles where it is not zero: the direction each part's tolerance moves fn.
    ``values`` maps role -> value; ``fn`` is one of a topology's equations."""
    base = dict(values)
    out: dict[str, float] = {}
    for role in roles if roles is not None else tuple(base):
        v = base[role]
        up = float(fn({**base, role: v * (1 + h)}))
        dn = float(fn({**base, role: v * (1 - h)}))
        s = (math.log(up) - math.log(dn)) / (math.log1p(h) - math.log1p(-h))
        if abs(s) > 1e-9:
            out[role] = s
    return out


def margin_fn(topo, port: str | None = None, g_s: float = 0.0):
    """The ideal-op-amp loop-gain ratio gain / required gain as a function of values;
    with g_s (S) the conductance a control adds at ``port`` at rest."""
    if g_s:
        return lambda v: topo.port_gain(v, port, g_s) / topo.required_gain(v)
    return lambda v: topo.gain(v) / topo.required_gain(v)


def rest_conductance(c: Circuit) -> float:
    """The conductance (S) the amplitude control of ``c`` adds at its port at rest (0
    for a control that does not conduct at small signal)."""
    rest = getattr(c.control, "rest_conductance", None)
    return rest(c) if rest is not None else 0.0
