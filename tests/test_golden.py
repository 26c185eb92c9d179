"""Recorded outputs (tests/golden, see its README): `partpick design`, `check` and
`netlist` print what they printed when the files were recorded. Text must match
exactly; JSON numbers, and the 12-digit numbers of a SPICE netlist, to 1e-9 relative
(the last bits of a float may move when the arithmetic is regrouped, or on another
CPU's vector paths: a netlist's run length, 100 periods of the predicted frequency, came
out 0.00139734170638 s on one machine and ...637 on another, nothing more)."""

from __future__ import annotations

import json
import math
import re

import pytest
from click.testing import CliRunner

from partpick.cli import main
from tests.conftest import ROOT

GOLDEN = ROOT / "tests" / "golden"
DEMOS = ["carrier-50khz", "lvdt-exciter", "seismic-cal-20hz", "test-tone-5v"]


@pytest.fixture(autouse=True)
def at_root(monkeypatch):
    monkeypatch.chdir(ROOT)  # the recorded outputs name files relative to the repository root
    monkeypatch.delenv("PARTPICK_CATALOGS", raising=False)


def run(*args) -> str:
    result = CliRunner().invoke(main, list(args))
    assert result.exit_code in (0, 1), result.output
    return result.stdout


def _close(a, b, path=""):
    if isinstance(a, dict):
        assert set(a) == set(b), path
        for k in a:
            if k != "timings_s":
                _close(a[k], b[k], f"{path}.{k}")
    elif isinstance(a, list):
        assert len(a) == len(b), path
        for i, (x, y) in enumerate(zip(a, b)):
            _close(x, y, f"{path}[{i}]")
    elif isinstance(a, float) and isinstance(b, float):
        assert a == b or math.isclose(a, b, rel_tol=1e-9), (path, a, b)
    else:
        assert a == b, (path, a, b)


@pytest.mark.parametrize("name", DEMOS)
def test_design_text_and_json_unchanged(name):
    spec = f"specs/{name}.yaml"
    assert run("design", spec) == (GOLDEN / f"{name}.txt").read_text(encoding="utf-8")
    _close(json.loads((GOLDEN / f"{name}.json").read_text(encoding="utf-8")),
           json.loads(run("design", spec, "--format", "json")))


@pytest.mark.parametrize("args,file", [
    (("check", "specs/lvdt-exciter.yaml", "specs/boms/lvdt-exciter-draft.yaml"), "check-lvdt.txt"),
    (("check", "specs/test-tone-5v.yaml", "tests/golden/test-tone-5v-01.yaml"), "check-tone.txt"),
    (("netlist", "specs/boms/carrier-50khz-01.yaml", "--spec", "specs/carrier-50khz.yaml"), "netlist-carrier.cir"),
    (("netlist", "tests/golden/test-tone-5v-01.yaml", "--spec", "specs/test-tone-5v.yaml"), "netlist-tone.cir"),
], ids=lambda x: x if isinstance(x, str) else x[0])
def test_check_and_netlist_unchanged(args, file):
    got, want = run(*args), (GOLDEN / file).read_text(encoding="utf-8")
    if not file.endswith(".cir"):
        assert got == want
        return
    # text between the numbers exactly, each number to 1e-9 relative
    split = re.compile(r"(-?\d+(?:\.\d+)?(?:e[-+]?\d+)?)")
    got_lines, want_lines = got.splitlines(), want.splitlines()
    assert len(got_lines) == len(want_lines)
    for i, (g, w) in enumerate(zip(got_lines, want_lines)):
        gp, wp = split.split(g), split.split(w)
        assert gp[0::2] == wp[0::2], (i, g, w)
        _close([float(x) for x in gp[1::2]], [float(x) for x in wp[1::2]], f"{file}:{i + 1}")


def test_check_json_unchanged():
    got = json.loads(run("check", "specs/carrier-50khz.yaml", "specs/boms/carrier-50khz-01.yaml", "--format", "json"))
    _close(json.loads((GOLDEN / "check-carrier.json").read_text(encoding="utf-8")), got)
