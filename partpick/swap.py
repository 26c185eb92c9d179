"""Swapping a design's parts for parts on the shelf.

Each line of a BOM that the stock list cannot supply (times the spec's build count), or
every line with ``all_lines``, is a slot to refill; the other slots stay as they are.
The refills come from the shelf: for resistors and capacitors, stocked values of any
allowed family of that kind within a factor of 1.5 of the old value; for the op-amp and
the limiter, the stocked types the spec allows. Combinations are screened with the
textbook relations (f0 and the gain excess, corrected by the pull and the margin the
verified original showed) and the most promising are verified exactly, Monte Carlo
included; the best that meets the spec wins, ranked by the spec's ``rank_by``.
"""

from __future__ import annotations

import dataclasses
import itertools
import math
from dataclasses import dataclass

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


@dataclass(frozen=True, slots=True)
class SwapResult:
    """The design before and after, and the refilled slots (ref designators)."""

    before: Ranked
    after: Ranked
    changed: tuple[str, ...]


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
    # Screen with the textbook relations, corrected by what verification showed for the original.
    c0 = before.circuit
    nom = before.verdict.nominal
    pull = math.log(nom.freq_hz / c0.f0_hz) if nom.starts else 0.0
    loss = math.log(1 + c0.ideal_margin) - math.log(1 + nom.lin.margin)
    scored = []
    for combo in itertools.product(*options):
        lines = list(bom.lines)
        for ln, (fam, value) in zip(change, combo):
            lines[lines.index(ln)] = dataclasses.replace(ln, family=fam, value=value)
        cand = dataclasses.replace(bom, lines=tuple(lines))
        c = cand.to_circuit(catalog)
        err = abs(math.log(c.f0_hz) + pull - math.log(spec.frequency.target_hz))
        margin = math.log(1 + c.ideal_margin) - loss
        if err > spec.frequency.tolerance_frac or margin <= 0:
            continue
        # prefer a gain excess near the original's (amplitude and THD follow it)
        scored.append((err + abs(margin - math.log(1 + nom.lin.margin)), cand))
    scored.sort(key=lambda x: x[0])
    tried = [evaluate_bom(cand, spec, catalog, stock, samples=samples, seed=seed) for _, cand in scored[:MAX_VERIFY]]
    good = [r for r in tried if r.verdict.passed]
    if not good:
        worst = change[0] if len(change) == 1 else max(change, key=lambda ln: len(_refills(ln, spec, catalog, stock)))
        reason = ""
        if tried:
            best = rank(tried, spec.rank_by)[0]
            reason = "; the closest fails " + ", ".join(c.name for c in best.verdict.failed())
        raise InfeasibleError(f"no substitution from the shelf meets the spec: slot {worst.ref} ({worst.role}, "
                              f"{worst.family}) cannot be filled{reason}", tuple(ln.ref for ln in change))
    after = rank(good, spec.rank_by)[0]
    changed = tuple(a.ref for a, b in zip(after.bom.lines, bom.lines) if (a.family, a.value) != (b.family, b.value))
    return SwapResult(before, after, changed)
