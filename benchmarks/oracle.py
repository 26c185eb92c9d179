"""The coverage oracle: a brute-force Wien-bridge designer that shares no code with
partpick's search (``partpick/search``) or the circuit plug-ins' search hooks, and says
of one requirement "a design exists" (with a BOM partpick's own verifier passes) or
"none found".

How: the sweep (``oracle_sweep.py``: textbook arms, Rg near 10 kohm and a sweep of Rf,
every allowed limiter behind a sweep of Rd, every output stage with a sweep of its
ratio, every allowed op-amp) ranked by the oracle's own textbook estimates
(``oracle_physics.py``); then the most promising candidates are judged one at a time
by ``partpick.pipeline.evaluate_bom`` at a reduced Monte Carlo sample count, as a bench
engineer would build and measure: what a judged candidate measures (its frequency, its
amplitude at the load, its THD) calibrates the estimates of the ones not yet judged,
and a candidate that misses is trimmed up to four times (arms retuned to the measured
frequency, the output stage's ratio to the measured amplitude, the gain network's excess
down when THD misses and up when too few builds start, bisecting between the two once
both are seen, with (Rg, Rf) pairs finer than one series step) and judged again. A candidate
that passes is judged again at the full sample count. Once one passes, up to
``cost_evals`` more judgements go to the cheapest candidates (by the exact BOM cost of the
price list) whose estimates pass, so the BOM returned is the cheapest passing one found.
Bounded: at most ``max_evals`` judgements to the first pass and ``max_seconds`` per
requirement.

Run one spec: python benchmarks/oracle.py SPEC.yaml [--evals N]
"""

from __future__ import annotations

import argparse
import importlib.util
import math
import sys
import time
from collections import Counter
from dataclasses import dataclass, field, replace
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(Path(__file__).resolve().parent))
if importlib.util.find_spec("partpick") is None:   # not installed: the checkout's own
    sys.path.insert(0, str(ROOT))

from oracle_physics import harmonic_ratio, limiter_curve, loop_solution, pair_small_signal  # noqa: E402
from oracle_model import Design, Problem, combine, nearest_values, values_of  # noqa: E402
from oracle_stage import coupling_gain, stage_options, with_stage  # noqa: E402
from oracle_sweep import retune_arms, rf_for_excess, sweep  # noqa: E402
from partpick import units  # noqa: E402
from partpick.bom import parse_bom  # noqa: E402
from partpick.pipeline import evaluate_bom  # noqa: E402
from partpick.pricing import bom_cost  # noqa: E402
from partpick.spec import OUTPUT_STAGES, Spec  # noqa: E402

__all__ = ["OracleResult", "oracle_design", "available_stages", "bom_text", "LOW_SAMPLES", "FULL_SAMPLES"]

LOW_SAMPLES = 4000
FULL_SAMPLES = 20000
SEED = 1
MAX_EVALS = 40
MAX_SECONDS = 40.0
TRIMS = 4
COST_EVALS = 16         # judgements spent looking for a cheaper BOM once one passes
COSTED = 600            # candidates (best estimates first) whose exact BOM cost is looked at


def available_stages() -> tuple[str, ...]:
    """The output stages partpick's spec format offers (feature detection: the
    buffered attenuator is used only where partpick has it)."""
    return tuple(s for s in OUTPUT_STAGES if s != "auto")


@dataclass
class OracleResult:
    """The oracle's label for one requirement: ``exists`` with the passing BOM (YAML)
    and its verified figures, or ``none found`` with the nearest miss."""

    label: str
    bom_yaml: str | None = None
    evaluations: int = 0
    seconds: float = 0.0
    figures: dict = field(default_factory=dict)
    notes: dict = field(default_factory=dict)

    def to_json(self) -> dict:
        return {"label": self.label, "bom": self.bom_yaml, "evaluations": self.evaluations,
                "seconds": round(self.seconds, 2), "figures": self.figures, "notes": self.notes}

    @classmethod
    def from_json(cls, d: dict) -> "OracleResult":
        return cls(d["label"], d.get("bom"), d.get("evaluations", 0), d.get("seconds", 0.0), d.get("figures", {}),
                   d.get("notes", {}))


# -- BOM text -------------------------------------------------------------------------------------

def _val(x: float, dim: str) -> str:
    return units.format_rkm(float(f"{x:.4g}"), dim)


def bom_text(p: Problem, d: Design, bias: tuple) -> str:
    """The candidate as a BOM in partpick's YAML form (what ``partpick check`` reads)."""
    a = d.arms
    lines = [("rs", a.rfam, a.rs, "resistance"), ("cs", a.cfam, a.cs, "capacitance"),
             ("rp", a.rfam, a.rp, "resistance"), ("cp", a.cfam, a.cp, "capacitance"),
             ("rg", d.gfam, d.rg, "resistance"), ("rf", d.gfam, d.rf, "resistance")]
    if d.rd > 0:
        lines.append(("rd", d.rdfam, d.rd, "resistance"))
    lines += [("limiter", d.limiter, 0.0, ""), ("opamp", d.opamp, 0.0, "")]
    if d.stage in ("gain", "attenuator", "buffered-attenuator"):
        lines += [("stage_ra", d.sfam, d.ra, "resistance"), ("stage_rb", d.sfam, d.rb, "resistance")]
    for role, fam, v in bias:
        lines.append((role, fam, v, "resistance" if role.startswith("bias_") and not role.endswith("_c")
                      else "capacitance"))
    out = ["topology: wien-bridge", f"supply: {p.spec.supply.kind}", f"stage: {d.stage}", "parts:"]
    for role, fam, v, dim in lines:
        value = f", value: {_val(v, dim)}" if dim else ""
        out.append(f"  - {{role: {role}, family: {fam}{value}}}")
    return "\n".join(out) + "\n"


# -- what a judgement says ------------------------------------------------------------------------

def failures(r, spec) -> set[str]:
    """The kinds of requirement a verified candidate misses: startup, frequency,
    amplitude, thd, swing or limit (op-amp limits), from its failed checks and, for a
    failed yield, the Monte Carlo shares below the yield asked for."""
    out = set()
    for c in r.verdict.checks:
        if c.passed:
            continue
        name = c.name.lower()
        if "yield" in name and "startup" not in name:
            out |= _yield_culprits(r, spec) or {"yield"}
        elif "startup" in name:
            out.add("startup")
        elif "frequency" in name:
            out.add("frequency")
        elif "amplitude" in name:
            out.add("amplitude")
        elif "thd" in name:
            out.add("thd")
        elif "swing" in name:
            out.add("swing")
        else:
            out.add("limit")
    return out


def _yield_culprits(r, spec) -> set[str]:
    """The requirements that cost a meaningful share of the yield: the Monte Carlo's
    shares count builds that start and meet each requirement, so startup is a culprit
    when more than a quarter of the allowed loss fails to start, and another
    requirement when it loses more than that among the builds that start."""
    share = getattr(r.mc, "share", None) or {}
    if not share:
        return set()
    allowed = 0.25 * max(1 - spec.yield_min_frac, 1e-4)
    started = share.get("startup", 1.0)
    out = {"startup"} if 1 - started > allowed else set()
    return out | {k for k, v in share.items() if k != "startup" and started - v > allowed}


def _stats(r, name: str):
    stats = getattr(r.mc, "stats", None) or {}
    return stats.get(name)


def measured_center(r, spec, what: str) -> float | None:
    """Where the builds' frequency (Hz) or load amplitude (V peak) is centred: the
    geometric middle of the Monte Carlo's 0.1 and 99.9 % quantiles, else the nominal."""
    s = _stats(r, "frequency_hz" if what == "f" else "amplitude_v")
    if s and s.get("q001", 0) > 0 and s.get("q999", 0) > 0:
        return math.sqrt(s["q001"] * s["q999"])
    err = r.freq_error if what == "f" else r.amp_error
    if not math.isfinite(err):
        return None
    return (spec.frequency.target_hz if what == "f" else spec.amplitude.peak_v) * (1 + err)


def _miss(r) -> tuple[int, float]:
    """How far a verified candidate is from passing: (failed checks, worst relative miss)."""
    failed = [c for c in r.verdict.checks if not c.passed]
    worst = 0.0
    for c in failed:
        lim = c.low if c.low is not None and c.value < c.low else c.high
        if lim:
            worst = max(worst, abs(c.value / lim - 1))
    return len(failed), worst


# -- calibration and trims ------------------------------------------------------------------------

def small_signal(p: Problem, d: Design) -> tuple[float, float]:
    """(f_osc / f0, small-signal margin) the oracle estimates for the design's own values."""
    lim = p.catalog.find("limiters", d.limiter)
    g0, c0 = pair_small_signal(lim)
    op = p.catalog.find("opamps", d.opamp)
    a = d.arms
    rho, margin = loop_solution(op, a.rs, a.cs, a.rp, a.cp, d.rg, np.array([d.rf]), d.rd, c0, g0)
    return float(rho[0]), float(margin[0])


def measured_margin(r) -> float | None:
    """The verifier's small-signal startup margin (its 'startup margin' check)."""
    for c in r.verdict.checks:
        if c.name.lower().startswith("startup margin") and math.isfinite(c.value):
            return float(c.value)
    return None


@dataclass
class Calibration:
    """Measured against estimated, learnt from the candidates judged so far."""

    f: dict = field(default_factory=dict)       # (op-amp, limiter) -> f measured / f estimated
    margin: dict = field(default_factory=dict)  # (op-amp, limiter) -> margin measured - estimated
    a: dict = field(default_factory=dict)       # (limiter, Rd) -> oscillator amplitude measured / estimated
    thd: dict = field(default_factory=dict)     # limiter -> THD measured / estimated

    def learn(self, p: Problem, d: Design, r) -> None:
        rho, margin = small_signal(p, d)
        if math.isfinite(r.freq_error) and math.isfinite(rho):
            self.f[(d.opamp, d.limiter)] = p.f_hz * (1 + r.freq_error) / (d.arms.f0 * rho)
        m = measured_margin(r)
        if m is not None and margin > -1:
            self.margin[(d.opamp, d.limiter)] = m - margin
        est, thd = osc_estimate(p, d, with_thd=True)
        if math.isfinite(r.amp_error) and math.isfinite(est) and est > 0:
            load = p.spec.amplitude.peak_v * (1 + r.amp_error)
            osc = load / (d.get("stage_ratio", 1.0) * d.get("coupling", 1.0))
            self.a[(d.limiter, d.rd)] = osc / est
        if math.isfinite(r.thd) and math.isfinite(thd) and thd > 0:
            self.thd[d.limiter] = r.thd / thd


def restage(p: Problem, d: Design, bias: tuple, osc_scale: float) -> Design:
    """``d`` with its oscillator amplitude estimate scaled by osc_scale and the output
    stage re-chosen (same kind first) to centre the load amplitude."""
    if abs(math.log(osc_scale)) < 1e-4:
        return d
    est = dict(d.est, ln_vo=d.get("ln_vo") + math.log(osc_scale), ln_vo_nom=d.get("ln_vo_nom") + math.log(osc_scale),
               vo_max=d.get("vo_max") * osc_scale)
    d = replace(d, est=est)
    k_need = p.spec.amplitude.peak_v / (math.exp(d.get("ln_vo")) * coupling_gain(p, bias))
    best, best_key = None, None
    for st in stage_options(p, k_need):
        s = with_stage(p, d, bias, st)
        if s is None:
            continue
        key = (s.stage != d.stage, -round(s.get("m_a"), 2))
        if best_key is None or key < best_key:
            best, best_key = s, key
    return best or d


def retune(p: Problem, d: Design, f_scale: float) -> Design:
    """``d`` with its arms retuned so its frequency moves by 1/f_scale, Rf re-chosen
    to keep the ideal gain excess."""
    if abs(math.log(f_scale)) < 0.1 * p.spec.frequency.tolerance_frac:
        return d
    arms = retune_arms(p, d.arms, d.arms.f0 / f_scale)
    if arms == d.arms:
        return d
    excess = (1 + d.rf / d.rg) / d.arms.gain - 1
    rf = rf_for_excess(p, d.gfam, d.rg, arms.gain, excess)
    return replace(d, arms=arms, rf=rf)


def ideal_excess(d: Design) -> float:
    """The gain network's ideal excess over what the arms need: (1 + Rf/Rg)/G - 1."""
    return (1 + d.rf / d.rg) / d.arms.gain - 1


def set_excess(p: Problem, d: Design, target: float) -> Design:
    """``d`` with the (Rg, Rf) pair of its family nearest the ideal excess ``target``:
    Rg within 15 % of its value, Rf each of the two series values around what the
    target needs (the pairs' ratios are far finer than one series step)."""
    vals = values_of(p.catalog.find("resistors", d.gfam))
    g = d.arms.gain
    best, best_err = d, math.inf
    for rg in vals[(vals >= d.rg / 1.15) & (vals <= d.rg * 1.15)]:
        for rf in nearest_values(vals, max(((1 + target) * g - 1) * rg, vals[0]), 2):
            err = abs((1 + rf / rg) / g - 1 - target)
            if err < best_err:
                best, best_err = replace(d, rg=float(rg), rf=float(rf)), err
    return best


@dataclass
class Bracket:
    """What one candidate's chain of builds learnt about its gain excess: the largest
    that did not start in enough builds, the smallest whose THD was too high."""

    lo: float = 0.0
    hi: float = math.inf


def next_excess(p: Problem, d: Design, r, fails: set[str], br: Bracket) -> float | None:
    """The ideal excess to try next, or None to leave it: halfway into the bracket
    when both ends are known, else scaled by how far THD or startup missed."""
    e = ideal_excess(d)
    if "startup" in fails and "thd" not in fails:
        br.lo = max(br.lo, e)
    elif "thd" in fails and "startup" not in fails:
        br.hi = min(br.hi, e)
    else:
        return None
    if br.lo > 0 and math.isfinite(br.hi):
        return 0.5 * (br.lo + br.hi) if br.hi - br.lo > 2e-4 else None
    if math.isfinite(br.hi):
        return e * min(0.7 * p.spec.max_thd_frac / r.thd, 0.8) if math.isfinite(r.thd) and r.thd > 0 else e * 0.6
    m = measured_margin(r)
    need = 1.5 * p.z * d.get("s_e", 0.003) - (m if m is not None else 0.0)
    return e + max(need, 0.25 * e, 0.002)


def osc_estimate(p: Problem, d: Design, with_thd: bool = False):
    """The oracle's describing-function estimate of the oscillator amplitude (V peak)
    at the nominal temperature for the design's own arms and gain network; with
    ``with_thd``, also its THD estimate (the worst of the nominal and end temperatures)."""
    lim = p.catalog.find("limiters", d.limiter)
    _, margin = small_signal(p, d)
    k = (1 + d.rf / d.rg) / (1 + margin)
    geff = 1.0 / ((k - 1) * d.rg) - 1.0 / d.rf
    curves = [limiter_curve(lim, d.rd, t) for t in p.temps]
    amps = [float(c.amplitude(geff)) for c in curves]
    vo = amps[0] * k / (k - 1)
    if not with_thd:
        return vo
    a = d.arms
    w = 2 * math.pi * p.f_hz
    thd = max(float(harmonic_ratio(c, ab, a.rs, a.cs, a.rp, a.cp, d.rg, d.rf, w)) for c, ab in zip(curves, amps))
    return vo, thd


def trim(p: Problem, d: Design, r, bias: tuple, br: Bracket) -> Design:
    """The next build of a candidate that missed, from what it measured."""
    fails = failures(r, p.spec)
    new = d
    if fails & {"frequency", "yield"}:
        fc = measured_center(r, p.spec, "f")
        if fc:
            new = retune(p, new, fc / p.f_hz)
    target = next_excess(p, new, r, fails, br)
    if target is not None:
        new = set_excess(p, new, target)
    ac = measured_center(r, p.spec, "a")
    changed = (new.rf, new.rg, new.arms) != (d.rf, d.rg, d.arms)
    if ac and (fails & {"amplitude", "yield", "swing"} or changed):
        osc = ac / (d.get("stage_ratio", 1.0) * d.get("coupling", 1.0))
        if changed:
            ratio = osc_estimate(p, new) / osc_estimate(p, d)
            osc = osc * ratio if math.isfinite(ratio) and 0.2 < ratio < 5 else osc
        new = restage(p, new, bias, osc / math.exp(new.get("ln_vo")))
    return new


def calibrated(p: Problem, d: Design, bias: tuple, cal: Calibration) -> Design:
    """A candidate not yet judged, its arms tuned to the oracle's own frequency
    estimate for its values, corrected by what similar candidates measured, and its
    output stage to what their amplitude measured."""
    rho, _ = small_signal(p, d)
    if math.isfinite(rho):
        d = retune(p, d, d.arms.f0 * rho * cal.f.get((d.opamp, d.limiter), 1.0) / p.f_hz)
    a = cal.a.get((d.limiter, d.rd))
    if a:
        d = restage(p, d, bias, a)
    return d


# -- the judge loop -------------------------------------------------------------------------------

def _judge(p: Problem, text: str, samples: int):
    bom = parse_bom(text, "oracle.yaml", p.catalog)
    return evaluate_bom(bom, p.spec, p.catalog, samples=samples, seed=SEED)


def _cheapest(p: Problem, pool: list, bias: tuple, score: np.ndarray, costs: dict, below: float) -> int | None:
    """Index of the cheapest candidate not yet judged whose estimates all pass
    (score > 0, among the ``COSTED`` best) and whose exact BOM cost
    (``partpick.pricing.bom_cost``, the price list, not the search) is below ``below``."""
    best, best_cost = None, below * (1 - 1e-6)
    for i in np.argsort(-score)[:COSTED]:
        if not score[i] > 0:
            break
        if i not in costs:
            costs[i] = bom_cost(parse_bom(bom_text(p, pool[i], bias), "oracle.yaml", p.catalog), p.catalog)[0]
        if costs[i] < best_cost:
            best, best_cost = int(i), costs[i]
    return best


def _figures(r) -> dict:
    return {"freq_error": r.freq_error, "amp_error": r.amp_error, "thd": r.thd, "yield": r.yield_frac,
            "cost": r.cost}


def oracle_design(spec: Spec, catalog, *, max_evals: int = MAX_EVALS, max_seconds: float = MAX_SECONDS,
                  cost_evals: int = COST_EVALS, stages: tuple[str, ...] | None = None, trace=None) -> OracleResult:
    """Label one requirement (see module docstring)."""
    t0 = time.perf_counter()
    stages = stages or available_stages()
    if spec.output_stage in stages:         # the spec names its output stage
        stages = (spec.output_stage,)
    p = Problem.of(spec, catalog, stages)
    pool, notes = sweep(p)
    info = {"dropped_opamps": notes.get("dropped", {}), "candidates": len(pool),
            "sweep_s": round(time.perf_counter() - t0, 2)}
    if "bias" in notes:
        info["bias"] = notes["bias"]
    if not pool:
        return OracleResult("none found", evaluations=0, seconds=time.perf_counter() - t0, notes=info)
    bias = notes["bias_parts"]
    cal = Calibration()
    max_thd = spec.max_thd_frac
    lim_idx = {lim.id: i for i, lim in enumerate(p.limiters)}
    m = np.array([[d.get("m_f"), d.get("m_a"), d.get("thd"), d.get("margin"), d.get("s_e"), d.get("m_i", 1.0)]
                  for d in pool])
    lim_of = np.array([lim_idx[d.limiter] for d in pool])
    group = [(d.opamp, d.limiter) for d in pool]
    sig = [(d.opamp, d.limiter, d.rd, d.arms.rfam, d.arms.cfam, d.stage) for d in pool]
    used = np.zeros(len(pool), dtype=bool)
    tried: dict[str, object] = {}
    fails_by_group: Counter = Counter()
    fails_by_sig: Counter = Counter()
    evals, best = 0, None
    found = None            # (cost, text, full judgement) of the cheapest passing BOM so far
    costs: dict[int, float] = {}
    budget = max_evals
    while evals < budget and time.perf_counter() - t0 < max_seconds and not used.all():
        thd_cal = np.array([cal.thd.get(lim.id, 1.0) for lim in p.limiters])[lim_of]
        e = m[:, 3] + np.array([cal.margin.get(g, 0.0) for g in group])
        m_s = np.minimum((e - p.z * m[:, 4]) / np.maximum(e, 3e-3), 1.0)
        score = combine([m[:, 0], m[:, 1], 1 - m[:, 2] * thd_cal / max_thd, m_s, m[:, 5]])
        pen = np.array([0.08 * fails_by_group[g] + 0.25 * fails_by_sig[s] for g, s in zip(group, sig)])
        score = np.where(used, -np.inf, score - pen)
        if found is None:
            i = int(np.argmax(score))
        else:               # the cheapest candidate estimated to pass that could beat it
            i = _cheapest(p, pool, bias, score, costs, found[0])
            if i is None:
                break
        used[i] = True
        d = calibrated(p, pool[i], bias, cal)
        bracket = Bracket()
        for _ in range(1 + TRIMS):
            text = bom_text(p, d, bias)
            if text in tried or evals >= budget or time.perf_counter() - t0 > max_seconds:
                break
            tj = time.perf_counter()
            r = _judge(p, text, LOW_SAMPLES)
            evals += 1
            if trace:
                trace(f"{evals:3d} {time.perf_counter() - tj:5.2f}s score {score[i]:+.2f} {d.opamp} {d.limiter} "
                      f"rd={d.rd:g} rf={d.rf:g} G={d.arms.gain:.3f} {d.arms.rfam}/{d.arms.cfam} {d.stage} "
                      f"k={d.get('stage_ratio', 1):.3f} -> {'PASS' if r.verdict.passed else sorted(failures(r, spec))} "
                      f"f{r.freq_error:+.4f} a{r.amp_error:+.4f} thd {r.thd:.4f}/{d.get('thd'):.4f} "
                      f"cost {r.cost:.3f} "
                      + "; ".join(f"{c.name} {c.value:.4g}" for c in r.verdict.checks if not c.passed))
            tried[text] = r
            cal.learn(p, d, r)
            if r.verdict.passed and (found is None or r.cost < found[0]):
                full = _judge(p, text, FULL_SAMPLES)
                evals += 1
                if full.verdict.passed:
                    if found is None:
                        info["passed_on"] = evals
                        budget = evals + cost_evals
                    found = (full.cost, text, full)
                    break
            miss = _miss(r)
            if best is None or miss < best[0]:
                best = (miss, text, r)
            d2 = trim(p, d, r, bias, bracket)
            if d2 == d:
                break
            d = d2
        fails_by_group[group[i]] += 1
        fails_by_sig[sig[i]] += 1
    if found is not None:
        cost, text, full = found
        return OracleResult("exists", text, evals, time.perf_counter() - t0, _figures(full), info)
    if best is not None:
        (_, _), text, r = best
        info["nearest"] = {"bom": text, "failed": sorted(failures(r, spec)),
                           "checks": [f"{c.name}: {c.value:.4g} (limits {c.low}, {c.high})"
                                      for c in r.verdict.checks if not c.passed]}
    return OracleResult("none found", evaluations=evals, seconds=time.perf_counter() - t0, notes=info)


def main(argv: list[str] | None = None) -> None:
    from partpick.catalog import load_catalog
    ap = argparse.ArgumentParser(description="label one spec: a design exists, or none found")
    ap.add_argument("spec")
    ap.add_argument("--evals", type=int, default=MAX_EVALS)
    ap.add_argument("-v", "--verbose", action="store_true", help="one line per judged candidate")
    args = ap.parse_args(argv)
    spec = Spec.from_yaml(args.spec)
    res = oracle_design(spec, load_catalog(ROOT / "catalogs"), max_evals=args.evals,
                        trace=print if args.verbose else None)
    print(f"{args.spec}: {res.label} after {res.evaluations} judgements in {res.seconds:.1f} s")
    if res.bom_yaml:
        print(res.bom_yaml, end="")
        print(res.figures)
    print(res.notes)


if __name__ == "__main__":
    main()
