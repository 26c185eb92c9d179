"""One self-contained HTML page per design run: the requirement, the chosen BOM, its
circuit drawing, the verdict with margins, the predicted waveform and spectrum, the
Monte Carlo histograms, the cost-accuracy front, the cautions and the alternatives.
Charts are inline SVG; the page needs no script and no network."""

from __future__ import annotations

import html

import numpy as np

from partpick import __version__
from partpick.export import shown, svgplot
from partpick.export.purchase import COLUMN_LEGEND, PURCHASE_COLUMNS, purchase_rows
from partpick.export.schematic import schematic_svg
from partpick.export.summary import derating_lines, design_legend
from partpick.export.tradeoff_view import front_legend
from partpick.export.verdict import VERDICT_LEGEND, limit_text

__all__ = ["render_report"]

CSS = """
body{font-family:system-ui,sans-serif;margin:24px;max-width:1100px;color:#222}
h1{font-size:22px}h2{font-size:17px;margin-top:28px;border-bottom:1px solid #ccc}
table{border-collapse:collapse;font-size:12.5px}td,th{border:1px solid #ccc;padding:3px 7px;text-align:left}
th{background:#f2f4f7}.pass{color:#17702b;font-weight:600}.fail{color:#b3261e;font-weight:600}
.charts{display:flex;flex-wrap:wrap;gap:16px}.note{color:#555;font-size:12px}.caution{color:#8a4b00}
#schematic svg{max-width:100%;height:auto}.legend{font-size:12px;color:#444;columns:2;margin-top:8px}
.legend dt{font-weight:600;float:left;margin-right:6px}.legend dd{margin:0 0 3px 0}
#bom{font-size:11.5px}#bom td:nth-child(5){max-width:230px}
"""


def _e(x) -> str:
    return html.escape(str(x))


def _table(headers, rows, table_id: str) -> str:
    head = "".join(f"<th>{_e(h)}</th>" for h in headers)
    body = "".join("<tr>" + "".join(f"<td>{c}</td>" for c in row) + "</tr>" for row in rows)
    return f'<table id="{table_id}"><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>'


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


def _legend(items) -> str:
    """A legend for a table's columns: (column, meaning) pairs."""
    return '<dl class="legend">' + "".join(f"<dt>{_e(k)}</dt><dd>{_e(v)}</dd>" for k, v in items) + "</dl>"


def render_report(spec, d, catalog, *, points=None, front=None, stock=None, spectrum=None) -> str:
    """The HTML page for design result ``d`` (see module docstring), in the user's units
    (the spec's amplitude kind, kHz or Hz, degC, %), each table with a legend;
    ``spectrum``: the nominal steady state of the #1 candidate at its load, (Hz,
    harmonics 1..9 in V)."""
    best = d.ranked[0]
    v = best.verdict
    f_div, f_unit = shown.frequency_axis(spec)
    a_mul, a_unit = shown.amplitude_axis(spec)
    parts = [f"<!DOCTYPE html><html lang=\"en\"><head><meta charset=\"utf-8\"><title>partpick report: "
             f"{_e(spec.name)}</title><style>{CSS}</style></head><body>",
             f"<h1>partpick design report: {_e(spec.name)}</h1>",
             f"<p class=\"note\">{_e(spec.description)} &middot; partpick {__version__} &middot; "
             f"{'demo catalog (invented parts)' if catalog.demo else 'catalog: ' + _e(', '.join(catalog.sources))}</p>"]
    # requirement
    parts += ['<h2>Requirement</h2>', _table(["requirement", "value"], [[_e(c) for c in row]
                                                                      for row in shown.spec_rows(spec)],
                                             "requirement")]
    # BOM
    rows = purchase_rows(best.bom, catalog, stock=stock, builds=spec.builds)
    keep = [i for i, col in enumerate(PURCHASE_COLUMNS) if any(row[i] for row in rows)]  # no empty columns
    cols = [PURCHASE_COLUMNS[i] for i in keep]
    parts += [f"<h2>Bill of materials (rank 1, {best.cost:.3f} {_e(catalog.currency)} per board)</h2>",
              _table(cols, [[_e(row[i]) for i in keep] for row in rows], "bom"),
              _legend([(k, COLUMN_LEGEND.get(k, "the catalog family's description")) for k in cols])]
    # circuit
    parts += ['<h2>Circuit</h2>', f'<div id="schematic">{schematic_svg(best.bom, catalog)}</div>',
              f'<p class="note">textbook f0 {_e(shown.frequency(best.circuit.f0_hz))}, gain {best.circuit.gain:.4g} '
              f'(needs {best.circuit.required_gain:.4g}); values in RKM code (IEC 60062: 4k7 = 4.7 k&Omega;, '
              f'2n2 = 2.2 nF); designators as in the BOM and the netlist.</p>']
    # verdict
    vrows = [[_e(c.name), _e(shown.check_value(c.value, c, spec)),
              "-" if c.is_info else _e(limit_text(c, spec, "\u2265", "\u2264")),
              "info" if c.is_info else '<span class="pass">pass</span>' if c.passed else '<span class="fail">FAIL</span>',
              _e(shown.check_value(c.margin, c, spec)), _e(c.note)] for c in v.checks]
    parts += ['<h2>Verdict</h2>', _table(["requirement", "predicted", "limit", "verdict", "margin", "note"], vrows,
                                         "verdict"), f'<p class="note">{_e(VERDICT_LEGEND)}</p>']
    # derating rules
    parts += ['<h2>Derating rules</h2>', _table(["rule"], [[_e(line)] for line in
                                                           derating_lines(spec, best.circuit.opamp)], "derating")]
    # waveform and spectrum
    wf = _waveform(spectrum)
    parts.append('<h2>Predicted waveform and spectrum (nominal)</h2><div class="charts">')
    if wf is not None:
        t, y, db = wf
        parts.append(f'<div id="waveform">{svgplot.line_chart(t, y, xlabel="time, ms", ylabel="voltage at the load, V", title="waveform")}</div>')
        parts.append(f'<div id="spectrum">{svgplot.bar_chart([str(k) for k in range(1, 10)], db, xlabel="harmonic (1 = fundamental)", ylabel="dB re fundamental", title="spectrum", floor=-100)}</div>')
    parts.append("</div>")
    # Monte Carlo
    mc = best.mc
    parts.append('<h2>Monte Carlo</h2><div class="charts" id="montecarlo">')
    if mc is not None and mc.freq_hz.size:
        f, a = spec.frequency, spec.amplitude
        parts.append(svgplot.histogram(mc.freq_hz / f_div, lo=f.min_hz / f_div, hi=f.max_hz / f_div,
                                       xlabel=f"frequency, {f_unit}", title="frequency"))
        parts.append(svgplot.histogram(mc.amp_v * a_mul, lo=a.peak_v * (1 - a.tolerance_frac) * a_mul,
                                       hi=a.peak_v * (1 + a.tolerance_frac) * a_mul,
                                       xlabel=f"amplitude at the load, {a_unit}", title="amplitude"))
        parts.append("</div>")
        parts.append(f'<p class="note">{mc.samples} builds, seed {mc.seed}: yield {mc.yield_frac:.1%} '
                     f'(startup {mc.share["startup"]:.1%}, frequency {mc.share["frequency"]:.1%}, amplitude '
                     f'{mc.share["amplitude"]:.1%}, THD {mc.share["thd"]:.1%}); {mc.needed} builds give a '
                     f'&plusmn;0.5 % yield; red lines: the spec\'s limits.</p>')
    else:
        parts.append("</div>")
    # tradeoff
    parts.append('<h2>Cost against accuracy</h2><div id="tradeoff">')
    if points and front:
        parts.append(svgplot.scatter_front([(p.cost, p.accuracy * 100) for p in points],
                                           [(p.cost, p.accuracy * 100) for p in front],
                                           xlabel=f"cost per board, {catalog.currency}",
                                           ylabel="frequency error at the yield, %", title="tradeoff"))
        parts.append(_table([f"cost {catalog.currency}", "accuracy", "yield", "arm families", "from run"],
                            [[f"{p.cost:.3f}", f"&plusmn;{p.accuracy * 100:.3f} %", f"{p.yield_frac:.1%}",
                              _e(p.families), _e(p.source)] for p in front], "front"))
        parts.append("".join(f'<p class="note">{_e(line)}</p>' for line in front_legend(spec, catalog,
                                                                                           mc.samples if mc else 0)))
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
                    _e(shown.frequency(p.freq_hz)), _e(f"{r.freq_error * 100:+.3f} %"),
                    _e(shown.amplitude(p.load_peak_v, spec)), _e(f"{r.thd * 100:.2f} %"),
                    _e(f"{p.lin.margin * 100:.2f} %"), _e(f"{r.yield_frac:.1%}"), _e(f"{r.cost:.3f}"), str(r.parts),
                    _e(r.bom.line("opamp").family), _e(_family(r.bom.control_part())), _e(r.bom.stage)])
    parts += ['<h2>Alternatives</h2>', _table(["rank", "verdict", "frequency", "error", "at load", "THD", "margin",
                                               "yield", f"cost {catalog.currency}", "parts", "op-amp", "limiter",
                                               "stage"], alt, "alternatives"),
              "".join(f'<p class="note">{_e(line)}</p>' for line in design_legend(d, spec, catalog).splitlines())]
    parts.append('<p class="note">Low-voltage signal circuits only; for anything mains-connected or safety-related '
                 'follow local codes and licensed practice.</p></body></html>')
    return "\n".join(parts)
