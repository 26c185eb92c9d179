"""What the engineer takes away: the HTML report renders in a real browser (headless
Chromium, Debian's package) for every demo spec; BOM files round-trip through `check`;
every demo design's netlist runs in ngspice."""

from __future__ import annotations

import re
import shutil
import subprocess

import pytest
from click.testing import CliRunner

from partpick.cli import main
from partpick.physics.ngspice import ngspice_available
from tests.conftest import CATALOGS, SPECS

DEMOS = sorted(SPECS.glob("*.yaml"))
CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")
FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync"]
SECTIONS = ["requirement", "bom", "schematic", "verdict", "waveform", "spectrum", "montecarlo", "tradeoff",
            "cautions", "alternatives"]


def run(*args):
    return CliRunner().invoke(main, [str(a) for a in args])


@pytest.mark.skipif(CHROMIUM is None, reason="chromium not installed")
@pytest.mark.parametrize("path", DEMOS, ids=lambda p: p.stem)
def test_report_renders_in_chromium(tmp_path, path):
    pytest.importorskip("schemdraw")
    report = tmp_path / "report.html"
    result = run("report", path, "--catalog", CATALOGS, "-o", report, "--samples", "2000")
    assert result.exit_code == 0, result.output + result.stderr
    profile = tmp_path / "profile"
    dom = subprocess.run([CHROMIUM, *FLAGS, f"--user-data-dir={profile}", "--enable-logging=stderr", "--v=0",
                          "--dump-dom", report.as_uri()], capture_output=True, text=True, timeout=120)
    assert dom.returncode == 0, dom.stderr[-2000:]
    html = dom.stdout
    assert "partpick design report" in html
    for section in SECTIONS:
        assert f'id="{section}"' in html, section
    # the drawings are really there: the schematic and the charts are SVG with content
    assert re.search(r'id="schematic">\s*<svg', html)
    assert html.count("<svg") >= 5
    assert "R1" in html and "U1" in html
    # no script errors (the page has no script at all) and nothing failed to load
    assert "Uncaught" not in dom.stderr and "Failed to load" not in dom.stderr
    shot = tmp_path / "page.png"
    subprocess.run([CHROMIUM, *FLAGS, f"--user-data-dir={profile}", f"--screenshot={shot}", "--window-size=1200,2400",
                    report.as_uri()], capture_output=True, timeout=120)
    assert shot.stat().st_size > 20_000  # a rendered page, not a blank one


@pytest.mark.parametrize("path", DEMOS, ids=lambda p: p.stem)
def test_bom_files_round_trip_and_netlists_run(tmp_path, path):
    out = tmp_path / "out"
    result = run("design", path, "--catalog", CATALOGS, "-n", "1", "--out", out, "--samples", "2000")
    assert result.exit_code == 0, result.output + result.stderr
    csv_file = next(out.glob("*.csv"))
    header = csv_file.read_text(encoding="utf-8").splitlines()[0]
    assert header.split(",")[:4] == ["designators", "roles", "quantity", "value"]
    for col in ("description", "maker", "maker_part", "tolerance", "tempco", "rating", "package", "unit_cost",
                "line_cost", "order_cost", "on_shelf"):
        assert col in header
    yaml_file = next(out.glob("*.yaml"))
    a = run("check", path, yaml_file, "--catalog", CATALOGS, "--format", "json", "--samples", "2000")
    b = run("check", path, csv_file, "--catalog", CATALOGS, "--format", "json", "--samples", "2000")
    assert a.exit_code == b.exit_code == 0, a.output + b.output
    assert a.output.replace(str(yaml_file), "X") == b.output.replace(str(csv_file), "X")
    assert next(out.glob("*.json")).read_text(encoding="utf-8").lstrip().startswith("{")
    if not ngspice_available():
        pytest.skip("ngspice not installed")
    cir = tmp_path / "design.cir"
    assert run("netlist", yaml_file, "--spec", path, "--catalog", CATALOGS, "-o", cir, "--cycles", "30").exit_code == 0
    proc = subprocess.run(["ngspice", "-b", "-r", str(tmp_path / "design.raw"), str(cir)], capture_output=True,
                          text=True, timeout=300)
    assert proc.returncode == 0, proc.stdout[-2000:]
    assert "error" not in (proc.stdout + proc.stderr).lower()
