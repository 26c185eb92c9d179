"""`partpick swap`: refill the slots the shelf cannot supply, keep the rest, re-verify."""

from __future__ import annotations

import pytest
from click.testing import CliRunner

from partpick import series
from partpick.bom import bom_to_yaml
from partpick.cli import main
from partpick.pipeline import design
from partpick.spec import Spec
from tests.conftest import CATALOGS, SPECS

SPEC = SPECS / "carrier-50khz.yaml"


@pytest.fixture(scope="module")
def best(demo_catalog):
    return design(Spec.from_yaml(SPEC), demo_catalog, results=1).ranked[0]


def _shelf(best, demo_catalog, missing_role):
    """Every value of the BOM on the shelf but one, with that one's series neighbours."""
    rows = ["family,value,quantity,unit_price,note"]
    missing = None
    for ln in best.bom.lines:
        if ln.role == missing_role:
            missing = ln
            fam = demo_catalog.find("resistors", ln.family)
            vals = fam.values()
            i = vals.index(ln.value)
            for v in vals[max(i - 3, 0):i] + vals[i + 1:i + 4]:
                rows.append(f"{ln.family},{v:g},50,,drawer")
            continue
        value = "" if ln.role in ("opamp", "limiter") else f"{ln.value:g}"
        rows.append(f"{ln.family},{value},50,,drawer")
    return "\n".join(dict.fromkeys(rows)) + "\n", missing


def run(*args):
    return CliRunner().invoke(main, [str(a) for a in args])


def test_swap_changes_only_the_missing_slot(tmp_path, best, demo_catalog):
    text, missing = _shelf(best, demo_catalog, "rg")
    stock = tmp_path / "shelf.csv"
    stock.write_text(text, encoding="utf-8")
    bom = tmp_path / "bom.yaml"
    bom.write_text(bom_to_yaml(best.bom), encoding="utf-8")
    out = tmp_path / "new.yaml"
    result = run("swap", SPEC, bom, "--stock", stock, "--catalog", CATALOGS, "--out", out, "--samples", "5000")
    assert result.exit_code == 0, result.output + result.stderr
    assert f"{missing.ref} " in result.output and "on shelf" in result.output
    assert "meets the spec" in result.output.splitlines()[-2]
    from partpick.bom import load_bom

    new = load_bom(out, demo_catalog)
    changed = [(a.ref, b.value) for a, b in zip(best.bom.lines, new.lines) if (a.family, a.value) != (b.family, b.value)]
    assert [ref for ref, _ in changed] == [missing.ref]
    assert series.is_preferred(demo_catalog.find("resistors", missing.family).series, changed[0][1])
    chk = run("check", SPEC, out, "--catalog", CATALOGS, "--samples", "5000")
    assert chk.exit_code == 0, chk.output


def test_swap_names_the_slot_that_cannot_be_filled(tmp_path, best, demo_catalog):
    text, missing = _shelf(best, demo_catalog, "rf")
    # take the neighbours away as well: nothing on the shelf can stand in for Rg
    text = "\n".join(ln for ln in text.splitlines() if not (ln.startswith(missing.family) and ",drawer" in ln
                     and ln.split(",")[1] not in {f"{x.value:g}" for x in best.bom.lines})) + "\n"
    stock = tmp_path / "shelf.csv"
    stock.write_text(text, encoding="utf-8")
    bom = tmp_path / "bom.yaml"
    bom.write_text(bom_to_yaml(best.bom), encoding="utf-8")
    result = run("swap", SPEC, bom, "--stock", stock, "--catalog", CATALOGS, "--samples", "2000")
    assert result.exit_code == 1
    assert f"slot {missing.ref} (rf" in result.stderr and "cannot be filled" in result.stderr
