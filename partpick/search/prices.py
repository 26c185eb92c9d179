"""Prices as the search counts them: unit and line prices of every slot (the shelf's
where the stock list holds the part) and the exact cost of whole designs, vectorised
over candidates, as :func:`partpick.pricing.bom_cost` counts a BOM."""

from __future__ import annotations

import numpy as np


__all__ = ["PriceBook", "factorize"]


def factorize(values) -> tuple[np.ndarray, np.ndarray]:
    """(the distinct values ascending, each value's index in them): np.unique's
    (values, inverse), for arrays of a few hundred distinct part values over up to
    millions of rows, in a hash pass over their bits and a search of the few distinct
    ones (not a sort of every row). Values that are not all finite positive floats go
    through np.unique."""
    values = np.asarray(values, float)
    if values.size == 0 or not (np.all(np.isfinite(values)) and values.min() > 0):
        return np.unique(values, return_inverse=True)
    # positive finite floats order as their bit patterns do
    uniq = np.sort(np.unique(values.view(np.int64))).view(np.float64)
    return uniq, np.searchsorted(uniq, values)


class PriceBook:
    """Unit and line prices (see :mod:`partpick.pricing`: the shelf's prices where the
    stock list holds the part), and the exact cost of whole designs, vectorised over
    candidates."""

    def __init__(self, pricer, catalog, fixed=(), topology_channels: int = 1) -> None:
        self.pricer = pricer
        self.catalog = catalog
        self.fixed = tuple(fixed)            # (role, family, value) every design carries
        self.channels = topology_channels
        self._unit: dict = {}
        self._line: dict = {}
        self._stock: dict = {}
        self.codes: dict[str, int] = {}      # family id -> a small integer, for the vector code

    def code(self, family: str) -> int:
        return self.codes.setdefault(family, len(self.codes) + 1)

    def _prices(self, table: dict, fn, family: str, values) -> np.ndarray:
        """fn(family, v) of every value, each distinct value computed once per book:
        table holds, per family, the values priced so far (ascending) and their prices,
        so that a call whose values are all known (nearly every call: a search prices
        the same series values over and over) is one binary search."""
        values = np.asarray(values, float)
        flat = values.ravel()
        for _ in range(2):   # (the second time with the values not known before added)
            known = table.get(family)
            if known is not None and known[0].size:
                j = np.minimum(np.searchsorted(known[0], flat), known[0].size - 1)
                if np.array_equal(known[0][j], flat):
                    return known[1][j].reshape(values.shape)
            uniq = np.unique(flat)
            if flat.size == 0 or not np.all(np.isfinite(uniq)):
                break
            old_v, old_p = known if known is not None else (np.zeros(0), np.zeros(0))
            new = uniq[~np.isin(uniq, old_v)]
            all_v = np.concatenate([old_v, new])
            order = np.argsort(all_v, kind="stable")
            table[family] = (all_v[order], np.concatenate([old_p, [fn(family, float(v)) for v in new]])[order])
        # (no table: an empty call, or a value that is not finite, which equals nothing)
        uniq, inv = factorize(flat)
        return np.array([fn(family, float(v)) for v in uniq], float)[inv].reshape(values.shape)

    def units(self, family: str, values) -> np.ndarray:
        """Unit price of each value (a limiter: its physical parts together)."""
        return self._prices(self._unit, self.pricer.unit, family, values)

    def lines(self, family: str, values) -> np.ndarray:
        """Line price of each value (family's line price and any ordering cost)."""
        return self._prices(self._line, self.pricer.line, family, values)

    def row_costs(self, columns, opamps, packages: np.ndarray, limiter: str) -> np.ndarray:
        """Cost per board of each row: columns is a list of (family code per row, value
        per row) for the passive slots (value 0: the slot is empty), every passive's
        unit price and one line per distinct (family, value) in the row, plus the
        fixed parts, the op-amp (opamps: family id per row) times its packages and the
        limiter."""
        n = packages.size
        cols = [(np.broadcast_to(np.asarray(c), (n,)), np.broadcast_to(np.asarray(v, float), (n,)))
                for c, v in columns]
        cols += [(np.full(n, self.code(fam)), np.full(n, float(v))) for _, fam, v in self.fixed]
        ids = {c: f for f, c in self.codes.items()}
        total = np.zeros(n)
        for j, (code, value) in enumerate(cols):
            present = value > 0
            unit, line = np.zeros(n), np.zeros(n)
            for c in np.unique(code[present]):
                sel = present & (code == c)
                unit[sel] = self.units(ids[int(c)], value[sel])
                line[sel] = self.lines(ids[int(c)], value[sel])
            shared = np.zeros(n, bool)      # the same part as an earlier slot: its line is paid once
            for i in range(j):
                shared |= (cols[i][0] == code) & (cols[i][1] == value)
            total += np.where(present, unit + np.where(shared, 0.0, line), 0.0)
        for fam in np.unique(opamps):
            sel = opamps == fam
            total[sel] += self.units(fam, 0.0) * packages[sel] + self.lines(fam, 0.0)
        return total + self.units(limiter, 0.0) + self.lines(limiter, 0.0)

    def fits(self, columns, opamps, packages: np.ndarray, limiter: str, shelf, builds: int) -> np.ndarray:
        """Whether each row's parts are all on the shelf in the quantity ``builds``
        boards need (one part a slot, the op-amp's packages, the limiter's one), with the
        fixed parts (see row_costs for the arguments)."""
        n = packages.size
        cols = [(np.broadcast_to(np.asarray(c), (n,)), np.broadcast_to(np.asarray(v, float), (n,)))
                for c, v in columns]
        cols += [(np.full(n, self.code(fam)), np.full(n, float(v))) for _, fam, v in self.fixed]
        ids = {c: f for f, c in self.codes.items()}
        ok = np.ones(n, bool)
        for code, value in cols:
            present = value > 0
            uses = np.zeros(n, int)
            for c2, v2 in cols:
                uses += (c2 == code) & (v2 == value)
            have = np.zeros(n)
            for c in np.unique(code[present]):
                sel = present & (code == c)
                have[sel] = self._prices(self._stock, lambda f, v: shelf.quantity(f, v), ids[int(c)], value[sel])
            ok &= ~present | (uses * builds <= have)
        for fam in np.unique(opamps):
            sel = opamps == fam
            ok[sel] &= packages[sel] * builds <= shelf.quantity(fam)
        return ok & (builds <= shelf.quantity(limiter))
