"""The purchasing CSV: one data row per distinct part, with what a buyer or an assembly
flow needs (designators, quantity per board, value, description, maker and part number,
tolerance, tempco, rating, package, unit and line cost, ordering cost, stock). The line
costs add up to the cost per board partpick reports; the predictions go in the YAML and
JSON written beside it. `partpick check` reads it back (designators, roles, family,
value; the circuit's shape follows from the roles and the op-amp's channels)."""

from __future__ import annotations

import csv
import io

from partpick import units
from partpick.bom import ROLES, Bom, value_text
from partpick.catalog import Catalog
from partpick.pricing import PurchaseLine, purchase_lines

__all__ = ["PURCHASE_COLUMNS", "COLUMN_LEGEND", "bom_to_purchase_csv", "purchase_rows", "stock_flag"]

PURCHASE_COLUMNS = ("designators", "roles", "quantity", "value", "description", "maker", "maker_part", "family",
                    "tolerance", "tempco", "rating", "package", "unit_cost", "line_fee", "order_cost", "line_cost",
                    "on_shelf")
COLUMN_LEGEND = {
    "designators": "reference designators as on the schematic and in the netlist (an op-amp: its channels)",
    "roles": "what each designator does in the circuit (partpick's slot names)",
    "quantity": "physical parts per board (a limiter pair is two diodes; an op-amp, its packages)",
    "value": "value in RKM code (IEC 60062): 4k7 = 4.7 kohm, 2n2 = 2.2 nF",
    "maker": "maker, when the catalog names one", "maker_part": "maker's part number, when the catalog names one",
    "family": "partpick catalog family", "tolerance": "value tolerance", "tempco": "temperature coefficient",
    "rating": "power (resistors), voltage (capacitors) or total supply range (op-amps)",
    "package": "package", "unit_cost": "price of one physical part",
    "line_fee": "the family's price per purchasing line (setup, reel)",
    "order_cost": "ordering cost of a line not on the shelf (stock lists in 'prefer' mode)",
    "line_cost": "unit_cost x quantity + line_fee + order_cost; the lines add up to the cost per board",
    "on_shelf": "with a stock list: yes, no, or short (the shelf holds fewer than the builds need)",
}


def stock_flag(line: PurchaseLine, builds: int, kind: str) -> str:
    """'yes', 'no' or 'short: have N, need M' for ``builds`` boards; '' without a stock
    list. A limiter's stock is counted in pairs, as the stock list and the search count it."""
    if line.stocked is None:
        return ""
    need = (len(line.roles) if kind == "limiters" else line.quantity) * builds
    if not line.stocked:
        return "no"
    return "yes" if line.stocked >= need else f"short: have {line.stocked}, need {need}"


def _ratings(kind: str, fam) -> tuple[str, str, str]:
    """(tolerance, tempco, rating) of a family, as text."""
    if kind == "resistors":
        return (units.format_quantity(fam.tolerance_frac, "fraction"), units.format_quantity(fam.tempco_per_k, "tempco"),
                units.format_quantity(fam.power_w, "power"))
    if kind == "capacitors":
        tc = (f"+/-{units.format_quantity(fam.band_frac, 'fraction')} band" if fam.has_band
              else f"{fam.tempco_per_k * 1e6:g} +/- {fam.tempco_spread_per_k * 1e6:g} ppm/K")
        return units.format_quantity(fam.tolerance_frac, "fraction"), tc, units.format_quantity(fam.voltage_v, "voltage")
    if kind == "opamps":
        return "", "", f"{fam.supply_min_v:g}..{fam.supply_max_v:g} V total"
    return "", "", ""


def _description(kind: str, fam, line: PurchaseLine, channels: int, stage: str) -> str:
    text = fam.description or fam.id
    if kind != "opamps":
        return text
    # a second channel with two stage resistors is a gain stage or a buffered divider: the
    # parts alone do not tell which, so the op-amp's line says (and the BOM reader reads it)
    if stage in ("gain", "buffered-attenuator"):
        text += f"; output stage: {stage}"
    if fam.channels == 1 and channels > 1:
        return f"{text}; single channel: {line.quantity} packages"
    spare = line.quantity * fam.channels - channels      # every package bought, less the channels used
    return text + (f"; {spare} channel(s) spare: tie off (see the schematic)" if spare > 0 else "")


def purchase_rows(bom: Bom, catalog: Catalog, *, stock=None, builds: int = 1) -> list[list[str]]:
    """The data rows of the purchasing CSV, in :data:`PURCHASE_COLUMNS` order."""
    rows = []
    for line in purchase_lines(bom, catalog, stock):
        kind, dim = ROLES[line.roles[0]]
        fam = catalog.find(kind, line.family)
        tol, tc, rating = _ratings(kind, fam)
        value = value_text(bom.line(line.roles[0])) if dim else ""
        rows.append([",".join(line.refs), ",".join(line.roles), str(line.quantity), value,
                     _description(kind, fam, line, bom.channels, bom.stage), line.maker, line.maker_part, line.family, tol, tc,
                     rating, fam.package, f"{line.unit_price:.4f}", f"{line.fee:.4f}", f"{line.order:.4f}",
                     f"{line.cost:.4f}", stock_flag(line, builds, kind)])
    return rows


def bom_to_purchase_csv(bom: Bom, catalog: Catalog, *, stock=None, builds: int = 1) -> str:
    """The purchasing CSV of ``bom`` (see module docstring): a header and data rows."""
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(PURCHASE_COLUMNS)
    w.writerows(purchase_rows(bom, catalog, stock=stock, builds=builds))
    return buf.getvalue()
