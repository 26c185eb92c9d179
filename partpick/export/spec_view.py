"""A spec as partpick reads it (``partpick spec check``): every field normalised to SI,
beside how it reads in engineering notation."""

from __future__ import annotations

import json
import math

from partpick import units
from partpick.export.table import render_table

__all__ = ["spec_text", "spec_json"]

_SI_DIM = {"Hz": "frequency", "V": "voltage", "ohm": "resistance", "F": "capacitance", "K": "temperature"}


def spec_json(spec, spec_path) -> str:
    def plain(v):
        return None if isinstance(v, float) and math.isinf(v) else v
    return json.dumps({"source": str(spec_path), "fields": {k: {"value": plain(v), "unit": u}
                                                            for k, v, u in spec.normalised()}}, indent=2)


def spec_text(spec, spec_path, catalog, stock=None) -> str:
    table = []
    for key, value, unit in spec.normalised():
        if isinstance(value, float):
            dim = _SI_DIM.get(unit.split(" per ")[0]) or ("fraction" if unit == "1" else None)
            shown = ""
            if dim:
                shown = "-" if math.isinf(value) else units.format_quantity(value, dim)
            if key == "amplitude.target":
                peak = units.Amplitude(float(f"{spec.amplitude.peak_v:.4g}"), "pk")
                shown = units.format_amplitude(peak)
            table.append([key, f"{value:.6g}", unit, shown])
        else:
            table.append([key, str(value), unit, ""])
    stocked = f", stock list of {len(stock.items)} line(s)" if stock else ""
    return (f"spec {spec_path}: ok ({len(catalog.sources)} catalog file(s){stocked})\n"
            + render_table(["field", "SI value", "SI unit", "reads as"], table))
