"""Specs: demo specs load, values normalise to SI, defaults apply."""

from __future__ import annotations

import math

import pytest

from partpick.spec import Spec, check_parts
from tests.conftest import SPECS, VALID_SPEC

DEMO_SPECS = sorted(SPECS.glob("*.yaml"))


def test_at_least_four_demo_specs():
    assert len(DEMO_SPECS) >= 4


@pytest.mark.parametrize("path", DEMO_SPECS, ids=[p.stem for p in DEMO_SPECS])
def test_demo_spec_is_valid(path, demo_catalog):
    spec = Spec.from_yaml(path)
    check_parts(spec, demo_catalog)
    assert spec.frequency.target_hz > 0
    assert spec.supply.min_v <= spec.supply.max_v


def test_values_in_si():
    spec = Spec.from_text(VALID_SPEC, "x.yaml")
    assert spec.frequency.target_hz == 5000.0
    assert spec.frequency.tolerance_frac == pytest.approx(0.01)
    assert spec.amplitude.target.kind == "rms"
    # sine: peak = rms * sqrt(2) (any circuits handbook)
    assert spec.amplitude.peak_v == pytest.approx(3.0 * math.sqrt(2))
    assert spec.supply.span_min_v == pytest.approx(21.6)
    assert spec.load.resistance_ohm == 200.0
    assert spec.load.capacitance_f == pytest.approx(1e-9)
    assert spec.temperature.min_k == pytest.approx(263.15)
    assert spec.temperature.nominal_k == pytest.approx(298.15)
    assert spec.max_thd_frac == pytest.approx(0.01)
    assert spec.yield_min_frac == pytest.approx(0.99)
    assert spec.parts.resistors == ("mf-1", "tk-1")
    assert spec.parts.opamps is None
    assert spec.rank_by == ("yield", "frequency_error", "cost")
    assert spec.line_of("frequency") == 3
    assert spec.line_of("supply.min") == 5


def test_defaults_and_open_load():
    text = """\
frequency: {target: 400 Hz, tolerance: 0.5 %}
amplitude: {target: 10 Vpp, tolerance: 5 %}
supply: {kind: single, min: 12 V}
load: {resistance: open}
"""
    spec = Spec.from_text(text, "min.yaml")
    assert spec.name == "min"
    assert spec.topology == "wien-bridge"
    assert math.isinf(spec.load.resistance_ohm)
    assert spec.supply.max_v == 12.0
    assert spec.temperature.min_k == spec.temperature.max_k == pytest.approx(298.15)
    assert spec.results == 10 and spec.builds == 1 and spec.output_stage == "auto"


def test_stock_and_catalog_paths_resolve_against_spec(tmp_path):
    text = VALID_SPEC + "stock: bench.csv\ncatalogs: [../cat]\n"
    folder = tmp_path / "specs"
    folder.mkdir()
    path = folder / "s.yaml"
    path.write_text(text, encoding="utf-8")
    spec = Spec.from_yaml(path)
    assert spec.stock.path == (folder / "bench.csv").resolve()
    assert spec.stock.mode == "prefer"
    assert spec.catalogs == ((tmp_path / "cat").resolve(),)


def test_spec_is_frozen():
    spec = Spec.from_text(VALID_SPEC, "x.yaml")
    with pytest.raises(AttributeError):
        spec.results = 3  # type: ignore[misc]
