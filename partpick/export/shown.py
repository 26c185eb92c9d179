"""Values as the user wrote them: amplitudes in the spec's own kind (Vpk, Vpp or Vrms),
frequencies in Hz or kHz with their prefix, temperatures in degC, fractions in %. One
home for the few conversions every table, report and chart of a design shares."""

from __future__ import annotations

import math

from partpick import units

__all__ = ["amplitude", "amplitude_axis", "frequency", "frequency_axis", "temperature", "check_value", "spec_rows"]


def amplitude(peak_v: float, spec, digits: int = 4) -> str:
    """A sine's amplitude (peak_v, V) in the kind the spec's target was written in."""
    if not math.isfinite(peak_v):
        return "-"
    return units.format_amplitude(units.Amplitude(peak_v, "pk").as_kind(spec.amplitude.target.kind), digits)


def amplitude_axis(spec) -> tuple[float, str]:
    """(factor from peak volts, unit) for a chart axis in the spec's amplitude kind."""
    kind = spec.amplitude.target.kind
    return {"pk": 1.0, "pp": 2.0, "rms": 1 / math.sqrt(2)}[kind], f"V{kind}"


def frequency(hz: float, digits: int = 6) -> str:
    """A frequency with its SI prefix ('49.9965 kHz', '19.9923 Hz')."""
    return units.format_quantity(float(f"{hz:.{digits}g}"), "frequency") if math.isfinite(hz) else "-"


def frequency_axis(spec) -> tuple[float, str]:
    """(divisor, unit) for a chart axis: kHz from a 1 kHz target up, else Hz."""
    return (1e3, "kHz") if spec.frequency.target_hz >= 1e3 else (1.0, "Hz")


def temperature(k: float) -> str:
    """A temperature (K) in degC, to 0.01 K."""
    return f"{round(k - 273.15, 2):g} degC"


def check_value(value: float | None, c, spec) -> str:
    """A value of check ``c`` in the user's units: amplitudes at the load in the spec's
    kind, everything else in engineering notation with its unit (4 digits)."""
    if value is None:
        return ""
    if c.dim == "voltage" and c.field.startswith("amplitude"):
        return amplitude(value, spec)
    if not math.isfinite(value):
        return "-"
    if c.dim == "temperature":
        return temperature(value)
    if c.dim == "angle":
        return f"{math.degrees(value):.4g} deg"
    return units.format_quantity(float(f"{value:.4g}"), c.dim)


def _q(value: float, dim: str) -> str:
    return "open" if math.isinf(value) else units.format_quantity(float(f"{value:.6g}"), dim)


def spec_rows(spec) -> list[list[str]]:
    """The requirement as (field, value) rows in the user's units."""
    f, a, s, ld, t = spec.frequency, spec.amplitude, spec.supply, spec.load, spec.temperature
    per_rail = " per rail (+/-)" if s.kind == "dual" else " (one rail to ground)"
    load = _q(ld.resistance_ohm, "resistance") + (f" || {_q(ld.capacitance_f, 'capacitance')}"
                                                   if ld.capacitance_f else "")
    rows = [["frequency", f"{_q(f.target_hz, 'frequency')} +/- {_q(f.tolerance_frac, 'fraction')}"],
            ["amplitude at the load", f"{units.format_amplitude(a.target)} +/- {_q(a.tolerance_frac, 'fraction')}"],
            ["supply", f"{s.kind}, {_q(s.min_v, 'voltage')} .. {_q(s.max_v, 'voltage')}{per_rail}"],
            ["load", load],
            ["temperature", f"{temperature(t.min_k)} .. {temperature(t.max_k)} (nominal {temperature(t.nominal_k)})"],
            ["distortion", f"THD <= {_q(spec.max_thd_frac, 'fraction')}"
                           + (" at each load" if spec.load_cosine is not None else "")],
            ["yield", f">= {_q(spec.yield_min_frac, 'fraction')} of builds meet every requirement"]]
    for kind in ("resistors", "capacitors", "opamps", "limiters"):
        ids = spec.parts.of_kind(kind)
        rows.append([f"parts: {kind}", "all" if ids is None else ", ".join(ids) or "none"])
    if spec.load_cosine is not None:
        lc = spec.load_cosine
        rows.insert(4, ["cosine load", _q(lc.resistance_ohm, "resistance")
                        + (f" || {_q(lc.capacitance_f, 'capacitance')}" if lc.capacitance_f else "")])
    if spec.quadrature is not None:
        q = spec.quadrature
        rows.insert(7, ["quadrature", f"90 deg +/- {math.degrees(q.phase_error_rad):.4g} deg, amplitudes within "
                                      f"+/- {_q(q.amplitude_match_frac, 'fraction')}"])
    rows += [["output stage", spec.output_stage], ["ranked by", ", ".join(spec.rank_by)],
             ["boards per order", str(spec.builds)]]
    if spec.stock is not None:
        rows.append(["stock list", f"{spec.stock.path.name} ({spec.stock.mode})"])
    return rows
