"""Prices: one home for unit prices, line prices and the cost of a BOM.

A part's unit price comes from its catalog family (resistors: one price; capacitors:
log-log interpolation over the family's range; op-amps; limiter pairs: the price of
every physical part), or from the stock list when the shelf holds it (its listed price,
else nothing). Each distinct (family, value) on a BOM is one purchasing line with the
family's line price; with a stock list, an off-shelf line also carries the ordering
cost ORDER_LINE and a stocked line costs nothing.
"""

from __future__ import annotations

from partpick.catalog import Catalog

__all__ = ["ORDER_LINE", "Pricer", "bom_cost"]

ORDER_LINE = 0.50  # ordering cost of a BOM line not on the shelf, in the catalog's currency (stock: prefer)


class Pricer:
    """Prices of one catalog, with an optional stock list (see module docstring)."""

    def __init__(self, catalog: Catalog, stock=None) -> None:
        self.catalog = catalog
        self.stock = stock

    def on_shelf(self, family: str, value: float) -> bool:
        if self.stock is None:
            return False
        item = self.stock.find(family, value)
        return item is not None and item.quantity > 0

    def unit(self, family: str, value: float) -> float:
        """Unit price of (family, value): the shelf's when stocked, else the catalog's
        (a limiter: its physical parts together)."""
        if self.on_shelf(family, value):
            return self.stock.find(family, value).unit_price or 0.0
        kind = self.catalog.kind_of(family)
        fam = self.catalog.find(kind, family)
        if kind in ("resistors", "capacitors"):
            return fam.unit_price(value)
        return fam.price_unit * (fam.parts if kind == "limiters" else 1)

    def line(self, family: str, value: float) -> float:
        """Price of one BOM line: the family's line price (and the ordering cost with a
        stock list), nothing for a stocked part."""
        fam = self.catalog.find(self.catalog.kind_of(family), family)
        if self.stock is None:
            return fam.price_line
        if self.on_shelf(family, value):
            return 0.0
        return fam.price_line + ORDER_LINE


def bom_cost(bom, catalog: Catalog, stock=None) -> tuple[float, int]:
    """Cost per board (unit prices plus one line price per distinct family and value,
    stock list included; op-amp packages for every channel the circuit uses, so a buffer
    on a single-channel op-amp takes a second package) and the physical part count."""
    price = Pricer(catalog, stock)
    qty = bom.uses()
    op = catalog.find("opamps", bom.line("opamp").family)
    extra_channels = max(bom.channels - 1, 0)
    if extra_channels and op.channels == 1:
        qty[(op.id, 0.0)] += extra_channels
    cost = sum(price.unit(f, v) * n + price.line(f, v) for (f, v), n in qty.items())
    parts = sum(n * (catalog.find("limiters", f).parts if catalog.kind_of(f) == "limiters" else 1)
                for (f, _v), n in qty.items())
    return cost, parts + (extra_channels if op.channels > 1 else 0)
