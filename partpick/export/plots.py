"""Histograms of a candidate's Monte Carlo builds (needs the optional matplotlib extra)."""

from __future__ import annotations

import io
from pathlib import Path

from partpick.errors import InputError
from partpick.fileio import write_atomic

__all__ = ["histograms", "front_plot"]


def histograms(mc, spec, path: Path, *, force: bool = False) -> Path:
    """Frequency (Hz) and amplitude at the load (V peak) of every build that starts,
    with the spec's limits as lines, written atomically as PNG to ``path``."""
    plt = _pyplot()
    fig, axes = plt.subplots(1, 2, figsize=(9, 3.4))
    f = spec.frequency
    a = spec.amplitude
    for ax, data, lo, hi, label in ((axes[0], mc.freq_hz, f.min_hz, f.max_hz, "frequency, Hz"),
                                    (axes[1], mc.amp_v, a.peak_v * (1 - a.tolerance_frac),
                                     a.peak_v * (1 + a.tolerance_frac), "amplitude at the load, V peak")):
        ax.hist(data, bins=60, color="#4a7bb7")
        for x in (lo, hi):
            ax.axvline(x, color="#c0392b", lw=1)
        ax.set_xlabel(label)
        ax.set_ylabel("builds")
    fig.suptitle(f"{spec.name}: {mc.samples} builds, seed {mc.seed}, yield {mc.yield_frac:.1%}")
    fig.tight_layout()
    return _save(fig, path, force)


def _save(fig, path: Path, force: bool) -> Path:
    import matplotlib.pyplot as plt

    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=110)
    plt.close(fig)
    return write_atomic(path, buf.getvalue(), force=force)


def front_plot(points, front, spec, path: Path, *, force: bool = False) -> Path:
    """Every evaluated design as a dot (cost against accuracy) and the front as a line."""
    plt = _pyplot()
    fig, ax = plt.subplots(figsize=(6.5, 4))
    ax.scatter([p.cost for p in points], [p.accuracy * 100 for p in points], s=14, color="#8aa6c8",
               label="designs that meet the spec")
    ax.plot([p.cost for p in front], [p.accuracy * 100 for p in front], "-o", color="#c0392b", ms=4, label="front")
    ax.set_xlabel("cost per board")
    ax.set_ylabel("frequency error at the yield, %")
    ax.set_title(f"{spec.name}: cost against accuracy")
    ax.legend()
    fig.tight_layout()
    return _save(fig, path, force)


def _pyplot():
    try:
        import matplotlib

        matplotlib.use("Agg")
        import matplotlib.pyplot as plt
    except ImportError:
        raise InputError("needs matplotlib: pip install 'partpick[plot]'", field="--plots") from None
    return plt
