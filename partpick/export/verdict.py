"""The verdict of one candidate as terminal text and JSON (``partpick check``)."""

from __future__ import annotations

import math

from partpick import units
from partpick.export.table import render_table
from partpick.verify import Check, Verdict

__all__ = ["render_verdict", "render_point", "fmt_value", "verdict_word", "failure_line", "worst_line", "check_json",
           "check_text", "check_data", "transient_text"]


def fmt_value(value: float | None, dim: str) -> str:
    """A value of dimension ``dim`` in engineering notation, 4 significant digits."""
    if value is None:
        return ""
    if not math.isfinite(value):
        return "-"
    return units.format_quantity(float(f"{value:.4g}"), dim)


def render_verdict(v: Verdict) -> str:
    """Each requirement: predicted value, limit, pass/fail and margin."""
    rows = []
    for c in v.checks:
        if c.is_info:
            limit = "-"
        elif c.low is not None and c.high is not None:
            limit = f"{fmt_value(c.low, c.dim)} .. {fmt_value(c.high, c.dim)}"
        elif c.low is not None:
            limit = f">= {fmt_value(c.low, c.dim)}"
        else:
            limit = f"<= {fmt_value(c.high, c.dim)}"
        rows.append([c.name, fmt_value(c.value, c.dim), limit, verdict_word(c), fmt_value(c.margin, c.dim), c.note])
    return render_table(["requirement", "predicted", "limit", "verdict", "margin", "note"], rows)


def verdict_word(c: Check) -> str:
    """'pass', 'FAIL', or 'info' for a row that judges nothing."""
    return "info" if c.is_info else ("pass" if c.passed else "FAIL")


def render_point(name: str, p) -> str:
    """One line per operating point (frequency, amplitudes, THD, method)."""
    if not p.starts:
        return f"{name:>11}: no oscillation (startup margin {p.lin.margin * 100:+.2f} %)"
    return (f"{name:>11}: {p.freq_hz:.6g} Hz, {2 * p.osc_peak_v:.4g} Vpp at the op-amp, "
            f"{2 * p.load_peak_v:.4g} Vpp at the load, THD {p.load_thd * 100:.3g} %, "
            f"supply {p.cond.supply_v:g} V, {p.cond.temp_k - 273.15:.4g} degC ({p.method}, {p.regime})")


def failure_line(c: Check) -> str:
    """How far a failed check misses its limit."""
    if c.low is not None and c.value < c.low:
        return (f"{c.name}: {fmt_value(c.value, c.dim)} is below {fmt_value(c.low, c.dim)} by "
                f"{fmt_value(c.low - c.value, c.dim)}")
    if c.high is not None and c.value > c.high:
        return (f"{c.name}: {fmt_value(c.value, c.dim)} is above {fmt_value(c.high, c.dim)} by "
                f"{fmt_value(c.value - c.high, c.dim)}")
    return f"{c.name}: no prediction"


def worst_line(wc: dict) -> str:
    """The worst-case corners in one line."""
    lo, hi = wc["frequency_hz"]
    alo, ahi = wc["amplitude_v"]
    return (f"worst case (tolerance and temperature corners): margin {wc['margin'] * 100:+.2f} %, frequency "
            f"{lo:.6g}..{hi:.6g} Hz, amplitude {alo:.4g}..{ahi:.4g} V peak")


def check_json(c: Check) -> dict:
    return {"name": c.name, "field": c.field, "value": c.value, "low": c.low, "high": c.high,
            "passed": c.passed, "margin": c.margin, "note": c.note}


def check_data(spec_path, bom_path, r) -> dict:
    """``partpick check --format json``: the verdict of ranked item ``r``."""
    verdict, mc = r.verdict, r.mc
    return {"spec": str(spec_path), "bom": str(bom_path), "passed": verdict.passed,
            "checks": [check_json(c) for c in verdict.checks],
            "cautions": list(verdict.cautions),
            "monte_carlo": None if mc is None else {"samples": mc.samples, "seed": mc.seed, "yield": mc.yield_frac,
                                                   "shares": mc.share, "stats": mc.stats,
                                                   "samples_needed": mc.needed}}


def check_text(spec_path, bom_path, r) -> str:
    """``partpick check``: operating points, every requirement, Monte Carlo, failures,
    cautions."""
    verdict, mc, circuit = r.verdict, r.mc, r.circuit
    status = ("PASS" if verdict.passed else
              f"FAIL ({len(verdict.failed())} of {len(verdict.requirements())} requirements)")
    lines = [f"{bom_path} against {spec_path}: {status}",
             f"textbook f0 {circuit.f0_hz:.6g} Hz, gain {circuit.gain:.4g} (needs {circuit.required_gain:.4g})"]
    lines += [render_point(name, point) for name, point in verdict.corners.items()]
    lines += ["", render_verdict(verdict)]
    if mc is not None:
        st = mc.stats.get("frequency_hz")
        if st:
            lines.append(f"Monte Carlo ({mc.samples} builds, seed {mc.seed}): yield {mc.yield_frac:.1%}; frequency "
                         f"mean {st['mean']:.6g} Hz, sd {st['std']:.3g} Hz, 0.1..99.9 % {st['q001']:.6g}.."
                         f"{st['q999']:.6g} Hz; {mc.needed} builds give a +/-0.5 % yield")
            lines.append(worst_line(r.worst))
    lines += [f"fails: {failure_line(c)}" for c in verdict.failed()]
    lines += [f"caution: {caution}" for caution in verdict.cautions]
    return "\n".join(lines)


def transient_text(t) -> str:
    """The transient summary (:class:`partpick.verify.TransientSummary`) in one line."""
    if not t.starts:
        return "transient: the circuit does not start (the kick dies away)"
    if t.stats is None:
        return "transient: no oscillation within the simulated time"
    st = t.stats
    settle = f"{t.settle_s * 1e3:.4g} ms" if t.settle_s is not None else "not within the run"
    return (f"transient ({t.cycles:.0f} cycles from a 10 mV kick): {st.freq_hz:.6g} Hz, {st.vpp_v:.4g} Vpp at the "
            f"load, THD {st.thd_frac * 100:.3g} %, settles (2 %) after {settle}"
            + ("" if st.settled else "; still changing at the end"))
