"""Parts on the shelf in `design`: prefer makes stocked parts cheap, only restricts every
slot to the shelf and respects quantities times the build count."""

from __future__ import annotations

import pytest
from click.testing import CliRunner

from partpick.cli import main
from partpick.pipeline import design
from partpick.spec import Spec
from tests.conftest import CATALOGS, SPECS


def run(*args):
    return CliRunner().invoke(main, [str(a) for a in args])


@pytest.fixture(scope="module")
def carrier(demo_catalog):
    return design(Spec.from_yaml(SPECS / "carrier-50khz.yaml"), demo_catalog, results=3)


def _stock_text(bom, short_role=None, builds=1):
    rows = {}
    for ln in bom.lines:
        value = "" if ln.role in ("opamp", "limiter") else f"{ln.value:g}"
        rows[(ln.family, value)] = rows.get((ln.family, value), 0) + 1
    lines = ["family,value,quantity,unit_price,note"]
    for (fam, value), n in rows.items():
        q = n * builds
        lines.append(f"{fam},{value},{q},,shelf")
    text = "\n".join(lines) + "\n"
    return text, rows


def _spec_with_stock(tmp_path, stock_text, mode, builds=1):
    stock = tmp_path / "shelf.csv"
    stock.write_text(stock_text, encoding="utf-8")
    text = (SPECS / "carrier-50khz.yaml").read_text(encoding="utf-8")
    text += f"stock: {{file: {stock}, mode: {mode}}}\nbuilds: {builds}\n"
    path = tmp_path / "spec.yaml"
    path.write_text(text, encoding="utf-8")
    return path


def test_only_mode_builds_from_the_shelf(tmp_path, carrier):
    best = carrier.ranked[0].bom
    text, _ = _stock_text(best, builds=2)
    path = _spec_with_stock(tmp_path, text, "only", builds=2)
    result = run("design", path, "--catalog", CATALOGS, "--format", "json", "-n", "1", "--samples", "2000")
    assert result.exit_code == 0, result.output + result.stderr
    import json

    got = json.loads(result.output)["candidates"][0]["bom"]
    shelf = {(ln.family, ln.value) for ln in best.lines}
    assert {(b["family"], b["value"]) for b in got} <= shelf


def test_only_mode_says_which_value_runs_out(tmp_path, carrier):
    best = carrier.ranked[0].bom
    text, rows = _stock_text(best, builds=2)
    # a value the design uses twice (or any used value) gets one part fewer than two boards need
    (fam, value), n = max(rows.items(), key=lambda kv: kv[1])
    text = text.replace(f"{fam},{value},{n * 2},", f"{fam},{value},{n * 2 - 1},")
    path = _spec_with_stock(tmp_path, text, "only", builds=2)
    result = run("design", path, "--catalog", CATALOGS, "-n", "1", "--samples", "2000")
    assert result.exit_code == 1, result.output
    assert "stock quantities binds" in result.stderr and "the shelf runs out of" in result.stderr
    assert fam in result.stderr


def test_prefer_mode_makes_stocked_parts_cheaper(tmp_path, carrier, demo_catalog):
    best = carrier.ranked[0]
    text, _ = _stock_text(best.bom)
    path = _spec_with_stock(tmp_path, text, "prefer")
    from partpick.stock import load_stock

    spec = Spec.from_yaml(path)
    d = design(spec, demo_catalog, stock=load_stock(spec.stock.path, demo_catalog), results=3, samples=2000)
    shelf = {(ln.family, ln.value) for ln in best.bom.lines}
    top = d.ranked[0]
    stocked = sum((ln.family, ln.value) in shelf for ln in top.bom.lines)
    assert stocked >= len(top.bom.lines) - 2
    # parts on the shelf cost nothing: the same BOM costs less than from the catalog
    from partpick.pricing import bom_cost

    shelf_stock = load_stock(tmp_path / "shelf.csv", demo_catalog)
    assert bom_cost(best.bom, demo_catalog, shelf_stock)[0] < bom_cost(best.bom, demo_catalog)[0]
