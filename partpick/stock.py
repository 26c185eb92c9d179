"""Parts on the shelf: a CSV stock list checked against the catalog.

Columns (header row required, any order): ``family``, ``value``, ``quantity``, and
optionally ``unit_price`` (overrides the catalog price) and ``note`` (location or
remark). ``value`` is a resistance or capacitance for those families (SI prefixes or
RKM code) and empty for active parts (op-amps, limiters, JFETs, diodes, references).
Lines starting with ``#`` are comments. Every refusal names file:line:column.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path

from partpick import series, units
from partpick.catalog import Catalog
from partpick.errors import StockError, UnitError
from partpick.yamlsrc import did_you_mean, read_csv_rows, read_text

__all__ = ["StockItem", "Stock", "load_stock", "parse_stock"]

_COLUMNS = ("family", "value", "quantity", "unit_price", "note")
_REQUIRED = ("family", "value", "quantity")
_VALUE_DIM = {"resistors": "resistance", "capacitors": "capacitance"}


@dataclass(frozen=True, slots=True)
class StockItem:
    """quantity parts of family ``family`` at value (ohm or F; 0 for op-amps and
    limiters); unit_price overrides the catalog when not None."""

    family: str
    value: float
    quantity: int
    unit_price: float | None
    note: str
    line: int


@dataclass(frozen=True, slots=True)
class Stock:
    """A stock list; look parts up with :meth:`quantity`."""

    items: tuple[StockItem, ...]
    source: str

    def find(self, family: str, value: float = 0.0) -> StockItem | None:
        for item in self.items:
            if item.family == family and math.isclose(item.value, value, rel_tol=1e-9, abs_tol=0.0):
                return item
        return None

    def quantity(self, family: str, value: float = 0.0) -> int:
        item = self.find(family, value)
        return item.quantity if item else 0


def load_stock(path: str | Path, catalog: Catalog) -> Stock:
    """Read and validate the stock list at ``path`` against ``catalog``."""
    return parse_stock(read_text(path, StockError), str(path), catalog)


def parse_stock(text: str, source: str, catalog: Catalog) -> Stock:
    """Validate stock CSV text (see module docstring)."""
    lines = [(i + 1, ln) for i, ln in enumerate(text.splitlines()) if ln.strip() and not ln.lstrip().startswith("#")]
    if not lines:
        raise StockError("is empty; expected a header row 'family,value,quantity[,unit_price][,note]'",
                         source=source, line=1)
    rows = read_csv_rows(lines, source, StockError)
    header_line, header = lines[0][0], [h.strip() for h in rows[0]]
    for col, name in enumerate(header, start=1):
        if name not in _COLUMNS:
            raise StockError(f"unknown column '{name}'; expected {', '.join(_COLUMNS)}"
                             + did_you_mean(name, _COLUMNS), source=source, line=header_line, column=col)
        if name in header[:col - 1]:
            raise StockError(f"repeats column '{name}' (first in column {header.index(name) + 1})",
                             source=source, line=header_line, column=col)
    for name in _REQUIRED:
        if name not in header:
            raise StockError(f"missing column '{name}'", source=source, line=header_line)
    index = {name: header.index(name) for name in header}
    items: list[StockItem] = []
    for (line, _), row in zip(lines[1:], rows[1:]):
        items.append(_item(row, index, line, source, catalog, items))
    return Stock(tuple(items), source)


def _item(row, index, line, source, catalog: Catalog, before: list[StockItem]) -> StockItem:
    def cell(name: str) -> tuple[str, int]:
        col = index.get(name)
        if col is None:
            return "", 0
        return (row[col].strip() if col < len(row) else ""), col + 1

    def fail(message: str, col: int, field: str) -> StockError:
        return StockError(message, source=source, line=line, column=col or None, field=field)

    if len(row) > len(index):
        raise fail(f"has {len(row)} cells, the header has {len(index)}", len(index) + 1, "row")
    family, col = cell("family")
    kind = catalog.kind_of(family)
    if kind is None:
        raise fail(f"unknown family '{family}'" + did_you_mean(family, catalog.all_ids()), col, "family")
    fam = catalog.find(kind, family)
    text, col = cell("value")
    value = 0.0
    if kind in _VALUE_DIM:
        try:
            value = units.parse_quantity(text, _VALUE_DIM[kind])
        except UnitError as exc:
            raise fail(exc.message, col, "value") from None
        if not value > 0:
            raise fail(f"must be > 0 {units.unit_symbol(_VALUE_DIM[kind])} (got '{text}')", col, "value")
        lo, hi = (fam.min_ohm, fam.max_ohm) if kind == "resistors" else (fam.min_f, fam.max_f)
        if not series.is_preferred(fam.series, value) or not lo * (1 - 1e-9) <= value <= hi * (1 + 1e-9):
            raise fail(f"'{text}' is not an {fam.series} value within the range of family '{family}'", col, "value")
    elif text not in ("", "-"):
        raise fail(f"must be empty for {kind} (got '{text}')", col, "value")
    qty_text, col = cell("quantity")
    if not qty_text.isdigit() or len(qty_text) > 9:
        raise fail(f"must be a whole number 0 .. 999999999 (got '{qty_text}')", col, "quantity")
    quantity = int(qty_text)
    price_text, col = cell("unit_price")
    price = None
    if price_text:
        try:
            price = float(price_text)
        except ValueError:
            raise fail(f"must be a number (got '{price_text}')", col, "unit_price") from None
        if not math.isfinite(price) or not 0 <= price <= 1e9:
            raise fail(f"must be a price >= 0 (got '{price_text}')", col, "unit_price")
    for other in before:
        if other.family == family and math.isclose(other.value, value, rel_tol=1e-9):
            raise fail(f"repeats the part on line {other.line}; list each part once", 1, "family")
    return StockItem(family, value, quantity, price, cell("note")[0], line)
