"""Coverage against an independent oracle, on a 30-requirement subset of the coverage
benchmark (benchmarks/bench_coverage.py, issue 11's ordinary requirements).

The reference is outside the search: ``benchmarks/oracle.py``, a brute-force designer
that shares no code with ``partpick/search`` or the plug-ins' search hooks (textbook
Wien arms, f0 = 1/(2 pi sqrt(Rs Cs Rp Cp)); a sweep of Rf, Rd, limiter, output stage and
op-amp ranked by its own describing-function estimates), built a BOM for each stored
requirement; when recorded, ``partpick check`` passed it and an ngspice run of its
netlist landed inside the spec's frequency and amplitude windows. So a design exists,
and ``partpick design`` must neither refuse nor return a dearer #1 when asked for the
cheapest (``--rank-by cost``).

Data: tests/data/coverage/NAME.yaml (spec) and NAME.bom.yaml (the oracle's BOM), with
tests/data/coverage/MANIFEST naming the command and oracle version that made them. The
oracle is too slow for CI (seconds to a minute per requirement), so its BOMs are
recorded; the first test keeps them honest by running ``partpick check`` on each again.
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from click.testing import CliRunner

from partpick.bom import load_bom
from partpick.catalog import load_catalog
from partpick.cli import main
from partpick.pricing import bom_cost
from tests.conftest import CATALOGS

DATA = Path(__file__).resolve().parent / "data" / "coverage"
# the false refusals measured on main f6274d0, kept beside the subset so they stay checked;
# cov-165 and cov-186 are the two of the wide 220-requirement run on 52fde72 (README
# "Coverage"): a 1 Mohm arm the search did not try, a kind of candidate whose estimates
# kept failing verification the same way until the budget ran out; cov-204 was dearer
# through --rank-by cost (0.869 USD against the oracle's 0.810: each configuration sent
# only its best row, a yield tier up at dearer arms); cov-068 and cov-132 were dearer
# through it (1.741 against 1.679, 0.889 against 0.864 USD: the amplitude side's rows were
# chosen by margin alone, so a row without Rd was not matched, and a configuration's
# cheapest row was chosen by its arm set's cost, not its whole cost, nor was a stage pair
# sharing Rg's value and line looked for); cov-201 was dearer (1.034 against 0.993 USD) until the
# refinement of a cost-first candidate kept its stage pair's share of Rg's value and line
# (Searcher.restage re-picked the pair by the resistance level alone)
REFUSED_DATA = DATA.parent / "coverage-refused"
SPECS = sorted(p for d in (DATA, REFUSED_DATA) for p in d.glob("*.yaml") if not p.name.endswith(".bom.yaml"))
WITH_BOM = [p for p in SPECS if p.with_suffix(".bom.yaml").exists()]

# Both costs come from the same price list (partpick.pricing), so they compare exactly;
# half a cent is left for capacitor prices, which the demo catalog interpolates over each
# family's value range (a few series steps of one capacitor value move a board's cost
# by less than that), while any extra BOM line (5 cents and up), extra part or dearer
# family still shows.
COST_TOLERANCE_USD = 0.005

# False refusals and dearer designs measured on main f6274d0 (benchmarks/bench_coverage.py,
# 2024 run recorded in README "Coverage"): strict, so each entry fails once the search
# designs it, and is then removed.
REFUSED: dict[str, str] = {
    # (ord-008, ord-038, ord-041 and ord-057 were refused on f6274d0: their oracle BOMs put the
    # gain network at 1 kohm, which the search did not try while Rg was fixed near 10 kohm)
}
DEARER: dict[str, str] = {
    # (ord-002, ord-005 and ord-052 were dearer through --rank-by cost until the certification judged
    # every candidate left and the pool came in cost order for a cost-first ranking)
}


# Stored oracle BOMs that check no longer passes since the single-supply model carries the
# mid-rail node's ripple to the load (periphery.reference_ripple, which brought check's
# load amplitude onto ngspice's where an ideal mid-rail was 1.85x off): each was within its
# amplitude tolerance by under 3 %. ngspice, running the full circuit, agrees with the new
# verdicts where it can tell: ord-037's nominal load is 289.5 mVrms against a 286 mVrms
# limit (check: 286.0); ord-028 fails at 0 degC (441 mVrms against 432), which a nominal
# ngspice run does not show (419.8 mVrms there); ord-057's yield falls to 93 % of 99 %.
# Strict: an entry fails once check passes the BOM again.
NO_LONGER_PASS: dict[str, str] = {
    "ord-028": "amplitude 441 mVrms at 0 degC over 432 with the mid-rail ripple counted",
    "ord-037": "nominal amplitude 286.0 mVrms at its 286 limit with the ripple (ngspice: 289.5)",
    "ord-057": "yield 93.2 % against 99 % with the ripple counted",
}


def _bom_path(spec_path: Path) -> Path:
    return spec_path.with_suffix(".bom.yaml")


def test_the_subset_is_there():
    assert len([p for p in WITH_BOM if p.parent == DATA]) >= 30, f"expected 30 stored requirements in {DATA}"


@pytest.mark.slow
@pytest.mark.parametrize("spec_path", [
    pytest.param(p, id=p.stem, marks=[pytest.mark.xfail(strict=True, reason=NO_LONGER_PASS[p.stem])]
                 if p.stem in NO_LONGER_PASS else []) for p in WITH_BOM])
def test_stored_oracle_bom_passes_check(spec_path):
    result = CliRunner().invoke(main, ["check", str(spec_path), str(_bom_path(spec_path)), "--format", "json"])
    assert result.exit_code == 0, f"partpick check no longer passes the stored oracle BOM: {result.output[-600:]}"
    assert json.loads(result.stdout)["passed"]


def _design_params():
    for p in WITH_BOM:
        marks = []
        if p.stem in REFUSED:
            marks = [pytest.mark.xfail(strict=True, reason=REFUSED[p.stem])]
        elif p.stem in DEARER:
            marks = [pytest.mark.xfail(strict=True, reason=DEARER[p.stem])]
        yield pytest.param(p, marks=marks, id=p.stem)


@pytest.mark.slow
@pytest.mark.parametrize("spec_path", list(_design_params()))
def test_design_designs_it_at_no_more_cost(spec_path):
    catalog = load_catalog(CATALOGS)
    oracle_cost = bom_cost(load_bom(_bom_path(spec_path), catalog), catalog)[0]
    result = CliRunner().invoke(main, ["design", str(spec_path), "--format", "json", "-n", "1",
                                       "--rank-by", "cost"])
    assert result.exit_code == 0, (f"refused, though {_bom_path(spec_path).name} passes partpick check: "
                                   f"{result.output.strip()[:400]}")
    first = json.loads(result.stdout)["candidates"][0]
    assert first["passed"]
    assert first["cost"] <= oracle_cost + COST_TOLERANCE_USD, (
        f"partpick's cheapest design costs {first['cost']:.3f} USD, the oracle's passing BOM {oracle_cost:.3f} USD")
