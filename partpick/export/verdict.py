"""The verdict of one candidate as a terminal table."""

from __future__ import annotations

import math

from partpick import units
from partpick.export.table import render_table
from partpick.verify import Verdict

__all__ = ["render_verdict", "render_point"]


def _fmt(value: float | None, dim: str) -> str:
    if value is None:
        return ""
    if not math.isfinite(value):
        return "-"
    return units.format_quantity(float(f"{value:.4g}"), dim)


def render_verdict(v: Verdict) -> str:
    """Each requirement: predicted value, limit, pass/fail and margin."""
    rows = []
    for c in v.checks:
        if c.low is not None and c.high is not None:
            limit = f"{_fmt(c.low, c.dim)} .. {_fmt(c.high, c.dim)}"
        elif c.low is not None:
            limit = f">= {_fmt(c.low, c.dim)}"
        else:
            limit = f"<= {_fmt(c.high, c.dim)}"
        rows.append([c.name, _fmt(c.value, c.dim), limit, "pass" if c.passed else "FAIL",
                     _fmt(c.margin, c.dim), c.note])
    return render_table(["requirement", "predicted", "limit", "verdict", "margin", "note"], rows)


def render_point(name: str, p) -> str:
    """One line per operating point (frequency, amplitudes, THD, method)."""
    if not p.starts:
        return f"{name:>11}: no oscillation (startup margin {p.lin.margin * 100:+.2f} %)"
    return (f"{name:>11}: {p.freq_hz:.6g} Hz, {2 * p.osc_peak_v:.4g} Vpp at the op-amp, "
            f"{2 * p.load_peak_v:.4g} Vpp at the load, THD {p.load_thd * 100:.3g} %, "
            f"supply {p.cond.supply_v:g} V, {p.cond.temp_k - 273.15:.4g} degC ({p.method}, {p.regime})")
