"""Ranking verified candidates by the spec's ``rank_by`` order, the way a buyer would.

Candidates that meet every requirement come first. Within each group the keys apply in
order -- yield (Monte Carlo, higher first), frequency error, amplitude error, THD,
startup margin (higher first), cost, part count (lower first) -- but a difference
smaller than what the Monte Carlo builds can tell apart is a tie, so the next key
decides: two yields within two binomial standard errors of the estimate (at least 0.2
%), two nominal errors or THDs within half the spread the builds themselves show. Cost
and part count follow the spec's keys when it does not name them.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from partpick.bom import Bom
from partpick.circuits import Circuit
from partpick.verify import Verdict

__all__ = ["Ranked", "rank", "resolution", "FREQ_RES_FLOOR"]

FREQ_RES_FLOOR = 1e-4   # the least frequency-error resolution (fraction): 100 ppm


@dataclass(frozen=True, slots=True)
class Ranked:
    """One verified candidate: its BOM, circuit, verdict and figures.

    freq_error: verified nominal frequency error (fraction, signed); amp_error (fraction,
    signed); thd (fraction); cost (currency, per board: parts and BOM lines); parts
    (count); surrogate: the solver's objective for it."""

    bom: Bom
    circuit: Circuit
    verdict: Verdict
    freq_error: float
    amp_error: float
    thd: float
    cost: float
    parts: int
    surrogate: float
    pick: object = None  # the solver's choice it came from (partpick.search.space.Pick)
    mc: object = None    # Monte Carlo result (partpick.tolerance.YieldResult)
    worst: dict | None = None  # worst-case corners

    @property
    def yield_frac(self) -> float:
        return self.mc.yield_frac if self.mc is not None else 0.0


# what a key is, per candidate: (value to minimise, resolution). The resolution is what
# the Monte Carlo builds can tell apart: two yields within two standard errors of the
# binomial estimate (and 0.2 % at least), two nominal errors within half the builds'
# own spread of that figure. Cost and part count are exact.
def _figure(r: Ranked, key: str) -> tuple[float, float]:
    v = r.verdict
    mc = r.mc
    stats = mc.stats if mc is not None else {}

    def spread(name: str, scale: float = 1.0) -> float:
        st = stats.get(name)
        return 0.5 * st["std"] / scale if st and scale else 0.0

    if key == "yield":
        p = r.yield_frac
        n = mc.samples if mc is not None else 1
        return -p, max(2 * math.sqrt(max(p * (1 - p), 1e-12) / n), 0.002)
    if key == "frequency_error":
        f = v.nominal.freq_hz if v.nominal.starts else math.nan
        return (abs(r.freq_error) if math.isfinite(r.freq_error) else math.inf,
                max(spread("frequency_hz", f), FREQ_RES_FLOOR) if math.isfinite(f) else FREQ_RES_FLOOR)
    if key == "amplitude_error":
        a = v.nominal.load_peak_v
        return (abs(r.amp_error) if math.isfinite(r.amp_error) else math.inf,
                max(spread("amplitude_v", a), 1e-3) if a > 0 else 1e-3)
    if key == "thd":
        return (r.thd if math.isfinite(r.thd) else math.inf, max(spread("thd"), 0.05 * r.thd if r.thd > 0 else 1e-4))
    if key == "startup_margin":
        return -v.nominal.lin.margin, max(spread("margin"), 1e-4)
    if key == "cost":
        return r.cost, 1e-9
    return float(r.parts), 0.0


def resolution(r: Ranked, key: str) -> float:
    """The difference in ``key`` below which r ties with another (see _figure), in the
    key's own unit (a fraction for the errors and yield)."""
    return _figure(r, key)[1]


KEYS = ("yield", "frequency_error", "amplitude_error", "thd", "startup_margin", "cost", "parts")


def _tiers(items: list[Ranked], keys: tuple[str, ...]) -> list[Ranked]:
    """Order by the keys lexicographically, each compared to its resolution: the items
    within the resolution of the best form a tier, ordered by the next key; then the
    rest, tiered again from their own best (a partition, so the order is transitive)."""
    if not keys or len(items) <= 1:
        return sorted(items, key=_final)
    key, rest = keys[0], keys[1:]
    figs = {id(r): _figure(r, key) for r in items}
    pool = sorted(items, key=lambda r: (figs[id(r)][0], _final(r)))
    out: list[Ranked] = []
    while pool:
        best, res = figs[id(pool[0])]
        tier = [r for r in pool if figs[id(r)][0] <= best + res] if math.isfinite(best) else pool
        taken = {id(r) for r in tier}
        pool = [r for r in pool if id(r) not in taken]
        out += _tiers(tier, rest)
    return out


def _final(r: Ranked) -> tuple:
    """Equal on every key: the cheaper, then the one with fewer parts, then the BOM's
    own text, so equal candidates come out in the same order on every run."""
    return (r.cost, r.parts, tuple((ln.role, ln.family, ln.value) for ln in r.bom.lines))


def rank(items: list[Ranked], rank_by: tuple[str, ...]) -> list[Ranked]:
    """Candidates that meet the spec first, then the ``rank_by`` keys with ties inside
    what the builds can tell apart (see the module docstring); equal BOMs keep the first."""
    seen = set()
    unique = []
    for r in items:
        # (the stage counts: a follower uses the package's spare channel, so its lines are the
        # same as without one)
        sig = (r.bom.stage, *((ln.role, ln.family, ln.value) for ln in r.bom.lines))
        if sig not in seen:
            seen.add(sig)
            unique.append(r)
    keys = tuple(rank_by) + tuple(k for k in ("cost", "parts") if k not in rank_by)
    passing = [r for r in unique if r.verdict.passed]
    failing = [r for r in unique if not r.verdict.passed]
    return _tiers(passing, keys) + _tiers(failing, keys)
