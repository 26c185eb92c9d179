"""The netlist runs as it is: `ngspice -b FILE` on `partpick netlist` output exits 0 and
prints the frequency, the amplitude at the load and the THD, and they agree with what
partpick predicts for the nominal point (frequency within 0.5 %, amplitude within 5 %,
THD within a factor 1.5 where it is above 0.3 %, as tests/test_ngspice_agreement.py
holds the physics to). ngspice (the Debian package) is the independent reference."""

from __future__ import annotations

import re
import subprocess

import pytest
from click.testing import CliRunner

from partpick.bom import load_bom
from partpick.cli import main
from partpick.physics.ngspice import ngspice_available
from partpick.pipeline import design, evaluate_bom
from partpick.spec import Spec
from partpick.bom import bom_to_yaml
from tests.conftest import CATALOGS, ROOT, SPECS

pytestmark = [pytest.mark.ngspice, pytest.mark.skipif(not ngspice_available(), reason="ngspice not installed")]

DEMOS = sorted(p.stem for p in SPECS.glob("*.yaml"))
SHIPPED = [("carrier-50khz", SPECS / "boms" / "carrier-50khz-01.yaml"),
           ("lvdt-exciter", SPECS / "boms" / "lvdt-exciter-draft.yaml"),
           ("test-tone-5v", ROOT / "tests" / "golden" / "test-tone-5v-01.yaml")]
MEASURED = re.compile(r"partpick measured: frequency (\S+) Hz, amplitude at the load (\S+) V peak, (\S+) V rms")
THD = re.compile(r"THD: (\S+) %")


def _run(spec_path, bom_path, tmp_path):
    cir = tmp_path / "design.cir"
    result = CliRunner().invoke(main, ["netlist", str(bom_path), "--spec", str(spec_path), "--catalog", str(CATALOGS),
                                       "-o", str(cir)])
    assert result.exit_code == 0, result.output
    proc = subprocess.run(["ngspice", "-b", cir.name], cwd=tmp_path, capture_output=True, text=True, timeout=300,
                          stdin=subprocess.DEVNULL)
    return cir.read_text(encoding="utf-8"), proc


def _check(spec_path, bom_path, tmp_path, catalog):
    spec = Spec.from_yaml(spec_path)
    predicted = evaluate_bom(load_bom(bom_path, catalog), spec, catalog, samples=100).verdict.nominal
    text, proc = _run(spec_path, bom_path, tmp_path)
    assert proc.returncode == 0, proc.stdout[-2000:] + proc.stderr[-2000:]
    title = text.splitlines()[0]
    assert f"target {spec.frequency.target_hz / 1e3:g} kHz" in title or f"target {spec.frequency.target_hz:g} Hz" in title
    assert "predicted" in title and "f0" not in title
    m = MEASURED.search(proc.stdout)
    assert m, proc.stdout[-2000:]
    freq, peak, rms = map(float, m.groups())
    assert freq == pytest.approx(predicted.freq_hz, rel=0.005)
    assert peak == pytest.approx(predicted.load_peak_v, rel=0.05)
    assert rms == pytest.approx(predicted.load_peak_v / 2 ** 0.5, rel=0.05)  # a sine's rms is peak / sqrt 2
    thd = float(THD.search(proc.stdout).group(1)) / 100
    if predicted.load_thd > 0.003:
        assert 1 / 1.5 <= predicted.load_thd / thd <= 1.5, (predicted.load_thd, thd)


@pytest.mark.parametrize("name", DEMOS)
def test_every_demo_design_netlist_runs_in_batch(tmp_path, demo_catalog, name):
    spec_path = SPECS / f"{name}.yaml"
    top = design(Spec.from_yaml(spec_path), demo_catalog, results=1, samples=100).ranked[0]
    bom_path = tmp_path / "bom.yaml"
    bom_path.write_text(bom_to_yaml(top.bom), encoding="utf-8")
    _check(spec_path, bom_path, tmp_path, demo_catalog)


@pytest.mark.parametrize("name,bom_path", SHIPPED, ids=[n for n, _ in SHIPPED])
def test_shipped_bom_netlists_run_in_batch(tmp_path, demo_catalog, name, bom_path):
    _check(SPECS / f"{name}.yaml", bom_path, tmp_path, demo_catalog)
