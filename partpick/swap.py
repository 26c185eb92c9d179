"""Swapping a design's parts for parts on the shelf.

Each line of a BOM that the stock list cannot supply (times the spec's build count), or
every line with ``all_lines``, is a slot to refill; the other slots stay as they are.
The refills come from the shelf: for resistors and capacitors, stocked values of any
allowed family of that kind within a factor of 1.5 of the old value; for the op-amp and
the limiter, the stocked types the spec allows. Combinations are screened with the
textbook relations (f0 and the gain excess, corrected by the pull and the margin the
verified original showed) and the most promising are verified exactly, Monte Carlo
included; the best that meets the spec wins, ranked by the spec's ``rank_by``.

The screen is vectorised over the combinations (the topology's equations take arrays)
and bounded: at most :data:`MAX_SCREEN` combinations. When the shelf offers more (many
slots, long stock lists), each slot keeps only the stocked values nearest its old value
(log distance), as many as the bound allows, and the result says what was skipped; the
time grows with the number of combinations screened, never with their full product.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass

import numpy as np

from partpick.bom import ROLES, Bom, BomLine
from partpick.catalog import Catalog
from partpick.pipeline import evaluate_bom
from partpick.errors import InfeasibleError
from partpick.rank import Ranked, rank
from partpick.spec import Spec
from partpick.stock import Stock

__all__ = ["SwapResult", "swap"]

MAX_VERIFY = 24     # exact verifications at most
NEAR = 1.5          # a refill value lies within this factor of the old one
MAX_SCREEN = 1_000_000   # combinations screened at most (about a second)
_CHUNK = 100_000         # combinations screened per numpy pass


@dataclass(frozen=True, slots=True)
class SwapResult:
    """The design before and after, the refilled slots (ref designators), and what the
    bounded screen skipped (empty when it screened every combination)."""

    before: Ranked
    after: Ranked
    changed: tuple[str, ...]
    skipped: str = ""


def _needs(bom: Bom, stock: Stock, builds: int) -> list[BomLine]:
    use = bom.uses()
    return [ln for ln in bom.lines if stock.quantity(ln.family, ln.value) < use[(ln.family, ln.value)] * builds]


def _refills(line: BomLine, spec: Spec, catalog: Catalog, stock: Stock) -> list[tuple[str, float]]:
    kind, dim = ROLES[line.role]
    allowed = spec.parts.of_kind(kind)
    out = []
    for item in stock.items:
        if item.quantity <= 0 or catalog.kind_of(item.family) != kind:
            continue
        if allowed is not None and item.family not in allowed:
            continue
        if dim is not None and not (line.value / NEAR <= item.value <= line.value * NEAR):
            continue
        out.append((item.family, item.value))
    return out


def swap(spec: Spec, catalog: Catalog, bom: Bom, stock: Stock, *, all_lines: bool = False,
         samples: int = 20_000, seed: int = 1) -> SwapResult:
    """Refill the slots the shelf cannot supply (see module docstring).

    Raises :class:`InfeasibleError` naming the slot that cannot be filled when no
    substitution meets the spec.
    """
    before = evaluate_bom(bom, spec, catalog, stock, samples=samples, seed=seed)
    change = list(bom.lines) if all_lines else _needs(bom, stock, spec.builds)
    if not change:
        return SwapResult(before, before, ())
    options = []
    for ln in change:
        refills = _refills(ln, spec, catalog, stock)
        if not refills:
            kind, dim = ROLES[ln.role]
            what = f"within a factor {NEAR:g} of {ln.value:g}" if dim else "of an allowed type"
            raise InfeasibleError(f"slot {ln.ref} ({ln.role}) cannot be filled: the shelf holds no {kind[:-1]} {what}",
                                  (ln.ref,))
        options.append(refills)
    cands, skipped = _screen(spec, catalog, bom, before, change, options)
    tried = [evaluate_bom(cand, spec, catalog, stock, samples=samples, seed=seed) for cand in cands]
    good = [r for r in tried if r.verdict.passed]
    if not good:
        worst = change[0] if len(change) == 1 else max(change, key=lambda ln: len(_refills(ln, spec, catalog, stock)))
        reason = ""
        if tried:
            best = rank(tried, spec.rank_by)[0]
            reason = "; the closest fails " + ", ".join(c.name for c in best.verdict.failed())
        raise InfeasibleError(f"no substitution from the shelf meets the spec: slot {worst.ref} ({worst.role}, "
                              f"{worst.family}) cannot be filled{reason}{'; ' + skipped if skipped else ''}",
                              tuple(ln.ref for ln in change))
    after = rank(good, spec.rank_by)[0]
    changed = tuple(a.ref for a, b in zip(after.bom.lines, bom.lines) if (a.family, a.value) != (b.family, b.value))
    return SwapResult(before, after, changed, skipped)


def _distance(line: BomLine, family: str, value: float) -> float:
    """How far a refill is from the old part: the log ratio of values; for an active
    part (no value), 0 for the same type and 1 for another (whose pull and margin the
    original's verification does not tell)."""
    if value and line.value:
        return abs(math.log(value / line.value))
    return 0.0 if family == line.family else 1.0


def _bounded(change: list[BomLine], options: list[list[tuple[str, float]]]) -> tuple[list, str]:
    """Each slot's refills, the nearest first, cut so their product stays within MAX_SCREEN;
    and a sentence saying what was cut (empty when nothing was)."""
    near = [sorted(opts, key=lambda fv, ln=ln: _distance(ln, *fv)) for ln, opts in zip(change, options)]
    total = math.prod(len(o) for o in near)
    if total <= MAX_SCREEN:
        return near, ""
    keep = 1
    while math.prod(min(len(o), keep + 1) for o in near) <= MAX_SCREEN:
        keep += 1
    cut = [o[:keep] for o in near]
    return cut, (f"screened {math.prod(len(o) for o in cut):,} of {total:.3g} combinations: the {keep} stocked "
                 "values nearest the old one in each slot")


def _screen(spec: Spec, catalog: Catalog, bom: Bom, before: Ranked, change: list[BomLine],
            options: list[list[tuple[str, float]]]) -> tuple[list[Bom], str]:
    """The MAX_VERIFY most promising refills by the textbook relations, corrected by what
    verification showed for the original (its frequency pull and its margin lost to the
    op-amp), vectorised over the combinations; and what the bound skipped."""
    options, skipped = _bounded(change, options)
    c0 = before.circuit
    nom = before.verdict.nominal
    pull = math.log(nom.freq_hz / c0.f0_hz) if nom.starts else 0.0
    loss = math.log(1 + c0.ideal_margin) - math.log(1 + nom.lin.margin)
    aim = math.log(1 + nom.lin.margin)
    sizes = tuple(len(o) for o in options)
    values = [np.array([v for _, v in o]) for o in options]
    other = [np.array([_distance(ln, f, v) if not v else 0.0 for f, v in o]) for ln, o in zip(change, options)]
    topo = c0.topology
    best_score, best_index = np.empty(0), np.empty(0, dtype=np.int64)
    for start in range(0, math.prod(sizes), _CHUNK):
        flat = np.arange(start, min(start + _CHUNK, math.prod(sizes)))
        idx = np.unravel_index(flat, sizes)
        v = {role: np.full(flat.size, c0.values[role]) for role in c0.values}
        for ln, vals, i in zip(change, values, idx):
            if ROLES[ln.role][1]:
                v[ln.role] = vals[i]
        with np.errstate(all="ignore"):
            err = np.abs(np.log(topo.f0_hz(v)) + pull - math.log(spec.frequency.target_hz))
            margin = np.log(topo.gain(v) / topo.required_gain(v)) - loss
        ok = (err <= spec.frequency.tolerance_frac) & (margin > 0)
        # another op-amp or limiter type than the original's ranks after every same-type refill
        penalty = sum(o[i] for o, i in zip(other, idx))
        score = np.concatenate([best_score, (err + np.abs(margin - aim) + penalty)[ok]])
        index = np.concatenate([best_index, flat[ok]])
        order = np.argsort(score, kind="stable")[:MAX_VERIFY]
        best_score, best_index = score[order], index[order]
    cands = []
    picks = np.stack(np.unravel_index(best_index, sizes), axis=1) if best_index.size else []
    for pick in picks:
        lines = list(bom.lines)
        for ln, opts, j in zip(change, options, pick):
            fam, value = opts[int(j)]
            lines[lines.index(ln)] = dataclasses.replace(ln, family=fam, value=value)
        cands.append(dataclasses.replace(bom, lines=tuple(lines)))
    return cands, skipped
