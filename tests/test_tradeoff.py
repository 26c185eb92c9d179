"""`partpick tradeoff`: the cost-accuracy front is non-dominated and holds the cheapest
and the most accurate designs that separate single-objective runs find."""

from __future__ import annotations

import json

from click.testing import CliRunner

from partpick.cli import main
from partpick.pipeline import design
from partpick.spec import Spec
from partpick.tradeoff import accuracy, tradeoff
from tests.conftest import CATALOGS, SPECS

SPEC = SPECS / "carrier-50khz.yaml"


def test_front_is_non_dominated_and_holds_the_extremes(demo_catalog):
    spec = Spec.from_yaml(SPEC)
    points, front = tradeoff(spec, demo_catalog, samples=5000)
    assert front and len(points) >= len(front)
    for p in front:
        for q in front:
            if p is not q:
                assert not (q.cost <= p.cost and q.accuracy <= p.accuracy and
                            (q.cost < p.cost or q.accuracy < p.accuracy)), (p, q)
    # every evaluated design is on the front or dominated by a front point
    for p in points:
        assert any(f.cost <= p.cost and f.accuracy <= p.accuracy for f in front)
    cheapest = min(r.cost for r in design(spec, demo_catalog, results=3, rank_by=("cost",), samples=5000).passing)
    sharp = design(spec, demo_catalog, results=3, rank_by=("frequency_error",), samples=5000).passing
    best_acc = min(accuracy(r, spec) for r in sharp)
    assert min(p.cost for p in front) <= cheapest + 1e-12
    assert min(p.accuracy for p in front) <= best_acc + 1e-12


def test_tradeoff_cli_json():
    result = CliRunner().invoke(main, ["tradeoff", str(SPEC), "--catalog", str(CATALOGS), "--format", "json",
                                       "--samples", "2000"])
    assert result.exit_code == 0, result.output
    data = json.loads(result.output)
    costs = [p["cost"] for p in data["front"]]
    accs = [p["accuracy"] for p in data["front"]]
    assert costs == sorted(costs)
    assert all(a2 < a1 for a1, a2 in zip(accs, accs[1:]))  # cheaper designs are less accurate along the front
