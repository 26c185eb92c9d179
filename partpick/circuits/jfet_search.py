"""The JFET control's search hook: complete control designs for the search to place.

Contract of :func:`search_designs` (``spec, catalog, topology, f_hz, gain_family,
temps_k, *, opamp=None, amps_v=None, linearise=(True, False)``):

- one :class:`~partpick.circuits.options.ControlDesign` per JFET family the spec
  allows, oscillator amplitude of ``amps_v`` (V peak at the oscillator output; default
  the spec's amplitude at the load, for an output stage of gain one) and gate network
  of ``linearise`` (True: the two equal resistors that feed half the drain-source
  voltage to the gate; False: the gate resistor alone) for which the design rule
  (:func:`partpick.circuits.jfet_design.design`) finds a design meeting the THD share and
  the settling limit; the others are left out (no design, no entry);
- made with the cheapest allowed diode (detector, clamp and, when the detector's drift
  needs it, the compensating diode), every resistor from ``gain_family`` (a resistor
  family record), capacitors from the spec's allowed families, and, when the supply has a
  range, the cheapest allowed voltage reference below 80 % of the minimum supply (a
  fixed supply feeds the reference divider itself);
- judged on ``topology``'s equal-arm reference network at f_hz (Hz) with Rg as the arm
  resistance and ``opamp`` (a catalog op-amp record; default: the cheapest allowed one
  whose supply range covers the spec's) as the oscillator's op-amp and the integrator's
  channel, at the middle of the supply range and the temperatures temps_k (min, nominal,
  max, K);
- the fields (:class:`~partpick.circuits.options.ControlDesign`): the control's slots
  (role, value, family or part id), the gain network (the topology's ``gain_values``,
  of gain_family), amp_v at the three temperatures, thd, pull, amp_per_excess,
  amp_spread (3 sigma), settle_s, channels, margin and start_loss.

A design costs one to three seconds of physics (the design rule's iterations, then the
figures here); each is stored in the cache folder (:mod:`partpick.cache`) under the
content of everything it depends on (parts, target, topology, frequency), so a second
run, or another spec with the same target, takes milliseconds. Refused designs are
stored too. The designs not in the cache are made at once over the CPUs
(:func:`partpick.forked.fork_map`): each depends only on its own choice.
"""

from __future__ import annotations

import math
import numpy as np

from partpick.cache import content_key, load_arrays, part_content, store_arrays
from partpick.circuits.base import Conditions
from partpick.circuits.jfet_design import design, target_for, weakest
from partpick.circuits.options import ControlDesign, allowed_families, z_of
from partpick.forked import fork_map

__all__ = ["search_designs", "default_opamp", "amplitude_share_bound", "CACHE_KIND", "STAGE_ALLOWANCE"]

CACHE_KIND = "jfet-design"
_VERSION = "jfet-design-3"      # bump when the design rule or the figures change meaning
_FIGURES = ("amp_min", "amp_nom", "amp_max", "thd", "pull", "amp_per_excess", "amp_spread", "settle_s", "channels",
            "margin", "start_loss")
_NUDGE = 0.005                  # Rf raised by this share for d ln(amplitude) / d(gain excess)
# the output stages a designed control is placed with are of gain one (a follower, or the
# oscillator straight at the load): the load's amplitude is the oscillator's times at
# least 1 / STAGE_ALLOWANCE (a loaded follower's gain just under one)
STAGE_ALLOWANCE = 1.05


def default_opamp(spec, catalog):
    """The cheapest allowed op-amp whose supply range covers the spec's, or None."""
    s = spec.supply
    fit = [op for op in allowed_families(spec, catalog, "opamps")
           if op.supply_min_v <= s.span_min_v and op.supply_max_v >= s.span_max_v]
    return min(fit, key=lambda op: (op.price_unit, op.id)) if fit else None


def _diode(spec, catalog):
    """The diode every design is made with (detector, clamp, compensation): the cheapest
    allowed one, or None."""
    diodes = allowed_families(spec, catalog, "diodes")
    return min(diodes, key=lambda d: (d.price_unit, d.id)) if diodes else None


def amplitude_share_bound(spec, catalog) -> float:
    """An upper bound (fraction) of the builds whose amplitude at the load can lie
    within the spec's tolerance, for every design :func:`search_designs` makes: the
    rule always designs the integrator, so the amplitude is the reference's plus the
    detector's drop, and the Monte Carlo draws that drop's part-to-part spread as a
    normal of sigma vf_spread / 3 (:mod:`partpick.circuits.jfet_spread`), volt for volt
    and independent of everything else it draws. A symmetric unimodal spread added to
    any independent rest lands in a fixed window no more often than alone and centred
    (Anderson's theorem: T. W. Anderson, Proc. AMS 6, 1955), so the share is at most
    erf(h / (sigma sqrt 2)) with h the band's half-width (tolerance times target, V)
    carried back to the oscillator (STAGE_ALLOWANCE). 1 when no diode is allowed (the
    hook designs nothing then anyway)."""
    detector = _diode(spec, catalog)
    if detector is None:
        return 1.0
    sigma = detector.vf_spread_v / 3.0
    if sigma <= 0:
        return 1.0
    half = STAGE_ALLOWANCE * spec.amplitude.tolerance_frac * spec.amplitude.peak_v
    return math.erf(half / (sigma * math.sqrt(2.0)))


def search_designs(spec, catalog, topology, f_hz: float, gain_family, temps_k, *, opamp=None, amps_v=None,
                   linearise=(True, False)) -> tuple[ControlDesign, ...]:
    """Control designs for the search (see module docstring for the contract), in the
    order JFET family, amplitude, linearised first."""
    opamp = opamp or default_opamp(spec, catalog)
    diode = _diode(spec, catalog)
    jfets = allowed_families(spec, catalog, "jfets")
    if opamp is None or diode is None or not jfets:
        return ()
    ref = None
    if spec.supply.min_v != spec.supply.max_v:
        usable = [r for r in allowed_families(spec, catalog, "references") if r.voltage_v < 0.8 * spec.supply.min_v]
        if not usable:
            return ()
        ref = min(usable, key=lambda r: (r.price_unit, r.id))
    cfams = [c for c in allowed_families(spec, catalog, "capacitors") if "electrolytic" not in c.dielectric.lower()]
    z = z_of(spec)
    choices = [(topology, target_for(spec, f_hz, amp, gain_family, z, temps_k), jfet, diode, ref, gain_family, cfams,
                opamp, lin) for jfet in jfets for amp in amps_v or (spec.amplitude.peak_v,) for lin in linearise]
    found = [load_arrays(CACHE_KIND, _key(*c)) for c in choices]
    # the designs not in the cache are independent: made at once over the CPUs
    made = iter(fork_map(_made, [c for c, got in zip(choices, found) if got is None]))
    out = [_from_arrays(got) if got is not None else next(made) for got in found]
    return tuple(d for d in out if d is not None)


def _key(topology, tgt, jfet, diode, ref, rfam, cfams, opamp, lin: bool) -> str:
    return content_key(_VERSION, topology.name, tgt, part_content(jfet, ("description",)),
                       part_content(diode, ("description",)), part_content(ref, ("description",)) if ref else None,
                       part_content(rfam, ("description",)), [part_content(c, ("description",)) for c in cfams],
                       part_content(opamp, ("description",)), lin)


def _made(choice: tuple) -> ControlDesign | None:
    """The design for one choice (topology, target, jfet, diode, reference, resistor
    family, capacitor families, op-amp, linearised), made and stored in the cache."""
    topology, tgt, jfet, diode, ref, rfam, cfams, opamp, lin = choice
    d = design(topology, tgt, jfet, diode, ref, rfam, cfams, opamp, linearise=lin)
    made = _figures(topology, tgt, d, rfam, lin) if d.ok else None
    store_arrays(CACHE_KIND, _key(*choice), _to_arrays(made, d.why))
    return made


def _figures(topology, tgt, d, rfam, lin: bool) -> ControlDesign | None:
    """What the control's physics predicts for design ``d`` on the reference network
    (see :class:`~partpick.circuits.options.ControlDesign`); None when it no longer
    settles at a temperature end."""
    from partpick.circuits import linear
    from partpick.circuits.jfet_agc import CONTROL, solved

    parts = d.parts
    gv = {k: d.values[k] for k in topology.gain_values(1.0, 1.0)}
    own = {k: v for k, v in d.values.items() if k not in gv}

    def circuit(jfet=None):
        p = {**parts, "jfet": jfet} if jfet is not None else parts
        return topology.reference(tgt.f_hz, gv, parts["opamp"], CONTROL.name, p, own)

    supply_v = 0.5 * (tgt.supply[1] + tgt.supply[2])
    conds = [Conditions(supply_v, t, math.inf) for t in tgt.temps_k]
    c = circuit()
    runs = [solved(c, cond) for cond in conds]
    if any(r[2] is None for r in runs):
        return None
    loop, lin_nom, hb, _ = runs[1]
    # the amplitude's slope in the gain excess: the topology's gain raised a little (its
    # gain at rest with the control's rest conductance)
    up = topology.nudge_gain(c, _NUDGE)
    hb_up = solved(up, conds[1])[2]
    slope = math.log(hb_up.osc_peak_v / hb.osc_peak_v) / math.log(up.gain / c.gain) if hb_up is not None else 0.0
    margin = math.log1p(lin_nom.margin)
    weak = linear(circuit(jfet=weakest(parts["jfet"])), conds[2])
    start_loss = margin - math.log1p(max(weak.margin, -0.999))
    slots = tuple((r, float(v), d.families.get(r, rfam.id)) for r, v in own.items())
    slots += tuple((r, 0.0, p.id) for r, p in parts.items() if r != "opamp")
    words = [f"JFET {parts['jfet'].id}", "linearised gate" if lin else "gate resistor only", "PI integrator",
             f"reference {parts['vref'].id}" if "vref" in parts else "divider from the positive rail"]
    if "comp" in parts:
        words.append("compensating diode")
    return ControlDesign(
        CONTROL.name, slots, rfam.id, tuple((k, float(v)) for k, v in gv.items()),
        tuple(float(r[2].osc_peak_v) for r in runs), float(hb.osc_thd),
        math.log(hb.freq_hz / lin_nom.marginal_hz), slope, CONTROL.amplitude_spread(c, tgt.temps_k[1], conds[1]),
        float(d.settle_s), CONTROL.op_channels(r for r, _, _ in slots), margin, start_loss, ", ".join(words))


# -- the cache's form: numpy arrays (no pickles) ---------------------------------------------

def _to_arrays(d: ControlDesign | None, why: str) -> dict[str, np.ndarray]:
    if d is None:
        return {"why": np.array([why or "no settled oscillation at a temperature end"])}
    f = (*d.amp_v, d.thd, d.pull, d.amp_per_excess, d.amp_spread, d.settle_s, d.channels, d.margin, d.start_loss)
    return {
        "control": np.array([d.control]), "note": np.array([d.note]), "gain_family": np.array([d.gain_family]),
        "roles": np.array([r for r, _, _ in d.slots]), "values": np.array([v for _, v, _ in d.slots], float),
        "families": np.array([f_ for _, _, f_ in d.slots]),
        "gain_roles": np.array([r for r, _ in d.gain]), "gain_values": np.array([v for _, v in d.gain], float),
        "figures": np.array(f, float),
    }


def _from_arrays(a: dict[str, np.ndarray]) -> ControlDesign | None:
    if "figures" not in a:
        return None
    f = dict(zip(_FIGURES, a["figures"].tolist()))
    return ControlDesign(
        str(a["control"][0]),
        tuple((str(r), float(v), str(fam)) for r, v, fam in zip(a["roles"], a["values"], a["families"])),
        str(a["gain_family"][0]), tuple((str(r), float(v)) for r, v in zip(a["gain_roles"], a["gain_values"])),
        (f["amp_min"], f["amp_nom"], f["amp_max"]), f["thd"], f["pull"], f["amp_per_excess"], f["amp_spread"],
        f["settle_s"], int(f["channels"]), f["margin"], f["start_loss"], str(a["note"][0]))

