"""Small, dependency-free SVG charts for the report: lines, bars and histograms.

Margins leave room for the tick labels and the axis titles, and the end ticks of the
x axis are anchored inward, so no label is clipped at the chart's edge."""

from __future__ import annotations

import html

import numpy as np

__all__ = ["line_chart", "bar_chart", "histogram", "scatter_front"]

W, H = 500, 240
LEFT, RIGHT, TOP, BOTTOM = 66, 16, 12, 48  # margins, px: y tick labels and title left, x ones below


def _tick(v: float, span: float) -> str:
    """A tick value to 4 digits; within 1e-4 of the span of zero, 0."""
    return "0" if abs(v) < 1e-4 * abs(span) else f"{v:.4g}"


def _axes(x0, x1, y0, y1, xlabel, ylabel, title, x_ticks: bool = True) -> list[str]:
    out = [f'<svg xmlns="http://www.w3.org/2000/svg" width="{W}" height="{H}" viewBox="0 0 {W} {H}" role="img">',
           f'<title>{html.escape(title)}</title>',
           f'<rect x="{LEFT}" y="{TOP}" width="{W - LEFT - RIGHT}" height="{H - TOP - BOTTOM}" fill="none" '
           f'stroke="#999"/>',
           f'<text x="{LEFT + (W - LEFT - RIGHT) / 2}" y="{H - 8}" text-anchor="middle" font-size="12">'
           f'{html.escape(xlabel)}</text>',
           f'<text x="14" y="{TOP + (H - TOP - BOTTOM) / 2}" text-anchor="middle" font-size="12" '
           f'transform="rotate(-90 14 {TOP + (H - TOP - BOTTOM) / 2})">{html.escape(ylabel)}</text>']
    for frac, anchor in ((0.0, "start"), (0.5, "middle"), (1.0, "end")):
        xv = x0 + frac * (x1 - x0)
        xp = LEFT + frac * (W - LEFT - RIGHT)
        if x_ticks:
            out.append(f'<text x="{xp:.1f}" y="{H - BOTTOM + 15}" text-anchor="{anchor}" font-size="11">'
                       f'{_tick(xv, x1 - x0)}</text>')
        yv = y0 + frac * (y1 - y0)
        yp = H - BOTTOM - frac * (H - TOP - BOTTOM)
        out.append(f'<text x="{LEFT - 5}" y="{yp + 4:.1f}" text-anchor="end" font-size="11">{_tick(yv, y1 - y0)}</text>')
    return out


def _map(x, y, x0, x1, y0, y1):
    xs = LEFT + (np.asarray(x) - x0) / ((x1 - x0) or 1) * (W - LEFT - RIGHT)
    ys = H - BOTTOM - (np.asarray(y) - y0) / ((y1 - y0) or 1) * (H - TOP - BOTTOM)
    return xs, ys


def line_chart(x, y, *, xlabel: str, ylabel: str, title: str, css_class: str = "chart") -> str:
    x, y = np.asarray(x, float), np.asarray(y, float)
    x0, x1, y0, y1 = x.min(), x.max(), min(y.min(), 0), max(y.max(), 0)
    pad = 0.05 * (y1 - y0 or 1)
    y0, y1 = y0 - pad, y1 + pad
    xs, ys = _map(x, y, x0, x1, y0, y1)
    pts = " ".join(f"{a:.1f},{b:.1f}" for a, b in zip(xs, ys))
    out = _axes(x0, x1, y0, y1, xlabel, ylabel, title)
    out.append(f'<polyline class="{css_class}" points="{pts}" fill="none" stroke="#2d5c9a" stroke-width="1.5"/>')
    return "\n".join(out + ["</svg>"])


def bar_chart(labels, values, *, xlabel: str, ylabel: str, title: str, floor: float | None = None) -> str:
    values = np.asarray(values, float)
    y0 = floor if floor is not None else min(values.min(), 0)
    y1 = max(values.max(), y0 + 1e-9)
    out = _axes(0, len(values), y0, y1, xlabel, ylabel, title, x_ticks=False)  # the bars carry their own labels
    bw = (W - LEFT - RIGHT) / len(values)
    for i, (lab, v) in enumerate(zip(labels, values)):
        _, yv = _map([0], [max(v, y0)], 0, 1, y0, y1)
        _, yb = _map([0], [y0], 0, 1, y0, y1)
        x = LEFT + i * bw + 0.15 * bw
        out.append(f'<rect x="{x:.1f}" y="{yv[0]:.1f}" width="{0.7 * bw:.1f}" height="{max(yb[0] - yv[0], 0):.1f}" '
                   f'fill="#4a7bb7"><title>{html.escape(str(lab))}: {v:.3g}</title></rect>')
        out.append(f'<text x="{x + 0.35 * bw:.1f}" y="{H - BOTTOM + 15}" text-anchor="middle" font-size="11">'
                   f'{html.escape(str(lab))}</text>')
    return "\n".join(out + ["</svg>"])


def histogram(data, *, lo: float, hi: float, xlabel: str, title: str, bins: int = 40) -> str:
    data = np.asarray(data, float)
    x0, x1 = min(data.min(), lo), max(data.max(), hi)
    counts, edges = np.histogram(data, bins=bins, range=(x0, x1))
    out = _axes(x0, x1, 0, counts.max(), xlabel, "builds", title)
    for c, a, b in zip(counts, edges[:-1], edges[1:]):
        xs, ys = _map([a, b], [c, 0], x0, x1, 0, counts.max())
        out.append(f'<rect x="{xs[0]:.1f}" y="{ys[0]:.1f}" width="{max(xs[1] - xs[0] - 0.5, 0.5):.1f}" '
                   f'height="{ys[1] - ys[0]:.1f}" fill="#4a7bb7"/>')
    for limit in (lo, hi):
        xs, _ = _map([limit], [0], x0, x1, 0, 1)
        out.append(f'<line x1="{xs[0]:.1f}" y1="{TOP}" x2="{xs[0]:.1f}" y2="{H - BOTTOM}" stroke="#c0392b"/>')
    return "\n".join(out + ["</svg>"])


def scatter_front(points, front, *, xlabel: str, ylabel: str, title: str) -> str:
    xs_all = [p[0] for p in points]
    ys_all = [p[1] for p in points]
    x0, x1 = min(xs_all), max(xs_all)
    y0, y1 = 0.0, max(ys_all) * 1.1 or 1.0
    if x1 == x0:
        x0, x1 = x0 * 0.9, x1 * 1.1 + 1e-9
    out = _axes(x0, x1, y0, y1, xlabel, ylabel, title)
    for x, y in points:
        a, b = _map([x], [y], x0, x1, y0, y1)
        out.append(f'<circle cx="{a[0]:.1f}" cy="{b[0]:.1f}" r="3" fill="#8aa6c8"/>')
    fx, fy = _map([p[0] for p in front], [p[1] for p in front], x0, x1, y0, y1)
    pts = " ".join(f"{a:.1f},{b:.1f}" for a, b in zip(fx, fy))
    out.append(f'<polyline class="front" points="{pts}" fill="none" stroke="#c0392b" stroke-width="1.5"/>')
    return "\n".join(out + ["</svg>"])
