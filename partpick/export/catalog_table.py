"""The catalog as terminal tables (``partpick catalog list``)."""

from __future__ import annotations

import math

from partpick import units
from partpick.catalog import KINDS, Catalog
from partpick.export.table import render_table

__all__ = ["catalog_tables", "catalog_text"]


def _fmt(value: float, dim: str, digits: int | None = None) -> str:
    if value is None or (isinstance(value, float) and math.isinf(value)):
        return "-"
    return units.format_quantity(value, dim, digits)


def _price(*values: float) -> str:
    return " .. ".join(f"{v:.3f}" for v in values)


def catalog_tables(cat: Catalog, kinds: tuple[str, ...] = KINDS) -> str:
    """One table per kind of part family, in the user's units."""
    parts = []
    if "resistors" in kinds and cat.resistors:
        parts.append("Resistor families\n" + render_table(
            ["id", "technology", "series", "tol", "tempco", "range", "power", "unit price"],
            [[f.id, f.technology, f.series, _fmt(f.tolerance_frac, "fraction"), _fmt(f.tempco_per_k, "tempco"),
              f"{_fmt(f.min_ohm, 'resistance')} .. {_fmt(f.max_ohm, 'resistance')}", _fmt(f.power_w, "power"),
              _price(f.price_unit)] for f in cat.resistors]))
    if "capacitors" in kinds and cat.capacitors:
        def temp(f):
            if f.has_band:
                return (f"+/-{_fmt(f.band_frac, 'fraction')} over {_fmt(f.band_min_k, 'temperature')}"
                        f"..{_fmt(f.band_max_k, 'temperature')}")
            return f"{_fmt(f.tempco_per_k, 'tempco')} +/- {_fmt(f.tempco_spread_per_k, 'tempco')}"
        parts.append("Capacitor families\n" + render_table(
            ["id", "dielectric", "series", "tol", "temperature", "range", "rating", "unit price"],
            [[f.id, f.dielectric, f.series, _fmt(f.tolerance_frac, "fraction"), temp(f),
              f"{_fmt(f.min_f, 'capacitance')} .. {_fmt(f.max_f, 'capacitance')}", _fmt(f.voltage_v, "voltage"),
              _price(f.price_at_min, f.price_at_max)] for f in cat.capacitors]))
    if "opamps" in kinds and cat.opamps:
        parts.append("Op-amps\n" + render_table(
            ["id", "GBW", "slew", "supply (total)", "headroom +/-", "I out", "RRIO", "unit price"],
            [[f.id, _fmt(f.gbw_hz, "frequency"), _fmt(f.slew_v_per_s, "slew_rate"),
              f"{_fmt(f.supply_min_v, 'voltage')} .. {_fmt(f.supply_max_v, 'voltage')}",
              f"{_fmt(f.headroom_high_v, 'voltage')} / {_fmt(f.headroom_low_v, 'voltage')}",
              _fmt(f.output_current_a, "current"),
              ("in " if f.rail_to_rail_in else "") + ("out" if f.rail_to_rail_out else "") or "-",
              _price(f.price_unit)] for f in cat.opamps]))
    if "limiters" in kinds and cat.limiters:
        parts.append("Limiter elements\n" + render_table(
            ["id", "kind", "Is", "n", "Rs", "Vz", "unit price"],
            [[f.id, f.kind, _fmt(f.is_a, "current"), f"{f.n:g}", _fmt(f.rs_ohm, "resistance"),
              _fmt(f.vz_v, "voltage") if f.kind == "zener-pair" else "-", _price(f.price_unit)]
             for f in cat.limiters]))
    if "jfets" in kinds and cat.jfets:
        parts.append("JFETs (n-channel)\n" + render_table(
            ["id", "VTO", "VTO range", "BETA", "BETA range", "r_DS(on)", "unit price"],
            [[f.id, _fmt(f.vto_v, "voltage"), f"{_fmt(f.vto_min_v, 'voltage')} .. {_fmt(f.vto_max_v, 'voltage')}",
              _fmt(f.beta_a_per_v2, "transconductance_parameter"),
              f"{_fmt(f.beta_min_a_per_v2, 'transconductance_parameter')} .. "
              f"{_fmt(f.beta_max_a_per_v2, 'transconductance_parameter')}",
              _fmt(f.r_on_ohm, "resistance", 3), _price(f.price_unit)] for f in cat.jfets]))
    if "diodes" in kinds and cat.diodes:
        parts.append("Detector diodes\n" + render_table(
            ["id", "Is", "n", "Rs", "Cj", "unit price"],
            [[f.id, _fmt(f.is_a, "current"), f"{f.n:g}", _fmt(f.rs_ohm, "resistance"), _fmt(f.cj_f, "capacitance"),
              _price(f.price_unit)] for f in cat.diodes]))
    if "references" in kinds and cat.references:
        parts.append("Voltage references\n" + render_table(
            ["id", "voltage", "tol", "tempco", "min current", "unit price"],
            [[f.id, _fmt(f.voltage_v, "voltage"), _fmt(f.tolerance_frac, "fraction"), _fmt(f.tempco_per_k, "tempco"),
              _fmt(f.min_current_a, "current"), _price(f.price_unit)] for f in cat.references]))
    return "\n\n".join(parts)


def catalog_text(cat: Catalog, kinds: tuple[str, ...] = KINDS) -> str:
    """``partpick catalog list``: the tables, with a note on demo data, the currency and
    the files read."""
    head = "Demo catalog: invented parts for trying partpick out; use your own approved parts.\n\n" if cat.demo else ""
    return f"{head}{catalog_tables(cat, kinds)}\n\nPrices in {cat.currency}. Read {len(cat.sources)} file(s)."
