"""The purchasing CSV matches the circuit: for every demo spec and every output stage,
its quantities are the physical parts of the netlist the physics simulates (counted
here from the netlist's elements, independently of the pricing code), one line per
distinct part, its line costs add up to the cost partpick reports, stock flags and
ordering costs show in 'prefer' mode, and `partpick check` reads it back.

Physical parts per netlist element (partpick.physics.netlist): a resistor or capacitor
is one part; a limiter element is a pair (two diodes, LEDs or Zeners); op-amp elements
are channels, and a package holds the catalog's ``channels`` of them.
"""

from __future__ import annotations

import csv
import dataclasses
import io
import math

import pytest

from partpick.bom import Bom, BomLine, parse_bom
from partpick.circuits import TOPOLOGIES, build_netlist
from partpick.export.purchase import COLUMN_LEGEND, PURCHASE_COLUMNS, bom_to_purchase_csv
from partpick.physics.netlist import Capacitor, DiodeX, JfetX, LimiterX, OpAmpX, Resistor
from partpick.pipeline import design, evaluate_bom
from partpick.spec import Spec
from partpick.stock import load_stock
from partpick.verify import operating_conditions
from tests.conftest import SPECS

DEMOS = sorted(p.stem for p in SPECS.glob("*.yaml"))
STAGES = ("none", "follower", "gain", "attenuator")
NOT_PARTS = ("RLOAD", "CLOAD", "RBLEED", "RLOAD2", "CLOAD2")  # the loads and the simulator's DC path: not ordered


@pytest.fixture(scope="module")
def tops(demo_catalog):
    """The #1 design of every demo spec (few Monte Carlo builds: only its BOM matters)."""
    out = {}
    for name in DEMOS:
        spec = Spec.from_yaml(SPECS / f"{name}.yaml")
        out[name] = (spec, design(spec, demo_catalog, results=1, samples=100).ranked[0])
    return out


def with_stage(bom: Bom, stage: str) -> Bom:
    """``bom`` with another output stage: the stage resistors from the family the BOM
    uses for its gain network, 10 kohm and 15 kohm."""
    fam = next(ln.family for ln in bom.lines if ln.ref == "R3")
    keep = [ln for ln in bom.lines if ln.ref not in ("R6", "R7")]
    if stage in ("gain", "attenuator"):
        keep += [BomLine("R6", "stage_ra", fam, 10e3), BomLine("R7", "stage_rb", fam, 15e3)]
    return dataclasses.replace(bom, lines=tuple(keep), stage=stage)


def netlist_parts(bom: Bom, spec: Spec, catalog) -> tuple[dict[str, int], int]:
    """(designator -> physical parts, op-amp packages) from the netlist's elements."""
    net = build_netlist(bom.to_circuit(catalog), operating_conditions(spec)["nominal"])
    refs: dict[str, int] = {}
    channels = 0
    per_package = 1
    for el in net.elements:
        if isinstance(el, (Resistor, Capacitor)) and el.name not in NOT_PARTS:
            refs[el.name] = 1
        elif isinstance(el, LimiterX):
            n = int(el.name[1:])
            refs[el.name], refs[f"D{n + 1}"] = 1, 1  # the pair: two diodes, D1 and D2
        elif isinstance(el, (JfetX, DiodeX)):
            refs[el.name] = 1
        elif isinstance(el, OpAmpX):
            channels += 1
            per_package = el.opamp.channels
            refs[el.name] = 0
    return refs, math.ceil(channels / per_package)


def rows_of(text: str) -> list[dict[str, str]]:
    return list(csv.DictReader(io.StringIO(text)))


def _offered(name: str) -> list[str]:
    """The stages of STAGES the demo spec's topology can be built with."""
    topo = TOPOLOGIES[Spec.from_yaml(SPECS / f"{name}.yaml").topology]
    return [s for s in STAGES if s in topo.stages]


@pytest.mark.parametrize("name,stage", [(n, s) for n in DEMOS for s in _offered(n)])
def test_quantities_are_the_netlists_parts_and_costs_add_up(tops, demo_catalog, name, stage):
    spec, top = tops[name]
    bom = with_stage(top.bom, stage)
    r = evaluate_bom(bom, spec, demo_catalog, samples=100)
    text = bom_to_purchase_csv(bom, demo_catalog)
    assert not any(line.startswith("#") for line in text.splitlines())  # data rows only
    rows = rows_of(text)
    assert tuple(rows[0]) == PURCHASE_COLUMNS
    refs, packages = netlist_parts(bom, spec, demo_catalog)
    # every part of the netlist is on exactly one line, and nothing else is
    listed = [ref for row in rows for ref in row["designators"].split(",")]
    assert sorted(listed) == sorted(refs) and len(set(listed)) == len(listed)
    # one line per distinct part (family and value)
    keys = [(row["family"], row["value"]) for row in rows]
    assert len(set(keys)) == len(keys)
    for row in rows:
        qty = int(row["quantity"])
        names = row["designators"].split(",")
        if row["roles"] == "opamp":
            assert qty == packages
        else:
            assert qty == sum(refs[n] for n in names)
    assert sum(int(row["quantity"]) for row in rows) == r.parts
    # the line costs add up to the reported cost (each printed to 4 decimals)
    assert sum(float(row["line_cost"]) for row in rows) == pytest.approx(r.cost, abs=0.00005 * len(rows))
    for row in rows:
        unit, qty = float(row["unit_cost"]), int(row["quantity"])
        assert float(row["line_cost"]) == pytest.approx(unit * qty + float(row["line_fee"]) + float(row["order_cost"]),
                                                        abs=2e-4)
    # and it reads back as the same circuit
    back = parse_bom(text, "bom.csv", demo_catalog)
    assert (back.supply_kind, back.stage, back.control) == (bom.supply_kind, bom.stage, bom.control)
    assert {(ln.role, ln.family, ln.value) for ln in back.lines} == {(ln.role, ln.family, ln.value)
                                                                    for ln in bom.lines}


def test_single_channel_op_amp_with_a_buffer_takes_two_packages(tops, demo_catalog):
    """The case of the issue: a single-channel op-amp with a gain stage is two packages,
    in the CSV and in the cost."""
    spec, top = tops["carrier-50khz"]
    bom = with_stage(top.bom, "gain")
    bom = dataclasses.replace(bom, lines=tuple(dataclasses.replace(ln, family="oa-prec-bip") if ln.role == "opamp"
                                               else ln for ln in bom.lines))
    op = demo_catalog.find("opamps", "oa-prec-bip")
    assert op.channels == 1
    row = next(r for r in rows_of(bom_to_purchase_csv(bom, demo_catalog)) if r["roles"] == "opamp")
    assert row["designators"] == "U1A,U1B" and row["quantity"] == "2"
    assert float(row["line_cost"]) == pytest.approx(2 * op.price_unit + op.price_line)


def test_prefer_mode_shows_ordering_costs_and_stock_flags(tmp_path, demo_catalog):
    """Stock in 'prefer' mode: shelf parts flagged and free, every other line carries the
    0.50 ordering cost, and the lines still add up to the cost `design` reports."""
    text = (SPECS / "lvdt-exciter.yaml").read_text(encoding="utf-8")
    spec_path = tmp_path / "spec.yaml"
    (tmp_path / "shelf.csv").write_text((SPECS / "bench-stock.csv").read_text(encoding="utf-8"), encoding="utf-8")
    spec_path.write_text(text + "stock: {file: shelf.csv, mode: prefer}\n", encoding="utf-8")
    spec = Spec.from_yaml(spec_path)
    stock = load_stock(spec.stock.path, demo_catalog)
    shelf_parts = {(it.family, it.value) for it in stock.items}
    ranked = design(spec, demo_catalog, stock=stock, results=3, samples=100).ranked
    # the first of the top three that takes a part from the shelf (the cheapest may not)
    top = next(r for r in ranked if any((ln.family, ln.value) in shelf_parts for ln in r.bom.lines))
    rows = rows_of(bom_to_purchase_csv(top.bom, demo_catalog, stock=stock))
    assert sum(float(row["line_cost"]) for row in rows) == pytest.approx(top.cost, abs=0.00005 * len(rows))
    shelf = {(it.family, it.value) for it in stock.items}
    flags = {row["on_shelf"] for row in rows}
    assert flags <= {"yes", "no"} or any(f.startswith("short") for f in flags)
    for row, (fam, value) in zip(rows, ((ln.family, ln.value) for ln in _distinct(top.bom))):
        if (fam, value) in shelf:
            assert row["on_shelf"] != "no" and float(row["order_cost"]) == 0.0
        else:
            assert row["on_shelf"] == "no" and float(row["order_cost"]) == pytest.approx(0.50)
    assert any(row["on_shelf"] == "yes" for row in rows)


def _distinct(bom: Bom) -> list[BomLine]:
    seen, out = set(), []
    for ln in bom.lines:
        if (ln.family, ln.value) not in seen:
            seen.add((ln.family, ln.value))
            out.append(ln)
    return out


def test_maker_fields_are_carried_when_the_catalog_has_them(tops, demo_catalog):
    spec, top = tops["carrier-50khz"]
    fam = demo_catalog.find("resistors", top.bom.line("rg").family)
    cat = dataclasses.replace(demo_catalog, resistors=tuple(
        dataclasses.replace(f, maker="Example Resistors", maker_part="XR-{value}-1") if f.id == fam.id else f
        for f in demo_catalog.resistors))
    rows = rows_of(bom_to_purchase_csv(top.bom, cat))
    row = next(r for r in rows if "R3" in r["designators"].split(","))
    assert row["maker"] == "Example Resistors" and row["maker_part"] == f"XR-{row['value']}-1"
    assert all(r["maker"] == "" for r in rows if r["family"] != fam.id)  # the demo catalog names no maker
    from partpick.bom import bom_to_yaml

    assert f"maker_part: 'XR-{row['value']}-1'" in bom_to_yaml(top.bom, catalog=cat)


def test_every_column_has_a_legend():
    assert set(PURCHASE_COLUMNS) - {"description"} <= set(COLUMN_LEGEND)


@pytest.mark.parametrize("name,stage", [(n, s) for n in DEMOS for s in _offered(n)])
def test_the_purchasing_csv_reads_back_as_the_same_circuit(tops, demo_catalog, name, stage):
    # a gain stage and a buffered divider use the same parts (a second channel, Ra and Rb):
    # the op-amp's line names the stage, so `check` on the purchasing CSV judges the circuit
    # designed, not a gain stage in place of a divider (4.29 Vrms for a 1 Vrms tone)
    from partpick.bom import parse_bom

    bom = with_stage(tops[name][1].bom, stage)
    back = parse_bom(bom_to_purchase_csv(bom, demo_catalog), f"{name}.csv", demo_catalog)
    assert (back.stage, back.supply_kind, back.topology) == (bom.stage, bom.supply_kind, bom.topology)
    assert sorted((ln.role, ln.family, ln.value) for ln in back.lines) == sorted(
        (ln.role, ln.family, ln.value) for ln in bom.lines)
