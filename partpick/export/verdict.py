"""The verdict of one candidate as terminal text and JSON (``partpick check``)."""

from __future__ import annotations

import math

from partpick import units
from partpick.export import shown
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


def limit_text(c: Check, spec, ge: str = ">=", le: str = "<=") -> str:
    """A check's limit in the user's units ('4.95 kHz .. 5.05 kHz', '>= 0 %')."""
    if c.low is not None and c.high is not None:
        return f"{shown.check_value(c.low, c, spec)} .. {shown.check_value(c.high, c, spec)}"
    if c.low is not None:
        return f"{ge} {shown.check_value(c.low, c, spec)}"
    return f"{le} {shown.check_value(c.high, c, spec)}"


VERDICT_LEGEND = ("predicted: at the operating point the note names (nominal: mid supply, nominal temperature; "
                  "worst: the worst of the supply and temperature ends); margin: distance to the nearer limit, "
                  "negative when outside; amplitudes at the load in the spec's unit")


def render_verdict(v: Verdict, spec) -> str:
    """Each requirement: predicted value, limit, pass/fail and margin, in the user's
    units, with a legend."""
    rows = []
    for c in v.checks:
        rows.append([c.name, shown.check_value(c.value, c, spec), "-" if c.is_info else limit_text(c, spec),
                     verdict_word(c), shown.check_value(c.margin, c, spec), c.note])
    return render_table(["requirement", "predicted", "limit", "verdict", "margin", "note"], rows) + \
        "\n" + VERDICT_LEGEND


def verdict_word(c: Check) -> str:
    """'pass', 'FAIL', or 'info' for a row that judges nothing."""
    return "info" if c.is_info else ("pass" if c.passed else "FAIL")


def render_point(name: str, p, spec) -> str:
    """One line per operating point (frequency, amplitudes, THD, method)."""
    if not p.starts:
        return f"{name:>11}: no oscillation (startup margin {p.lin.margin * 100:+.2f} %)"
    supply = f"{'+/-' if spec.supply.kind == 'dual' else ''}{p.cond.supply_v:g} V"
    return (f"{name:>11}: {shown.frequency(p.freq_hz)}, {shown.amplitude(p.osc_peak_v, spec)} at the op-amp, "
            f"{shown.amplitude(p.load_peak_v, spec)} at the load, THD {p.load_thd * 100:.3g} %, "
            f"supply {supply}, {p.cond.temp_k - 273.15:.4g} degC ({p.method}, {p.regime})")


def failure_line(c: Check, spec) -> str:
    """How far a failed check misses its limit."""
    def q(x):
        return shown.check_value(x, c, spec)
    if c.low is not None and c.value < c.low:
        return f"{c.name}: {q(c.value)} is below {q(c.low)} by {q(c.low - c.value)}"
    if c.high is not None and c.value > c.high:
        return f"{c.name}: {q(c.value)} is above {q(c.high)} by {q(c.value - c.high)}"
    return f"{c.name}: no prediction"


def worst_line(wc: dict, spec=None) -> str:
    """The worst-case corners in one line (with ``spec``, in the user's units)."""
    lo, hi = wc["frequency_hz"]
    alo, ahi = wc["amplitude_v"]
    if spec is None:
        return (f"worst case (tolerance and temperature corners): margin {wc['margin'] * 100:+.2f} %, frequency "
                f"{lo:.6g}..{hi:.6g} Hz, amplitude {alo:.4g}..{ahi:.4g} V peak")
    return (f"worst case (tolerance and temperature corners): margin {wc['margin'] * 100:+.2f} %, frequency "
            f"{shown.frequency(lo)} .. {shown.frequency(hi)}, amplitude at the load {shown.amplitude(alo, spec)} .. "
            f"{shown.amplitude(ahi, spec)}")


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


def check_text(spec_path, bom_path, r, spec) -> str:
    """``partpick check``: operating points, every requirement, Monte Carlo, failures,
    cautions, in the user's units."""
    verdict, mc, circuit = r.verdict, r.mc, r.circuit
    status = ("PASS" if verdict.passed else
              f"FAIL ({len(verdict.failed())} of {len(verdict.requirements())} requirements)")
    lines = [f"{bom_path} against {spec_path}: {status}",
             f"textbook f0 {shown.frequency(circuit.f0_hz)}, gain {circuit.gain:.4g} (needs "
             f"{circuit.required_gain:.4g})"]
    lines += [render_point(name, point, spec) for name, point in verdict.corners.items()]
    lines += ["", render_verdict(verdict, spec)]
    if mc is not None:
        st = mc.stats.get("frequency_hz")
        if st:
            lines.append(f"Monte Carlo ({mc.samples} builds, seed {mc.seed}): yield {mc.yield_frac:.1%}; frequency "
                         f"mean {shown.frequency(st['mean'])}, sd {shown.frequency(st['std'], 3)}, 0.1..99.9 % "
                         f"{shown.frequency(st['q001'])} .. {shown.frequency(st['q999'])}; {mc.needed} builds give a "
                         f"+/-0.5 % yield")
            lines.append(worst_line(r.worst, spec))
    lines += [f"fails: {failure_line(c, spec)}" for c in verdict.failed()]
    lines += [f"caution: {caution}" for caution in verdict.cautions]
    return "\n".join(lines)


def transient_text(t, spec) -> str:
    """The transient summary (:class:`partpick.verify.TransientSummary`) in one line."""
    if not t.starts:
        return "transient: the circuit does not start (the kick dies away)"
    if t.stats is None:
        return "transient: no oscillation within the simulated time"
    st = t.stats
    settle = f"{t.settle_s * 1e3:.4g} ms" if t.settle_s is not None else "not within the run"
    return (f"transient ({t.cycles:.0f} cycles from a 10 mV kick): {shown.frequency(st.freq_hz)}, "
            f"{shown.amplitude(st.vpp_v / 2, spec)} at the "
            f"load, THD {st.thd_frac * 100:.3g} %, settles (2 %) after {settle}"
            + ("" if st.settled else "; still changing at the end"))
