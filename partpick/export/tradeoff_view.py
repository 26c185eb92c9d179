"""``partpick tradeoff`` as text and JSON: the cost-accuracy front."""

from __future__ import annotations

import json

from partpick.export.table import render_table

__all__ = ["tradeoff_text", "tradeoff_json"]


def _family(line) -> str:
    return line.family if line is not None else "-"


def tradeoff_json(points, front) -> str:
    return json.dumps({"front": [{"cost": p.cost, "accuracy": p.accuracy, "yield": p.yield_frac,
                                  "families": p.families, "source": p.source,
                                  "bom": [{"ref": ln.ref, "role": ln.role, "family": ln.family,
                                           "value": ln.value} for ln in p.item.bom.lines]} for p in front],
                       "evaluated": len(points)}, indent=2)


def tradeoff_text(spec, catalog, points, front, samples: int) -> str:
    table = render_table(
        [f"cost {catalog.currency}", "accuracy", "yield", "arm families", "op-amp", "limiter", "from run"],
        [[f"{p.cost:.3f}", f"+/-{p.accuracy * 100:.3f} %", f"{p.yield_frac * 100:.1f} %", p.families,
          _family(p.item.bom.line("opamp")), _family(p.item.bom.control_part()), p.source] for p in front],
        right=(0, 1, 2))
    return (f"{spec.name}: {len(front)} designs on the cost-accuracy front, of {len(points)} that meet the spec\n"
            + table + "\n" + "\n".join(front_legend(spec, catalog, samples)))


def front_legend(spec, catalog, samples: int) -> list[str]:
    """What each column of the front means."""
    return [f"cost: per board in {catalog.currency} (parts, line prices, ordering costs); accuracy: the frequency "
            f"error the builds reach at the {spec.yield_min_frac:.0%} yield ({samples} Monte Carlo builds each); "
            "yield: share of builds meeting every requirement",
            "arm families: the frequency-setting network's resistor and capacitor families; from run: the design "
            "runs that found it (the spec's own ranking, one per family pair, cheapest, most accurate); the front "
            "keeps a design only when every cheaper one is less accurate"]
