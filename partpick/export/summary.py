"""What ``partpick design`` prints and writes: the ranked table, the #1 bill of
materials, and the machine forms (JSON, CSV, YAML) of the ranked candidates."""

from __future__ import annotations

import json

from partpick import units
from partpick.bom import ROLES, bom_to_csv, bom_to_yaml
from partpick.derating import RULES
from partpick.refusal import default_notes
from partpick.export import shown
from partpick.export.table import render_table
from partpick.export.verdict import check_json, worst_line
from partpick.pricing import purchase_lines

__all__ = ["summary", "design_table", "design_json", "design_csv", "design_yaml", "bom_note", "candidate_json",
           "bom_rows", "design_output", "explain_text", "derating_lines"]


def summary(r) -> dict:
    """The figures of one ranked candidate, SI units and fractions."""
    v = r.verdict
    p = v.nominal
    return {
        "passed": v.passed,
        "frequency_hz": p.freq_hz, "frequency_error": r.freq_error,
        "amplitude_load_peak_v": p.load_peak_v, "amplitude_error": r.amp_error,
        "thd": r.thd, "startup_margin": p.lin.margin, "worst_corner_margin": v.worst_margin,
        "yield": r.yield_frac, "yield_shares": r.mc.share if r.mc else None,
        "monte_carlo": r.mc.stats if r.mc else None, "samples": r.mc.samples if r.mc else 0,
        "worst_case": r.worst,
        "cost": r.cost, "parts": r.parts, "stage": r.bom.stage,
        "failed": [c.name for c in v.failed()],
    }


def _bom_json(bom) -> list[dict]:
    return [{"ref": ln.ref, "role": ln.role, "family": ln.family, "value": ln.value} for ln in bom.lines]


def bom_rows(r, catalog, stock=None) -> list[list]:
    """Rows of the BOM table, one per purchasing line: designators, roles, quantity per
    board, value, family, unit price, line cost (parts, line price and ordering cost:
    the lines add up to the candidate's cost)."""
    rows = []
    for ln in purchase_lines(r.bom, catalog, stock):
        dim = ROLES[ln.roles[0]][1]
        value = units.format_quantity(ln.value, dim, 3) if dim else ""
        rows.append([",".join(ln.refs), ",".join(ln.roles), ln.quantity, value, ln.family, f"{ln.unit_price:.3f}",
                     f"{ln.cost:.3f}"])
    return rows


def design_table(d, catalog, spec, stock=None) -> str:
    """The ranked candidates as a table, then the #1 bill of materials and its cautions."""
    lines = []
    rows = []
    for i, r in enumerate(d.ranked, 1):
        s = summary(r)
        lim = r.bom.control_part()
        rows.append([i, "pass" if s["passed"] else "FAIL", shown.frequency(s["frequency_hz"]),
                     f"{s['frequency_error'] * 100:+.3f} %",
                     shown.amplitude(s["amplitude_load_peak_v"], spec), _thd(s["thd"]),
                     f"{s['startup_margin'] * 100:.2f} %", f"{s['yield'] * 100:.1f} %",
                     f"{s['cost']:.3f}", s["parts"], r.bom.line("opamp").family, lim.family if lim else "-",
                     r.bom.stage])
    head = ["#", "verdict", "frequency", "error", "at load", "THD", "margin", "yield", f"cost {catalog.currency}",
            "parts", "op-amp", "control", "stage"]
    if spec.topology == "auto":   # every topology ranked together: which one each row is
        head.append("topology")
        rows = [row + [r.bom.topology] for row, r in zip(rows, d.ranked)]
    lines.append(render_table(head, rows, right=(0, 2, 3, 4, 5, 6, 7, 8, 9)))
    lines.append(design_legend(d, spec, catalog))
    best = d.ranked[0]
    lines.append("")
    lines.append(f"#1 bill of materials (textbook f0 {shown.frequency(best.circuit.f0_hz)}, gain "
                 f"{best.circuit.gain:.4g}, needs {best.circuit.required_gain:.4g}):")
    lines.append(render_table(["ref", "role", "qty", "value", "family", f"unit {catalog.currency}",
                               f"line {catalog.currency}"], bom_rows(best, catalog, stock), right=(2, 5, 6),
                              indent="  "))
    lines.append(f"  line = unit x qty + the family's line price{' + ordering cost off the shelf' if stock else ''};"
                 f" total {best.cost:.3f} {catalog.currency} per board")
    for caution in best.verdict.cautions:
        lines.append(f"caution: {caution}")
    return "\n".join(lines)


def _thd(frac: float) -> str:
    """THD in percent to three significant figures (a JFET control's 0.00231 % and a
    limiter's 2.21 % alike)."""
    return f"{frac * 100:#.3g}".rstrip(".") + " %" if frac == frac else "-"


def design_legend(d, spec, catalog) -> str:
    """What each column of the design table means, and which operating point it is at."""
    samples = next((r.mc.samples for r in d.ranked if r.mc is not None), 0)
    return "\n".join([
        f"frequency, error, at load: nominal point (mid supply, {shown.temperature(spec.temperature.nominal_k)}),"
        f" error against the {shown.frequency(spec.frequency.target_hz)} target, amplitude at the load in the spec's "
        f"unit; THD: worst of the supply and temperature ends",
        "margin: small-signal startup margin at the nominal point (loop gain at the phase-zero frequency - 1); "
        f"yield: share of {samples} Monte Carlo builds meeting every requirement",
        f"cost: per board in {catalog.currency} (parts, line prices, ordering costs); parts: physical parts per board; "
        "control: the amplitude control's part (the diode limiter, or the JFET of a JFET control); "
        "stage: the output stage (none, follower, gain, attenuator, buffered-attenuator: a divider then a follower)"]
        + (["topology: the oscillator of the row (topology: auto designs every one that fits and ranks them "
            "together)"] if spec.topology == "auto" else []))


def design_json(spec_path, d, topology: bool = False) -> str:
    """The design as JSON; with ``topology`` (a spec with topology: auto) each candidate
    names its topology."""
    return json.dumps({"spec": str(spec_path), "candidates": [
        {"rank": i, **summary(r), **({"topology": r.bom.topology} if topology else {}), "bom": _bom_json(r.bom)}
        for i, r in enumerate(d.ranked, 1)],
        "stopped_at_budget": d.stopped, "budget": d.budget, "timings_s": d.timings}, indent=2, default=lambda x: None)


def design_csv(d) -> str:
    out = ["rank,ref,role,family,value"]
    for i, r in enumerate(d.ranked, 1):
        rows = [row for row in bom_to_csv(r.bom).splitlines() if not row.startswith("#")][1:]
        out += [f"{i},{row}" for row in rows]
    return "\n".join(out)


def design_yaml(spec_path, d) -> str:
    return "\n".join(bom_to_yaml(r.bom, header=f"rank {i} for {spec_path}") for i, r in enumerate(d.ranked, 1))


def bom_note(spec_path, i: int, r) -> str:
    """The header of a written BOM file: where it came from and what it predicts."""
    s_ = summary(r)
    note = (f"partpick design {spec_path}, rank {i}: {'meets' if s_['passed'] else 'misses'} the spec\n"
            f"predicted {s_['frequency_hz']:.6g} Hz ({s_['frequency_error'] * 100:+.3f} %), "
            f"{2 * s_['amplitude_load_peak_v']:.4g} Vpp at the load, THD {s_['thd'] * 100:.2f} %\n"
            f"yield {s_['yield']:.1%} ({s_['samples']} Monte Carlo builds)")
    if r.worst:
        note += "\n" + worst_line(r.worst)
    return note


def candidate_json(i: int, r) -> str:
    """One candidate with its verdict, as written beside its BOM file."""
    return json.dumps({"rank": i, **summary(r), "checks": [check_json(c) for c in r.verdict.checks],
                       "cautions": list(r.verdict.cautions), "bom": _bom_json(r.bom)}, indent=2,
                      default=lambda x: None)


def design_output(d, spec, spec_path, catalog, fmt: str, *, keys=None, quiet: bool = False,
                  verbose: bool = False, stock=None) -> str:
    """What ``partpick design`` prints in format ``fmt`` (text, json, csv, yaml)."""
    if fmt == "json":
        return design_json(spec_path, d, spec.topology == "auto")
    if fmt == "csv":
        return design_csv(d)
    if fmt == "yaml":
        return design_yaml(spec_path, d)
    lines = [f"{spec.name}: {len(d.passing)} of {len(d.ranked)} ranked candidates meet every requirement "
             f"(ranked by {', '.join(keys or spec.rank_by)})"]
    lines += [f"note: {n}" for n in default_notes(spec)]
    if d.stopped:
        lines.append(f"note: verification stopped at its budget of {d.budget} candidates before it had ruled out "
                     "every candidate that could beat #1 by the search's estimates; a larger --budget verifies more")
    if not quiet:
        lines.append(design_table(d, catalog, spec, stock))
    if verbose:
        lines.append("time per stage: " + ", ".join(f"{k} {v:.2f} s" for k, v in d.timings.items()))
    return "\n".join(lines)


def derating_lines(spec, opamp=None) -> list[str]:
    """The derating rules in force, each with its value, meaning and where it was set;
    with ``opamp``, the package limit that follows for it."""
    from partpick.verify import package_limit

    d = spec.derating
    out = []
    for rule in RULES:
        value = units.format_quantity(float(f"{d.value(rule.key):.4g}"), rule.dim)
        out.append(f"{rule.key} = {value}: {rule.meaning} ({d.origin_of(rule.key)}; {rule.source})")
    if opamp is not None:
        out.append(f"package limit of {opamp.id}: {package_limit(opamp, spec)[1]}")
    return out


def explain_text(d, spec) -> str:
    """``design --explain``: what the search left out and why, and the derating rules."""
    lines = ["not considered:"] + [f"  {line}" for line in d.notes or ("(nothing: every allowed part was searched)",)]
    best = d.ranked[0].circuit.opamp if d.ranked else None
    lines += ["derating rules (set them in the spec's 'derating:' or a rules file it names):"]
    lines += [f"  {line}" for line in derating_lines(spec, best)]
    return "\n".join(lines)
