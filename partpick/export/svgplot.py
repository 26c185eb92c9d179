"""Small, dependency-free SVG charts for the report: lines, bars and histograms."""

from __future__ import annotations

import html

import numpy as np

__all__ = ["line_chart", "bar_chart", "histogram", "scatter_front"]

W, H, PAD = 460, 220, 42


def _axes(x0, x1, y0, y1, xlabel, ylabel, title) -> list[str]:
    out = [f'<svg xmlns="http://www.w3.org/2000/svg" width="{W}" height="{H}" viewBox="0 0 {W} {H}" role="img">',
           f'<title>{html.escape(title)}</title>',
           f'<rect x="{PAD}" y="10" width="{W - PAD - 10}" height="{H - PAD - 10}" fill="none" stroke="#999"/>',
           f'<text x="{W / 2}" y="{H - 6}" text-anchor="middle" font-size="11">{html.escape(xlabel)}</text>',
           f'<text x="12" y="{H / 2}" text-anchor="middle" font-size="11" transform="rotate(-90 12 {H / 2})">'
           f'{html.escape(ylabel)}</text>']
    for frac in (0.0, 0.5, 1.0):
        xv = x0 + frac * (x1 - x0)
        xp = PAD + frac * (W - PAD - 10)
        out.append(f'<text x="{xp:.1f}" y="{H - PAD + 14}" text-anchor="middle" font-size="10">{xv:.4g}</text>')
        yv = y0 + frac * (y1 - y0)
        yp = H - PAD - frac * (H - PAD - 20)
        out.append(f'<text x="{PAD - 4}" y="{yp:.1f}" text-anchor="end" font-size="10">{yv:.3g}</text>')
    return out


def _map(x, y, x0, x1, y0, y1):
    xs = PAD + (np.asarray(x) - x0) / ((x1 - x0) or 1) * (W - PAD - 10)
    ys = H - PAD - (np.asarray(y) - y0) / ((y1 - y0) or 1) * (H - PAD - 20)
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
    out = _axes(0, len(values), y0, y1, xlabel, ylabel, title)
    bw = (W - PAD - 10) / len(values)
    for i, (lab, v) in enumerate(zip(labels, values)):
        _, yv = _map([0], [max(v, y0)], 0, 1, y0, y1)
        _, yb = _map([0], [y0], 0, 1, y0, y1)
        x = PAD + i * bw + 0.15 * bw
        out.append(f'<rect x="{x:.1f}" y="{yv[0]:.1f}" width="{0.7 * bw:.1f}" height="{max(yb[0] - yv[0], 0):.1f}" '
                   f'fill="#4a7bb7"><title>{html.escape(str(lab))}: {v:.3g}</title></rect>')
        out.append(f'<text x="{x + 0.35 * bw:.1f}" y="{H - PAD - 2}" text-anchor="middle" font-size="9" '
                   f'fill="#fff">{html.escape(str(lab))}</text>')
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
        out.append(f'<line x1="{xs[0]:.1f}" y1="10" x2="{xs[0]:.1f}" y2="{H - PAD}" stroke="#c0392b"/>')
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
