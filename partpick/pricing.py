"""Prices: one home for unit prices, purchasing lines and the cost of a BOM.

A part's unit price comes from its catalog family (resistors: one price; capacitors:
log-log interpolation over the family's range; op-amps; limiter pairs: the price of
every physical part), or from the stock list when the shelf holds it (its listed price,
else nothing). Each distinct (family, value) on a BOM is one purchasing line with the
family's line price; with a stock list, an off-shelf line also carries the ordering
cost ORDER_LINE and a stocked line costs nothing.

:func:`purchase_lines` turns a BOM into what a buyer orders: one line per distinct part
with its designators and its physical quantity per board (a limiter pair is two parts;
the op-amp is one package per ``channels`` of the circuit's channels, so a buffer on a
single-channel op-amp takes a second package). The cost of a BOM is the sum of its
lines' costs, so the purchasing file always adds up to the cost partpick reports.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from partpick import units
from partpick.catalog import Catalog

__all__ = ["ORDER_LINE", "Pricer", "PurchaseLine", "purchase_lines", "bom_cost", "channel_refs", "maker_part"]

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

    def fee(self, family: str, value: float) -> float:
        """The family's price per BOM line (setup, reel), nothing for a stocked part."""
        return 0.0 if self.on_shelf(family, value) else self.catalog.find(self.catalog.kind_of(family),
                                                                          family).price_line

    def order(self, family: str, value: float) -> float:
        """The ordering cost of a line: ORDER_LINE when a stock list is in use and the
        shelf does not hold the part, else nothing."""
        return ORDER_LINE if self.stock is not None and not self.on_shelf(family, value) else 0.0

    def line(self, family: str, value: float) -> float:
        """Price of one BOM line: the family's line price and the ordering cost."""
        return self.fee(family, value) + self.order(family, value)


@dataclass(frozen=True, slots=True)
class PurchaseLine:
    """One distinct part to order: designators (an op-amp's are its channels as the
    netlist and the schematic name them), the roles they fill, catalog family and value
    (ohm, F; 0 for active parts), physical parts per board, price per physical part,
    the family's line price, the ordering cost, the shelf's quantity (None without a
    stock list), and the maker's name and part number (empty when the catalog has none).
    Prices in the catalog's currency."""

    refs: tuple[str, ...]
    roles: tuple[str, ...]
    family: str
    value: float
    quantity: int
    unit_price: float
    fee: float
    order: float
    stocked: int | None
    maker: str = ""
    maker_part: str = ""

    @property
    def cost(self) -> float:
        """What the line costs per board: its parts, its line price and its ordering cost."""
        return self.unit_price * self.quantity + self.fee + self.order

    @property
    def on_shelf(self) -> bool:
        return bool(self.stocked)


def channel_refs(ref: str, channels: int) -> tuple[str, ...]:
    """The names of an op-amp's channels: U1 -> U1A, U1B, ... (the netlist's names)."""
    return tuple(f"{ref}{chr(ord('A') + i)}" for i in range(channels))


def maker_part(fam, value_rkm: str) -> str:
    """The maker's part number of family ``fam`` for a part of value ``value_rkm`` (RKM
    code; empty for active parts): its ``{value}`` replaced."""
    return fam.maker_part.replace("{value}", value_rkm)


def purchase_lines(bom, catalog: Catalog, stock=None) -> tuple[PurchaseLine, ...]:
    """The purchasing lines of ``bom`` in BOM order (see module docstring)."""
    price = Pricer(catalog, stock)
    groups: dict[tuple[str, float], list] = {}
    for ln in bom.lines:
        groups.setdefault((ln.family, ln.value), []).append(ln)
    out = []
    for (family, value), lines in groups.items():
        kind = catalog.kind_of(family)
        fam = catalog.find(kind, family)
        unit, refs = price.unit(family, value), tuple(r.strip() for ln in lines for r in ln.ref.split(","))
        qty = len(lines)
        if kind == "limiters":
            qty, unit = qty * fam.parts, unit / fam.parts
        elif kind == "opamps":
            refs = channel_refs(lines[0].ref, bom.channels)
            qty = math.ceil(bom.channels / fam.channels)
        rkm = units.format_rkm(value, "resistance" if kind == "resistors" else "capacitance") if value else ""
        out.append(PurchaseLine(refs, tuple(ln.role for ln in lines), family, value, qty, unit,
                                price.fee(family, value), price.order(family, value),
                                None if stock is None else stock.quantity(family, value), fam.maker,
                                maker_part(fam, rkm)))
    return tuple(out)


def bom_cost(bom, catalog: Catalog, stock=None) -> tuple[float, int]:
    """Cost per board (the sum of the purchasing lines' costs) and the count of
    physical parts on the board."""
    lines = purchase_lines(bom, catalog, stock)
    return sum(ln.cost for ln in lines), sum(ln.quantity for ln in lines)
