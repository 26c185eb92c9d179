"""A heavy capacitive load: its current, the attenuator's ratio and the refusal.

A load R || C at the frequency f takes, at a peak voltage V, the peak current
V |1/R + j 2 pi f C| (Ohm's law with complex admittance, any circuit-analysis text);
a resistive divider Ra then Rb || Z_load has the ratio |Z / (Ra + Z)| with
Z = Rb || Z_load (the voltage-divider rule with complex impedances). The search's
tables and the refusal's bound are checked against these, and the carrier spec with
a 100 nF load (32 ohm at 50 kHz), which the search once refused while a design exists
(its prediction checked against ngspice in tests/test_ngspice_agreement.py,
"attenuator-100nF-load"), designs.
"""

from __future__ import annotations

import math
import re

import numpy as np
import pytest
from click.testing import CliRunner

from partpick.catalog import load_catalog
from partpick.cli import main
from partpick.pipeline import design
from partpick.search.tables import stage_table
from partpick.spec import Spec
from tests.conftest import CATALOGS, SPECS


def _carrier(tmp_path, load_c: str):
    text = (SPECS / "carrier-50khz.yaml").read_text(encoding="utf-8")
    assert "capacitance: 100 pF" in text
    path = tmp_path / f"carrier-{load_c.replace(' ', '')}.yaml"
    path.write_text(text.replace("capacitance: 100 pF", f"capacitance: {load_c}"), encoding="utf-8")
    return path


def _design(*args):
    return CliRunner().invoke(main, ["design", *map(str, args), "--catalog", str(CATALOGS), "-n", "1",
                                     "--samples", "2000"])


def test_attenuator_ratio_with_a_capacitive_load():
    rfam = load_catalog(CATALOGS).find("resistors", "tk-1")
    w = 2 * math.pi * 50e3
    y = complex(1 / 1e3, w * 100e-9)          # 1 kohm || 100 nF at 50 kHz
    gains, ra, rb = stage_table("attenuator", rfam, y)
    assert gains.size > 100 and np.all(np.diff(gains) >= 0)
    for i in np.linspace(0, gains.size - 1, 25).astype(int):
        z = 1 / (1 / complex(rb[i]) + y)       # Rb || Z_load
        assert gains[i] == pytest.approx(abs(z / (ra[i] + z)), rel=1e-12)
    # 46.4 ohm before 20 kohm || 100 nF: a low-pass near its corner, not the 0.95 a
    # resistive reading of the load (1 kohm alone) gives
    j = np.flatnonzero((np.abs(ra - 46.4) < 1e-9) & (np.abs(rb - 20e3) < 1e-6))
    assert j.size == 1 and 0.55 < gains[j[0]] < 0.75


def test_a_load_capacitance_no_op_amp_drives_is_refused_naming_it(tmp_path):
    result = _design(_carrier(tmp_path, "10 uF"))
    assert result.exit_code == 1
    err = result.stderr
    assert "load.capacitance binds" in err and "takes 3.554 A" in err, err
    # the bound by hand: 1 Vrms -20 % = 1.1314 V peak; the strongest allowed op-amp
    # (oa-fast-50m, 80 mA) at the output_current share of 60 % plans for 48 mA, so the
    # load may present |Y| <= 48 mA / 1.1314 V; with 1 mS of it resistive, the rest is
    # 2 pi 50 kHz C
    y_max = 0.048 / (0.8 * math.sqrt(2))
    c_max = math.sqrt(y_max ** 2 - 1e-6) / (2 * math.pi * 50e3)
    advice = re.search(r"a load\.capacitance over ([\d.]+) nF cannot design", err)
    assert advice and float(advice.group(1)) * 1e-9 == pytest.approx(c_max, rel=5e-3), err


def test_a_100nF_load_at_50kHz_designs(tmp_path):
    # refused before ("no allowed design oscillates ..."): the search read the
    # attenuator's ratio and the op-amp's current with the load's resistance alone
    path = _carrier(tmp_path, "100 nF")
    result = _design(path)
    assert result.exit_code == 0, result.stderr
    best = design(Spec.from_yaml(path), load_catalog(CATALOGS), results=1, samples=2000).ranked[0]
    assert best.verdict.passed
    current = next(c for c in best.verdict.checks if c.name == "op-amp output current")
    assert current.value <= current.high
    # the part of the load that takes the current is what a refusal would name
    assert current.field == "load.capacitance"
