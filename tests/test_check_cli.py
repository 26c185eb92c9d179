"""`partpick check` and `partpick netlist` from the command line."""

from __future__ import annotations

import subprocess

import pytest
from click.testing import CliRunner

from partpick.bom import bom_to_csv, load_bom
from partpick.cli import main
from partpick.physics.ngspice import ngspice_available
from tests.conftest import CATALOGS, ROOT, SPECS

DRAFT = ROOT / "specs" / "boms" / "lvdt-exciter-draft.yaml"

BENCH_BOM = """\
topology: wien-bridge
supply: dual
stage: none
parts:
  - {ref: R1, role: rs, family: mf-1, value: 10k0}
  - {ref: C1, role: cs, family: c0g-1, value: 10n}
  - {ref: R2, role: rp, family: mf-1, value: 10k0}
  - {ref: C2, role: cp, family: c0g-1, value: 10n}
  - {ref: R3, role: rg, family: mf-1, value: 10k0}
  - {ref: R4, role: rf, family: mf-1, value: 21k5}
  - {ref: R5, role: rd, family: mf-1, value: 10k0}
  - {ref: 'D1,D2', role: limiter, family: d-si-signal}
  - {ref: U1, role: opamp, family: oa-jfet-4m}
"""

# A requirement this design meets (1.58 kHz, about 1.26 Vpp, THD near 4 %).
BENCH_SPEC = """\
name: bench-source
frequency: {target: 1.575 kHz, tolerance: 2 %}
amplitude: {target: 1.25 Vpp, tolerance: 20 %}
yield: {min: 90 %}
supply: {kind: dual, min: 11 V, max: 13 V}
load: {resistance: 10 kohm}
temperature: {min: 20 degC, max: 30 degC}
distortion: {max_thd: 5 %}
"""


def run(*args):
    return CliRunner().invoke(main, [str(a) for a in args])


@pytest.fixture()
def bench(tmp_path):
    spec = tmp_path / "bench.yaml"
    spec.write_text(BENCH_SPEC, encoding="utf-8")
    bom = tmp_path / "bench-bom.yaml"
    bom.write_text(BENCH_BOM, encoding="utf-8")
    return spec, bom


def test_check_failing_design_exits_1_and_says_by_how_much():
    result = run("check", SPECS / "lvdt-exciter.yaml", DRAFT, "--catalog", CATALOGS)
    assert result.exit_code == 1, result.output
    out = result.output
    assert "FAIL (" in out.splitlines()[0]
    assert "requirement" in out and "predicted" in out and "margin" in out
    assert "fails: yield (Monte Carlo):" in out and "is below 95 % by" in out
    assert "Monte Carlo (20000 builds, seed 1): yield" in out
    assert "fails: amplitude over supply and temperature:" in out and "is above" in out
    assert "caution: low-voltage signal circuit" in out


def test_check_passing_design(bench):
    spec, bom = bench
    result = run("check", spec, bom, "--catalog", CATALOGS)
    assert result.exit_code == 0, result.output
    assert "PASS" in result.output.splitlines()[0]
    assert "FAIL" not in result.output


def test_check_json(bench):
    import json

    spec, bom = bench
    data = json.loads(run("check", spec, bom, "--catalog", CATALOGS, "--format", "json").output)
    assert data["passed"] is True
    names = [c["name"] for c in data["checks"]]
    assert "frequency (nominal)" in names and "THD at load" in names


def test_check_transient_report(bench):
    spec, bom = bench
    result = run("check", spec, bom, "--catalog", CATALOGS, "--transient")
    assert result.exit_code == 0, result.output
    line = [ln for ln in result.output.splitlines() if ln.startswith("transient")][0]
    assert "Vpp at the load" in line and "settles (2 %) after" in line


def test_bom_csv_round_trip(bench, tmp_path, demo_catalog):
    spec, bom = bench
    csv_path = tmp_path / "bench-bom.csv"
    csv_path.write_text(bom_to_csv(load_bom(bom, demo_catalog)), encoding="utf-8")
    assert load_bom(csv_path, demo_catalog) == load_bom(bom, demo_catalog)
    assert run("check", spec, csv_path, "--catalog", CATALOGS).exit_code == 0


@pytest.mark.parametrize("old,new,words", [
    ("family: d-si-signal", "family: d-si-signl", ["unknown limiter family 'd-si-signl'", "did you mean"]),
    ("value: 21k5", "value: 21 kV", ["resistance"]),
    ("  - {ref: U1, role: opamp, family: oa-jfet-4m}\n", "", ["misses role(s) opamp"]),
])
def test_bad_bom(bench, old, new, words):
    spec, bom = bench
    bom.write_text(BENCH_BOM.replace(old, new), encoding="utf-8")
    result = run("check", spec, bom, "--catalog", CATALOGS)
    assert result.exit_code == 2
    assert result.stderr.startswith(f"error: {bom}:")
    for w in words:
        assert w in result.stderr


def test_netlist_command_writes_and_refuses_overwrite(bench, tmp_path):
    spec, bom = bench
    out = tmp_path / "bench.cir"
    result = run("netlist", bom, "--spec", spec, "--catalog", CATALOGS, "-o", out)
    assert result.exit_code == 0, result.output
    text = out.read_text(encoding="utf-8")
    assert ".tran" in text and ".subckt" in text and text.rstrip().endswith(".end")
    assert "R4 " in text and "R5 " in text
    again = run("netlist", bom, "--spec", spec, "--catalog", CATALOGS, "-o", out)
    assert again.exit_code == 2 and "--force" in again.stderr
    assert run("netlist", bom, "--spec", spec, "--catalog", CATALOGS, "-o", out, "--force").exit_code == 0


@pytest.mark.skipif(not ngspice_available(), reason="ngspice not installed")
def test_netlist_runs_in_ngspice(bench, tmp_path):
    spec, bom = bench
    out = tmp_path / "bench.cir"
    assert run("netlist", bom, "--spec", spec, "--catalog", CATALOGS, "-o", out, "--cycles", "20").exit_code == 0
    proc = subprocess.run(["ngspice", "-b", "-r", str(tmp_path / "bench.raw"), str(out)], capture_output=True, text=True, timeout=120)
    assert proc.returncode == 0, proc.stdout[-2000:] + proc.stderr[-2000:]
    assert "error" not in (proc.stdout + proc.stderr).lower()
