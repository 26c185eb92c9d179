"""The shipped demo catalog: complete, valid, and values drawn from IEC 60063 series."""

from __future__ import annotations

import math

import pytest

from partpick import series
from partpick.catalog import load_catalog
from tests.conftest import CATALOGS


def test_demo_catalog_size(demo_catalog):
    # The foundations issue asks for at least 5 / 5 / 8 / 4 families.
    assert len(demo_catalog.resistors) >= 5
    assert len(demo_catalog.capacitors) >= 5
    assert len(demo_catalog.opamps) >= 8
    assert len(demo_catalog.limiters) >= 4
    assert {lim.kind for lim in demo_catalog.limiters} == {"diode", "zener-pair", "led"}
    assert demo_catalog.demo
    assert demo_catalog.currency == "USD"


def test_every_demo_file_is_headed_as_demo_data():
    for path in sorted(CATALOGS.glob("*.yaml")):
        assert path.read_text(encoding="utf-8").startswith("# DEMO DATA"), path


def test_opamps_span_slow_micropower_to_fast_high_current(demo_catalog):
    gbw = [op.gbw_hz for op in demo_catalog.opamps]
    assert min(gbw) <= 100e3 and max(gbw) >= 50e6
    assert min(op.quiescent_current_a for op in demo_catalog.opamps) <= 10e-6
    assert max(op.output_current_a for op in demo_catalog.opamps) >= 100e-3


def test_family_values_are_series_values_within_range(demo_catalog):
    for fam in demo_catalog.resistors + demo_catalog.capacitors:
        values = fam.values()
        lo, hi = (fam.min_ohm, fam.max_ohm) if hasattr(fam, "min_ohm") else (fam.min_f, fam.max_f)
        assert values and values[0] >= lo * (1 - 1e-9) and values[-1] <= hi * (1 + 1e-9)
        assert all(series.is_preferred(fam.series, v) for v in values)


def test_demo_values_parse_to_si(demo_catalog):
    mf = demo_catalog.find("resistors", "mf-1")
    assert mf.tolerance_frac == pytest.approx(0.01)
    assert mf.tempco_per_k == pytest.approx(50e-6)
    assert mf.min_ohm == 10.0 and mf.max_ohm == 1e6
    # 96 values a decade over 10 ohm .. 1 Mohm (five decades) plus the closing 1.00 Mohm.
    assert len(mf.values()) == 96 * 5 + 1
    op = demo_catalog.find("opamps", "oa-jfet-4m")
    assert op.gbw_hz == 4e6
    assert op.a0 == pytest.approx(158489.3, rel=1e-6)  # 104 dB = 10^(104/20) V/V (20 log10)
    assert op.slew_v_per_s == pytest.approx(11e6)
    x7r = demo_catalog.find("capacitors", "x7r-10")
    assert x7r.has_band and x7r.band_frac == pytest.approx(0.15)
    assert x7r.band_min_k == pytest.approx(218.15)
    z = demo_catalog.find("limiters", "z-pair-3v3")
    assert z.vz_v == pytest.approx(3.3) and z.vz_tempco_v_per_k == pytest.approx(-1.8e-3)


def test_capacitor_price_grows_with_value(demo_catalog):
    for fam in demo_catalog.capacitors:
        prices = [fam.unit_price(v) for v in fam.values()]
        assert prices == sorted(prices)
        assert math.isclose(prices[0], fam.unit_price(fam.min_f))


def test_ids_unique_across_kinds(demo_catalog):
    ids = demo_catalog.all_ids()
    assert len(ids) == len(set(ids))


def test_tiny_catalog_loads(tiny_catalog_dir):
    cat = load_catalog(tiny_catalog_dir)
    assert cat.ids("resistors") == ("r-e12", "r-e24")
    assert cat.kind_of("lim-z") == "limiters"
    assert cat.find("resistors", "nope") is None
