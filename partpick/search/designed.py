"""Candidates with an amplitude control that designs itself (a control plug-in with a
``search_designs`` hook, such as the JFET control): the control's hook returns complete
control designs (its slots and the gain network it needs, with what its physics
predicts on the topology's equal-arm reference network); the search places each one
on every arm family pair's arm sets and output stages and estimates the yield.

A control that holds the amplitude to a reference absorbs a small difference in the
arms' required gain (the integrator moves the control's resistance), so the arm set is
the cheapest of the required-gain bins near the reference network's gain (within a
quarter of the design's start margin) whose frequency, with the op-amp's and the
control's pull, lands within the frequency resolution of the target; else the nearest
of the reference bin. The output stages are those of gain one (the control's amplitude
target is the load's). Costs are exact (:func:`partpick.pricing.bom_cost` of the
candidate's BOM); verification decides.

Designing a control costs one to several seconds of physics the first time (its hook
caches by content), so the search bounds what it asks the hook for: the cheapest
screened op-amp with two or more channels (the control takes one for its integrator)
whose designs fit an arm set (the next two tried in price order when its designs fit
none; none when the rule designs nothing for the cheapest)
and one gain family (:func:`_gain_families`); every allowed JFET, both gate networks;
and nothing at all when the control's parts alone cap the share of builds that can hold
the amplitude tolerance below the yield asked (the control's ``amplitude_share_bound``).
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np

from partpick.search.candidates import Candidate, on_shelf
from partpick.search.enumerate import SIMPSON
from partpick.search.problem import m_sigma, r_limits
from partpick.search.estimate import below_share, frequency_share, phi
from partpick.circuits.jfet_design import THD_AIM
from partpick.search.tables import K_BIN, STAGE_RATIO
from partpick.physics.opamp import linear_peak_v

__all__ = ["DesignedBatch", "designed_batch", "OPAMPS", "THD_SPREAD"]

OPAMPS = 1            # op-amps the hook designs for (cheapest first) ...
TRIES = 3             # ... out of at most this many tried
THD_SPREAD = 0.3      # relative spread (1 sigma) of a designed control's THD over builds, assumed


class DesignedBatch:
    """Candidates of one control with a design hook, in the Batch interface the pipeline's
    pool reads (``keys`` and ``candidate``)."""

    def __init__(self, cands: list[Candidate]) -> None:
        self.cands = cands

    def __len__(self) -> int:
        return len(self.cands)

    def keys(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        k = [c.key() for c in self.cands]
        return tuple(np.array([x[i] for x in k], float) for i in range(3))

    def candidate(self, i: int) -> Candidate:
        return self.cands[i]

    def kinds(self) -> list[tuple]:
        return [c.kind() for c in self.cands]

    @property
    def y(self) -> np.ndarray:
        return np.array([c.yield_est for c in self.cands])

    @property
    def cost(self) -> np.ndarray:
        return np.array([c.cost for c in self.cands])

    @property
    def thd(self) -> np.ndarray:
        return np.array([c.thd for c in self.cands])


def _opamps(problem) -> list:
    """The op-amps the hook designs for: the cheapest screened ones with a channel for
    the control's integrator."""
    ops = sorted((o for o in problem.ops if o.opamp.channels >= 2), key=lambda o: (o.opamp.price_unit, o.id))
    return ops[:TRIES]


def _gain_families(problem) -> list:
    """The gain family the hook designs with: the cheapest of 1 % or better (the
    control's start margin is planned against the gain network's tolerance), else the
    tightest allowed."""
    fams = list(problem.r_families)
    tight = [f for f in fams if f.tolerance_frac <= 0.01]
    if tight:
        return [min(tight, key=lambda f: (f.price_unit, f.id))]
    return [min(fams, key=lambda f: (f.tolerance_frac, f.price_unit, f.id))] if fams else []


def designed_batch(searcher, ctl, bom_cost) -> DesignedBatch | None:
    """Every placed control design of ``ctl`` for the searcher's problem (see module
    docstring); ``bom_cost(candidate) -> cost per board`` prices a candidate exactly."""
    p = searcher.problem
    topo = p.topology
    spec = p.spec
    kinds = [k for k in searcher.kinds if k not in STAGE_RATIO]   # the stages of gain one
    k_ref = math.log(topo.reference_required_gain)
    bound = getattr(ctl, "amplitude_share_bound", None)
    if bound is not None and bound(spec, p.catalog) < p.y_min:
        return None   # its parts' spread alone breaks the yield: no design is worth its seconds
    out: list[Candidate] = []
    for op in _opamps(p):
        # the stages are of gain one: the oscillator swings (and slews) the load's peak; one
        # that slews cannot give the clean sine this control is for, and its verification
        # would need a transient run of the slow control loop (tens of seconds)
        osc_max = min(op.swing_v, linear_peak_v(op.opamp, spec.frequency.target_hz))
        if p.amp_v > osc_max:
            continue
        made = 0
        for gf in _gain_families(p):
            designs = ctl.search_designs(spec, p.catalog, topo, searcher.f_t, gf, p.temps_k, opamp=op.opamp)
            made += len(designs)
            for d in designs:
                if max(d.amp_v) > osc_max:
                    continue
                for c in _placed(searcher, op, gf, d, kinds, k_ref):
                    if p.shelf is None or on_shelf(c, p.shelf, spec.builds):
                        out.append(c)
        if len({c.parts["opamp"] for c in out}) >= OPAMPS or not made:
            break   # the next op-amp is tried only when the cheaper ones' designs fit no arm set
            # (not when the rule designs nothing at all: a bound on the seconds each design
            # costs, for a refusal's sake; there the target or the JFETs bind more often than
            # the op-amp)
    if not out:
        return None
    priced = [replace(c, cost=bom_cost(c)) for c in out]
    best: dict = {}
    for c in sorted(priced, key=Candidate.key):
        best.setdefault(c.signature, c)      # the best of each configuration
    return DesignedBatch(sorted(best.values(), key=Candidate.key))


def _placed(searcher, op, gf, d, kinds, k_ref: float) -> list[Candidate]:
    """Design ``d`` on the cheapest fitting arm set of every family pair, for each stage
    kind."""
    p = searcher.problem
    target = p.ln_f - op.pull - d.pull
    ref_bin = int(round(k_ref / K_BIN))
    r_lo, r_hi = r_limits(op.opamp, p.spec.derating)
    span = max(0, int(0.25 * max(d.margin - d.start_loss, 0.0) / K_BIN))
    bins = np.arange(ref_bin - span, ref_bin + span + 1)
    out = []
    for rfa, cfa, table, index, drift, _ in searcher.pairs:
        res = max(table.sigma_lnf, 2e-4)
        arms = index.cheapest(bins, np.full(bins.shape, target - res), np.full(bins.shape, target + res))
        arms = arms[arms >= 0]
        if arms.size:
            cost = index.cost[index.rank[arms]]
            arm = int(arms[np.argmin(cost)])
        else:
            arm = int(index.nearest(np.array([ref_bin]), np.array([target]))[0])
            if arm < 0:
                continue
        arm_r = table.values[arm][[i for i, r in enumerate(table.roles) if table.families[i] == rfa.id]]
        if arm_r.size and not (r_lo <= arm_r.min() and arm_r.max() <= r_hi):
            continue   # arms the op-amp's output or bias current cannot serve
        err = float(table.ln_f0[arm] - target)
        ln_k = float(table.ln_k[arm])
        values = {**dict(zip(table.roles, (float(v) for v in table.values[arm]))), **d.values()}
        families = {**dict(zip(table.roles, table.families)), **d.families()}
        parts = {"opamp": op.id, **{r: f for r, v, f in d.slots if not v}}
        s_m = float(m_sigma(p, gf, np.asarray(math.exp(k_ref)), float(table.sigma_lnk[arm]), op.loss,
                            op.opamp.gbw_spread_frac))
        margin = d.margin - (ln_k - k_ref) - d.start_loss
        s_a = math.hypot(d.amp_per_excess * s_m, d.amp_spread / 3, p.amp_sigma)
        # the amplitude check's band is (1 -/+ tol) times the target: asymmetric in ln
        lo, hi = math.log1p(-min(p.tol_a, 0.999)), math.log1p(p.tol_a)
        amp_share = sum(w * float(phi((hi - math.log(a / p.amp_v)) / s_a) - phi((lo - math.log(a / p.amp_v)) / s_a))
                        for a, w in zip(d.amp_v, SIMPSON))
        y = (float(frequency_share(np.array([err]), table.sigma_lnf, drift, p.tol_f)[0]) * float(phi(margin / s_m))
             * float(below_share(np.array([d.thd]), np.array([THD_SPREAD * d.thd]), p.thd_max)[0]) * amp_share)
        if not math.isfinite(y) or y <= 0 or d.thd > THD_AIM * p.thd_aim:   # (what its design rule aims at)
            continue
        for kind in kinds:
            sig = (op.id, d.control + ":" + parts.get("jfet", ""), rfa.id, cfa.id, gf.id, kind, "",
                   d.note)
            out.append(Candidate(sig, values, families, parts, kind, err, tuple(d.amp_v), d.amp_v[1], d.thd,
                                 margin, y, 0.0, d.amp_per_excess, 0.0, d.pull, simulated=True, control=d.control,
                                 freq_sigma=p.freq_sigma(rfa, cfa)))
    return out
