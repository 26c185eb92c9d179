"""Shared fixtures: the shipped demo catalog, a valid spec text, a tiny catalog."""

from __future__ import annotations

import os
from pathlib import Path

import pytest
from hypothesis import settings

# CI runs the property tests on a fixed sequence of examples, so a run is repeatable;
# locally they explore afresh each time.
settings.register_profile("ci", derandomize=True, deadline=None)
if os.environ.get("CI"):
    settings.load_profile("ci")

ROOT = Path(__file__).resolve().parent.parent
CATALOGS = ROOT / "catalogs"
SPECS = ROOT / "specs"

VALID_SPEC = """\
name: bench-test
topology: wien-bridge
frequency: {target: 5 kHz, tolerance: 1 %}
amplitude: {target: 3.0 Vrms, tolerance: 5 %}
supply: {kind: dual, min: 10.8 V, max: 13.2 V}
load: {resistance: 200 ohm, capacitance: 1 nF}
temperature: {min: -10 degC, max: 60 degC}
distortion: {max_thd: 1 %}
yield: {min: 99 %}
parts:
  resistors: [mf-1, tk-1]
  capacitors: [c0g-1]
  opamps: all
  limiters: all
rank_by: [yield, frequency_error, cost]
results: 5
"""

# Six families, one per line of each kind, for tests that need a small catalog.
TINY_CATALOG = """\
demo: true
currency: USD
resistors:
  - {id: r-e12, technology: metal film, series: E12, tolerance: 1 %, tempco: 50 ppm/K,
     range: {min: 1 kohm, max: 100 kohm}, power: 0.25 W, price: {unit: 0.01, line: 0.05}}
  - {id: r-e24, technology: thick film, series: E24, tolerance: 5 %, tempco: 200 ppm/K,
     range: {min: 1 kohm, max: 100 kohm}, power: 0.1 W, price: {unit: 0.002}}
capacitors:
  - {id: c-e6, dielectric: C0G, series: E6, tolerance: 5 %, tempco: {nominal: 0 ppm/K, spread: 30 ppm/K},
     range: {min: 1 nF, max: 100 nF}, voltage: 50 V, price: {at_min: 0.01, at_max: 0.10, line: 0.05}}
opamps:
  - {id: op-a, gbw: 1 MHz, dc_gain: 100 dB, slew_rate: 0.5 V/us, supply: {min: 3 V, max: 32 V},
     headroom: {high: 1.5 V, low: 0.1 V}, output_current: 20 mA, output_resistance: 100 ohm,
     input_common_mode: {low: 0 V, high: 1.5 V}, quiescent_current: 0.5 mA, input_bias_current: 20 nA,
     price: {unit: 0.1}}
limiters:
  - {id: lim-si, kind: diode, saturation_current: 3 nA, emission: 1.8, series_resistance: 0.6 ohm,
     price: {unit: 0.02}}
  - {id: lim-z, kind: zener-pair, saturation_current: 2 nA, emission: 1.8, zener_voltage: 3.3 V,
     zener_current: 5 mA, zener_resistance: 60 ohm, zener_tempco: -1.8 mV/K, price: {unit: 0.03}}
"""


@pytest.fixture(scope="session")
def demo_catalog():
    from partpick.catalog import load_catalog

    return load_catalog(CATALOGS)


@pytest.fixture()
def tiny_catalog_dir(tmp_path):
    folder = tmp_path / "tiny"
    folder.mkdir()
    (folder / "parts.yaml").write_text(TINY_CATALOG, encoding="utf-8")
    return folder


@pytest.fixture()
def spec_file(tmp_path):
    """Write spec text to a file and return its path."""

    def write(text: str = VALID_SPEC, name: str = "spec.yaml") -> Path:
        path = tmp_path / name
        path.write_text(text, encoding="utf-8")
        return path

    return write
