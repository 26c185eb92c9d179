"""`partpick tradeoff`: a true cost-accuracy front. Its points are pairwise
non-dominated (Pareto's definition: q dominates p when q is at most as expensive and at
most as inaccurate, and better in one; weakly when equal in both), no design that
`partpick design -n 50` finds dominates a front point, it holds the cheapest and the most
accurate designs that separate single-objective runs find, and a refused spec exits 1."""

from __future__ import annotations

import json

import pytest
from click.testing import CliRunner

from partpick.cli import main
from partpick.pipeline import design
from partpick.spec import Spec
from partpick.tradeoff import accuracy, tradeoff
from tests.conftest import CATALOGS, SPECS

SPEC = SPECS / "carrier-50khz.yaml"
SAMPLES = 2000


def weakly_dominates(q_cost, q_acc, p_cost, p_acc) -> bool:
    """At most as expensive and at most as inaccurate (equal in both included)."""
    return q_cost <= p_cost and q_acc <= p_acc


@pytest.fixture(scope="module")
def carrier_front(demo_catalog):
    spec = Spec.from_yaml(SPEC)
    return spec, *tradeoff(spec, demo_catalog, samples=SAMPLES)


def test_front_is_pairwise_non_dominated(carrier_front):
    _, points, front = carrier_front
    assert len(front) >= 2 and len(points) > len(front)
    for p in front:
        for q in front:
            if p is not q:
                assert not weakly_dominates(q.cost, q.accuracy, p.cost, p.accuracy), (p.cost, p.accuracy, q.cost,
                                                                                      q.accuracy)
    # every evaluated design is on the front or at best as good as a front point
    for p in points:
        assert any(f.cost <= p.cost + 1e-12 and f.accuracy <= p.accuracy * (1 + 1e-3) for f in front)


def test_no_design_of_design_n50_dominates_a_front_point(carrier_front, demo_catalog):
    spec, _, front = carrier_front
    found = design(spec, demo_catalog, results=50, samples=SAMPLES).passing
    assert len(found) > 10
    boms = {p.item.bom for p in front}
    for r in found:
        if r.bom in boms:
            continue
        acc = accuracy(r, spec)
        for p in front:
            assert not weakly_dominates(r.cost, acc, p.cost, p.accuracy), (r.cost, acc, p.cost, p.accuracy)


def test_front_holds_the_single_objective_extremes(carrier_front, demo_catalog):
    spec, _, front = carrier_front
    cheapest = min(r.cost for r in design(spec, demo_catalog, results=3, rank_by=("cost",),
                                          samples=SAMPLES).passing)
    sharp = design(spec, demo_catalog, results=3, rank_by=("frequency_error",), samples=SAMPLES).passing
    assert min(p.cost for p in front) <= cheapest + 1e-12
    assert min(p.accuracy for p in front) <= min(accuracy(r, spec) for r in sharp) + 1e-12


def test_tradeoff_cli_json():
    result = CliRunner().invoke(main, ["tradeoff", str(SPEC), "--catalog", str(CATALOGS), "--format", "json",
                                       "--samples", str(SAMPLES)])
    assert result.exit_code == 0, result.output
    data = json.loads(result.output)
    costs = [p["cost"] for p in data["front"]]
    accs = [p["accuracy"] for p in data["front"]]
    assert costs == sorted(costs) and len(set(costs)) == len(costs)
    assert all(a2 < a1 for a1, a2 in zip(accs, accs[1:]))  # along the front, each dearer design is more accurate


def test_refused_spec_exits_1_naming_what_binds(tmp_path):
    text = SPEC.read_text(encoding="utf-8").replace("amplitude: {target: 1 Vrms, tolerance: 20 %}",
                                                    "amplitude: {target: 20 Vpk, tolerance: 5 %}")
    path = tmp_path / "refused.yaml"
    path.write_text(text, encoding="utf-8")
    result = CliRunner().invoke(main, ["tradeoff", str(path), "--catalog", str(CATALOGS), "--samples", "200"])
    assert result.exit_code == 1, result.output
    assert result.stderr.startswith("error: ") and "binds" in result.stderr
