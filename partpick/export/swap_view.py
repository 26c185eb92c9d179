"""``partpick swap`` as text: the slots refilled, then the design before and after."""

from __future__ import annotations

from partpick import units
from partpick.bom import ROLES
from partpick.export import shown
from partpick.export.table import render_table

__all__ = ["swap_text"]


def swap_text(res, stock, catalog, bom_path, stock_path, spec) -> str:
    out = [f"note: {res.skipped}"] if res.skipped else []
    if not res.changed:
        out.append(f"every part of {bom_path} is on the shelf ({stock_path}); nothing to swap")
    rows = []
    for old, new in zip(res.before.bom.lines, res.after.bom.lines):
        dim = ROLES[old.role][1]
        fmt_v = (lambda v: units.format_quantity(v, dim, 3)) if dim else (lambda v: "")
        if (old.family, old.value) != (new.family, new.value):
            rows.append([old.ref, old.role, f"{fmt_v(old.value)} {old.family}".strip(),
                         f"{fmt_v(new.value)} {new.family}".strip(),
                         "on shelf" if stock.quantity(new.family, new.value) else ""])
    if rows:
        out.append(render_table(["ref", "role", "was", "now", ""], rows))
        out.append("")

    def col(r):
        p = r.verdict.nominal
        return [shown.frequency(p.freq_hz) if p.starts else "-", shown.amplitude(p.load_peak_v, spec),
                f"{p.lin.margin * 100:.2f} %", f"{r.yield_frac * 100:.1f} %", f"{r.cost:.3f}",
                "meets the spec" if r.verdict.passed else "FAILS " + ", ".join(c.name for c in r.verdict.failed())]

    names = ["frequency", "amplitude at load", "startup margin", "yield", f"cost {catalog.currency}", "verdict"]
    out.append(render_table(["", "before", "after"],
                            [[n, a, b] for n, a, b in zip(names, col(res.before), col(res.after))]))
    return "\n".join(out)
