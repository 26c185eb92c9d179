"""The purchasing CSV: one row per designator with what a buyer or an assembly flow
needs (description, tolerance, tempco, rating, package, unit and line cost, stock)."""

from __future__ import annotations

import csv
import io

from partpick import units
from partpick.bom import ROLES, Bom, value_text
from partpick.catalog import Catalog
from partpick.pricing import Pricer

__all__ = ["PURCHASE_COLUMNS", "bom_to_purchase_csv"]

PURCHASE_COLUMNS = ("designator", "role", "quantity", "value", "description", "family", "tolerance", "tempco",
                    "rating", "package", "unit_cost", "line_cost", "stock")


def bom_to_purchase_csv(bom: Bom, catalog: Catalog, *, stock=None, builds: int = 1) -> str:
    """The CSV a purchasing or assembly flow expects: one row per designator, with the
    part's description, tolerance, tempco, rating and package from its catalog family,
    unit cost, the cost of its distinct BOM line (on the line's first row; parts of one
    value across slots share a line) and whether the shelf holds enough for ``builds``
    boards. `partpick check` reads it back (designator, role, family, value)."""
    price = Pricer(catalog, stock)
    use = bom.uses()
    buf = io.StringIO()
    buf.write(f"# topology: {bom.topology}\n# control: {bom.control}\n# supply: {bom.supply_kind}\n"
              f"# stage: {bom.stage}\n")
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(PURCHASE_COLUMNS)
    seen = set()
    for ln in bom.lines:
        kind, dim = ROLES[ln.role]
        fam = catalog.find(kind, ln.family)
        qty = fam.parts if kind == "limiters" else 1
        if kind == "resistors":
            tol, tc, rating = f"{fam.tolerance_frac * 100:g} %", f"{fam.tempco_per_k * 1e6:g} ppm/K", \
                units.format_quantity(fam.power_w, "power")
        elif kind == "capacitors":
            tol = f"{fam.tolerance_frac * 100:g} %"
            tc = (f"+/-{fam.band_frac * 100:g} % band" if fam.has_band
                  else f"{fam.tempco_per_k * 1e6:g} +/- {fam.tempco_spread_per_k * 1e6:g} ppm/K")
            rating = units.format_quantity(fam.voltage_v, "voltage")
        elif kind == "opamps":
            tol, tc, rating = "", "", f"{fam.supply_min_v:g}..{fam.supply_max_v:g} V"
        else:
            tol, tc, rating = "", "", ""
        key = (ln.family, ln.value)
        line_cost = ""
        if key not in seen:
            seen.add(key)
            line_cost = f"{price.unit(*key) * use[key] + price.line(*key):.4f}"
        on_shelf = ""
        if stock is not None:
            on_shelf = "yes" if stock.quantity(*key) >= use[key] * builds else "no"
        w.writerow([ln.ref, ln.role, qty, value_text(ln) if dim else "", fam.description, ln.family, tol, tc,
                    rating, fam.package, f"{price.unit(*key) / (qty if kind == 'limiters' else 1):.4f}", line_cost,
                    on_shelf])
    return buf.getvalue()
