"""One self-contained HTML page per design run: the requirement, the chosen BOM, its
circuit drawing, the verdict with margins, the predicted waveform and spectrum, the
Monte Carlo histograms, the cost-accuracy front, the cautions and the alternatives.
Charts are inline SVG; the page needs no script and no network."""

from __future__ import annotations

import html
import math

import numpy as np

from partpick import __version__, units
from partpick.export import svgplot
from partpick.export.purchase import PURCHASE_COLUMNS, purchase_rows
from partpick.export.schematic import schematic_svg

__all__ = ["render_report"]

CSS = """
body{font-family:system-ui,sans-serif;margin:24px;max-width:1100px;color:#222}
h1{font-size:22px}h2{font-size:17px;margin-top:28px;border-bottom:1px solid #ccc}
table{border-collapse:collapse;font-size:12.5px}td,th{border:1px solid #ccc;padding:3px 7px;text-align:left}
th{background:#f2f4f7}.pass{color:#17702b;font-weight:600}.fail{color:#b3261e;font-weight:600}
.charts{display:flex;flex-wrap:wrap;gap:16px}.note{color:#555;font-size:12px}.caution{color:#8a4b00}
"""


def _e(x) -> str:
    return html.escape(str(x))


def _table(headers, rows, table_id: str) -> str:
    head = "".join(f"<th>{_e(h)}</th>" for h in headers)
    body = "".join("<tr>" + "".join(f"<td>{c}</td>" for c in row) + "</tr>" for row in rows)
    return f'<table id="{table_id}"><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>'


def _fmt(v, dim):
    if v is None:
        return ""
    if isinstance(v, float) and not math.isfinite(v):
        return "-"
    return units.format_quantity(float(f"{v:.4g}"), dim)


def _waveform(spectrum):
    """Two periods of the predicted load voltage and its harmonic levels (dB re
    fundamental), from ``spectrum`` = (frequency in Hz, complex load harmonics 1..9 in V)."""
    if spectrum is None:
        return None
    freq_hz, harmonics = spectrum
    h = np.array(harmonics[:9])
    t = np.linspace(0, 2 / freq_hz, 400)
    v = sum(np.real(h[k] * np.exp(1j * 2 * np.pi * (k + 1) * freq_hz * t)) for k in range(h.size))
    mag = np.abs(h)
    db = 20 * np.log10(np.maximum(mag / mag[0], 1e-6))
    return t * 1e3, v, db


def _family(line) -> str:
    return line.family if line is not None else "-"


def render_report(spec, d, catalog, *, points=None, front=None, stock=None, spectrum=None) -> str:
    """The HTML page for design result ``d`` (see module docstring); ``spectrum``: the
    nominal steady state of the #1 candidate at its load, (Hz, harmonics 1..9 in V)."""
    best = d.ranked[0]
    v = best.verdict
    parts = [f"<!DOCTYPE html><html lang=\"en\"><head><meta charset=\"utf-8\"><title>partpick report: "
             f"{_e(spec.name)}</title><style>{CSS}</style></head><body>",
             f"<h1>partpick design report: {_e(spec.name)}</h1>",
             f"<p class=\"note\">{_e(spec.description)} &middot; partpick {__version__} &middot; "
             f"{'demo catalog (invented parts)' if catalog.demo else 'catalog: ' + _e(', '.join(catalog.sources))}</p>"]
    # requirement
    rows = [[_e(k), _e(f"{val:.6g}" if isinstance(val, float) else val), _e(u)] for k, val, u in spec.normalised()]
    parts += ['<h2>Requirement</h2>', _table(["field", "value (SI)", "unit"], rows, "requirement")]
    # BOM
    rows = purchase_rows(best.bom, catalog, stock=stock, builds=spec.builds)
    parts += [f"<h2>Bill of materials (rank 1, {best.cost:.3f} {_e(catalog.currency)} per board)</h2>",
              _table(PURCHASE_COLUMNS, [[_e(c) for c in row] for row in rows], "bom")]
    # circuit
    parts += ['<h2>Circuit</h2>', f'<div id="schematic">{schematic_svg(best.bom)}</div>',
              f'<p class="note">textbook f0 {best.circuit.f0_hz:.6g} Hz, gain {best.circuit.gain:.4g} '
              f'(needs {best.circuit.required_gain:.4g}); ground symbols are the signal reference.</p>']
    # verdict
    vrows = []
    for c in v.checks:
        lim = (f"{_fmt(c.low, c.dim)} .. {_fmt(c.high, c.dim)}" if c.low is not None and c.high is not None
               else (f"&ge; {_fmt(c.low, c.dim)}" if c.low is not None else f"&le; {_fmt(c.high, c.dim)}"))
        verdict = '<span class="pass">pass</span>' if c.passed else '<span class="fail">FAIL</span>'
        vrows.append([_e(c.name), _e(_fmt(c.value, c.dim)), lim, verdict, _e(_fmt(c.margin, c.dim)), _e(c.note)])
    parts += ['<h2>Verdict</h2>', _table(["requirement", "predicted", "limit", "verdict", "margin", "note"], vrows,
                                         "verdict")]
    # waveform and spectrum
    wf = _waveform(spectrum)
    parts.append('<h2>Predicted waveform and spectrum (nominal)</h2><div class="charts">')
    if wf is not None:
        t, y, db = wf
        parts.append(f'<div id="waveform">{svgplot.line_chart(t, y, xlabel="time, ms", ylabel="V at the load", title="waveform")}</div>')
        parts.append(f'<div id="spectrum">{svgplot.bar_chart([str(k) for k in range(1, 10)], db, xlabel="harmonic", ylabel="dB re fundamental", title="spectrum", floor=-100)}</div>')
    parts.append("</div>")
    # Monte Carlo
    mc = best.mc
    parts.append('<h2>Monte Carlo</h2><div class="charts" id="montecarlo">')
    if mc is not None and mc.freq_hz.size:
        f, a = spec.frequency, spec.amplitude
        parts.append(svgplot.histogram(mc.freq_hz, lo=f.min_hz, hi=f.max_hz, xlabel="frequency, Hz", title="frequency"))
        parts.append(svgplot.histogram(mc.amp_v, lo=a.peak_v * (1 - a.tolerance_frac), hi=a.peak_v * (1 + a.tolerance_frac),
                                       xlabel="amplitude at the load, V peak", title="amplitude"))
        parts.append("</div>")
        parts.append(f'<p class="note">{mc.samples} builds, seed {mc.seed}: yield {mc.yield_frac:.1%} '
                     f'(startup {mc.share["startup"]:.1%}, frequency {mc.share["frequency"]:.1%}, amplitude '
                     f'{mc.share["amplitude"]:.1%}, THD {mc.share["thd"]:.1%}); {mc.needed} builds give a '
                     f'&plusmn;0.5 % yield.</p>')
    else:
        parts.append("</div>")
    # tradeoff
    parts.append('<h2>Cost against accuracy</h2><div id="tradeoff">')
    if points and front:
        parts.append(svgplot.scatter_front([(p.cost, p.accuracy * 100) for p in points],
                                           [(p.cost, p.accuracy * 100) for p in front],
                                           xlabel=f"cost per board, {catalog.currency}",
                                           ylabel="frequency error at the yield, %", title="tradeoff"))
        parts.append(_table(["cost", "accuracy", "yield", "arm families", "from run"],
                            [[f"{p.cost:.3f}", f"&plusmn;{p.accuracy * 100:.3f} %", f"{p.yield_frac:.1%}",
                              _e(p.families), _e(p.source)] for p in front], "front"))
    else:
        parts.append('<p class="note">not computed (run <code>partpick report</code>)</p>')
    parts.append("</div>")
    # cautions and alternatives
    parts.append('<h2>Cautions</h2><ul id="cautions">' +
                 "".join(f'<li class="caution">{_e(c)}</li>' for c in v.cautions) + "</ul>")
    alt = []
    for i, r in enumerate(d.ranked, 1):
        p = r.verdict.nominal
        alt.append([str(i), '<span class="pass">pass</span>' if r.verdict.passed else '<span class="fail">FAIL</span>',
                    _e(f"{p.freq_hz:.6g} Hz"), _e(f"{r.freq_error * 100:+.3f} %"), _e(f"{2 * p.load_peak_v:.4g} Vpp"),
                    _e(f"{r.yield_frac:.1%}"), _e(f"{r.cost:.3f}"), _e(r.bom.line("opamp").family),
                    _e(_family(r.bom.control_part())), _e(r.bom.stage)])
    parts += ['<h2>Alternatives</h2>', _table(["rank", "verdict", "frequency", "error", "at load", "yield", "cost",
                                               "op-amp", "limiter", "stage"], alt, "alternatives")]
    parts.append('<p class="note">Low-voltage signal circuits only; for anything mains-connected or safety-related '
                 'follow local codes and licensed practice.</p></body></html>')
    return "\n".join(parts)
