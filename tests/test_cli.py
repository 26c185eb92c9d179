"""CLI skeleton: help, version, catalog list/validate, spec check, init."""

from __future__ import annotations

import json
import subprocess
import sys

import pytest
from click.testing import CliRunner

from partpick import __version__
from partpick.cli import main
from tests.conftest import CATALOGS, SPECS


def run(*args):
    return CliRunner().invoke(main, list(args))


def test_help_and_version():
    result = run("--help")
    assert result.exit_code == 0
    for word in ("catalog", "spec", "init"):
        assert word in result.output
    result = run("--version")
    assert result.exit_code == 0 and result.output.strip() == f"partpick, version {__version__}"


def test_import_is_light():
    # The package and its CLI must not pull the solver or plotting in (STYLE.md, item 12),
    # nor scipy (issue 11: imported only where used; its import costs about 0.3 s)
    code = ("import sys, partpick, partpick.cli; "
            "print(any(m.split('.')[0] in ('ortools', 'matplotlib', 'scipy') for m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "False"


def test_the_program_ends_with_its_output_whole_and_its_exit_codes(tmp_path):
    # as the program, the process ends without the interpreter's teardown (fileio.leave):
    # what it printed and wrote must all be there, the exit codes those of SystemExit
    def program(*args):
        return subprocess.run([sys.executable, "-m", "partpick", *map(str, args)], capture_output=True, text=True,
                              timeout=300, stdin=subprocess.DEVNULL)

    done = program("design", SPECS / "seismic-cal-20hz.yaml", "-n", "3", "--format", "json", "--out", tmp_path / "o")
    assert done.returncode == 0, done.stderr
    assert len(json.loads(done.stdout)["candidates"]) == 3   # (the whole document, to its last byte)
    assert len(list((tmp_path / "o").glob("*.yaml"))) == 3 and "wrote 3 BOM file(s)" in done.stderr
    missing = program("spec", "check", tmp_path / "none.yaml", "--catalog", CATALOGS)
    assert missing.returncode == 2 and missing.stderr.startswith("error:") and missing.stdout == ""
    version = program("--version")
    assert version.returncode == 0 and version.stdout.strip() == f"partpick, version {__version__}"


def test_catalog_list():
    result = run("catalog", "list", "--catalog", str(CATALOGS))
    assert result.exit_code == 0, result.output
    assert "Demo catalog" in result.output
    assert "oa-jfet-4m" in result.output and "4 MHz" in result.output and "13 V/µs" in result.output
    assert "mf-1" in result.output and "E96" in result.output
    result = run("catalog", "list", "--catalog", str(CATALOGS), "--kind", "limiters")
    assert "d-si-signal" in result.output and "mf-1" not in result.output


def test_catalog_validate():
    result = run("catalog", "validate", str(CATALOGS))
    assert result.exit_code == 0
    assert result.output.startswith("ok: 6 file(s), 6 resistors, 6 capacitors, 9 opamps, 5 limiters, 3 jfets, 3 diodes, "
                                    "2 references")


@pytest.mark.parametrize("path", sorted(SPECS.glob("*.yaml")), ids=lambda p: p.stem)
def test_spec_check_each_demo(path):
    result = run("spec", "check", str(path), "--catalog", str(CATALOGS))
    assert result.exit_code == 0, result.output
    assert result.output.startswith(f"spec {path}: ok")
    assert "frequency.target" in result.output


def test_spec_check_prints_si():
    result = run("spec", "check", str(SPECS / "lvdt-exciter.yaml"), "--catalog", str(CATALOGS), "--format", "json")
    data = json.loads(result.output)["fields"]
    assert data["frequency.target"] == {"value": 5000.0, "unit": "Hz"}
    assert data["amplitude.target"]["value"] == pytest.approx(4.242640687)
    assert data["temperature.min"]["value"] == pytest.approx(273.15)
    text = run("spec", "check", str(SPECS / "lvdt-exciter.yaml"), "--catalog", str(CATALOGS)).output
    assert "5 kHz" in text and "0 degC" in text and "3 Vrms" in text


def test_init_writes_valid_spec_and_refuses_overwrite(tmp_path):
    target = tmp_path / "new.yaml"
    result = run("init", str(target))
    assert result.exit_code == 0 and target.exists()
    check = run("spec", "check", str(target), "--catalog", str(CATALOGS))
    assert check.exit_code == 0, check.output
    target.write_text("mine", encoding="utf-8")
    again = run("init", str(target))
    assert again.exit_code == 2
    assert again.stderr.strip() == f"error: {target}: already exists; pass --force to overwrite it"
    assert target.read_text(encoding="utf-8") == "mine"
    forced = run("init", str(target), "--force")
    assert forced.exit_code == 0 and target.read_text(encoding="utf-8").startswith("# partpick spec")


def test_spec_check_with_stock_list():
    spec = SPECS / "lvdt-exciter.yaml"
    text = spec.read_text(encoding="utf-8")
    assert "stock" not in text.split("parts:")[0]
    result = run("spec", "check", str(SPECS / "lvdt-exciter.yaml"), "--catalog", str(CATALOGS))
    assert "stock.file" in result.output
