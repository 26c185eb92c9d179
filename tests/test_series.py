"""Tests for partpick.series (IEC 60063:2015 preferred numbers)."""

from __future__ import annotations

import math

import eseries
import pytest
from hypothesis import given
from hypothesis import strategies as st

from partpick import series
from partpick.errors import InputError
from partpick.series import (
    SERIES_NAMES,
    check_series_name,
    digits,
    is_preferred,
    mantissas,
    nearest,
    neighbours,
    nominal_tolerance,
    values_in_range,
)


def _ints(name: str) -> tuple[int, ...]:
    """Our mantissas rounded back to the integers the standard tabulates."""
    scale = 10 ** (digits(name) - 1)
    return tuple(round(m * scale) for m in mantissas(name))


# --- tables -------------------------------------------------------------------


@pytest.mark.parametrize("name", SERIES_NAMES)
def test_table_matches_eseries_reference(name):
    # Independent reference: the PyPI `eseries` package, which tabulates the
    # series as integers with the standard's significant digits.
    reference = tuple(eseries.series(eseries.ESeries[name]))
    assert _ints(name) == reference


@pytest.mark.parametrize("name", SERIES_NAMES)
def test_one_decade_matches_eseries_erange(name):
    # Independent reference: `eseries.erange` over one decade, rounded to the
    # tabulated digits on both sides.
    d = digits(name)
    ours = [round(v, d - 1) for v in values_in_range(name, 1.0, 10.0)]
    theirs = [round(v, d - 1) for v in eseries.erange(eseries.ESeries[name], 1.0, 10.0)]
    assert ours == theirs


@pytest.mark.parametrize("name", SERIES_NAMES)
def test_table_shape(name):
    n = int(name[1:])
    m = mantissas(name)
    assert len(m) == n
    assert m[0] == 1.0
    assert all(1.0 <= x < 10.0 for x in m)
    assert list(m) == sorted(set(m))


@pytest.mark.parametrize("coarse, fine", [("E3", "E6"), ("E6", "E12"), ("E12", "E24"),
                                          ("E48", "E96"), ("E96", "E192")])
def test_series_nest(coarse, fine):
    assert mantissas(coarse) == mantissas(fine)[::2]


def test_spot_values_from_memory():
    # From memory of IEC 60063:2015 table (not derived from the module's table).
    e24 = mantissas("E24")
    for v in (2.7, 3.0, 3.3, 3.6, 3.9, 4.3, 4.7, 8.2, 9.1):
        assert v in e24
    for v in (2.6, 2.8, 2.9, 3.2, 3.5, 8.3):
        assert v not in e24
    e192 = mantissas("E192")
    assert 9.20 in e192
    assert 9.19 not in e192
    e96 = mantissas("E96")
    for v in (1.00, 4.99, 9.76, 1.02, 2.49):
        assert v in e96
    assert len(mantissas("E12")) == 12
    assert mantissas("E12")[:4] == (1.0, 1.2, 1.5, 1.8)
    assert mantissas("E6") == (1.0, 1.5, 2.2, 3.3, 4.7, 6.8)
    assert mantissas("E3") == (1.0, 2.2, 4.7)
    for v in (3.16, 4.64, 9.53, 1.05):
        assert v in mantissas("E48")


def test_digits_and_tolerance():
    assert [digits(n) for n in SERIES_NAMES] == [2, 2, 2, 2, 3, 3, 3]
    assert nominal_tolerance("E3") is None
    assert nominal_tolerance("E24") == 0.05
    assert nominal_tolerance("E192") == 0.005
    # Independent reference for E6..E192: `eseries.tolerance` (it gives E3 0.4,
    # which is not a standard pairing, so E3 is left out).
    for name in SERIES_NAMES[1:]:
        assert nominal_tolerance(name) == pytest.approx(eseries.tolerance(eseries.ESeries[name]))


# --- values_in_range ----------------------------------------------------------


def test_values_in_range_several_decades():
    v = values_in_range("E24", 10.0, 1e6)
    assert len(v) == 24 * 5 + 1
    assert v[0] == 10.0
    assert v[-1] == 1e6
    assert list(v) == sorted(v)


def test_values_in_range_exact_floats():
    v = values_in_range("E12", 1e3, 1e4)
    assert 4700.0 in v
    assert v == (1000.0, 1200.0, 1500.0, 1800.0, 2200.0, 2700.0,
                 3300.0, 3900.0, 4700.0, 5600.0, 6800.0, 8200.0, 10000.0)
    caps = values_in_range("E6", 1e-9, 1e-8)
    assert float("2.2e-9") in caps
    assert float("4.7e-9") in caps
    assert 4.99e3 in values_in_range("E96", 1e3, 1e4)
    assert values_in_range("E192", 9e2, 9.3e2) == (909.0, 920.0)


def test_values_in_range_inclusive_with_slack():
    assert values_in_range("E24", 4.7e3, 4.7e3) == (4700.0,)
    noisy_hi = 10 * 1000.0000000001
    assert values_in_range("E12", 8e3, noisy_hi) == (8200.0, 10000.0)
    noisy_lo = 4700.0000000001
    assert values_in_range("E12", noisy_lo, 5e3) == (4700.0,)
    assert values_in_range("E12", 4.71e3, 5.5e3) == ()


def test_values_in_range_extreme_decades():
    v = values_in_range("E3", 1e-13, 1e10)
    assert len(v) == 3 * 23 + 1
    assert v[0] == 1e-13
    assert v[1] == float("2.2e-13")
    assert v[-1] == 1e10


def test_values_in_range_bad_bounds():
    with pytest.raises(InputError):
        values_in_range("E12", 0.0, 10.0)
    with pytest.raises(InputError):
        values_in_range("E12", 1.0, math.inf)
    with pytest.raises(InputError):
        values_in_range("E12", 10.0, 1.0)


# --- nearest / neighbours / is_preferred --------------------------------------


def test_nearest_examples():
    assert nearest("E12", 5000.0) == 4700.0
    assert nearest("E12", 5200.0) == 5600.0
    assert nearest("E24", 1e-9 * 2.3) == float("2.4e-9")
    assert nearest("E96", 5.0e3) == 4990.0
    assert nearest("E192", 9.19) == 9.20
    assert nearest("E3", 9.9) == 10.0
    assert nearest("E3", 0.95) == 1.0
    assert nearest("E24", 4700.0) == 4700.0


def test_nearest_is_log_scale():
    # Between 4.7 and 10 the log midpoint is ~6.86, the linear one 7.35.
    assert nearest("E3", 7.0) == 10.0
    assert nearest("E3", 6.8) == 4.7
    assert nearest("E3", 6.9) == 10.0


def test_neighbours_examples():
    assert neighbours("E12", 5000.0) == (4700.0, 5600.0)
    assert neighbours("E12", 4700.0) == (4700.0, 4700.0)
    assert neighbours("E12", 4700.0000000001) == (4700.0, 4700.0)
    assert neighbours("E12", 4699.9999999999) == (4700.0, 4700.0)
    assert neighbours("E24", 9.5) == (9.1, 10.0)
    assert neighbours("E24", 1.05e-12) == (1e-12, float("1.1e-12"))
    assert neighbours("E192", 919.0) == (909.0, 920.0)


def test_is_preferred():
    assert is_preferred("E12", 4700.0)
    assert is_preferred("E12", 4.7e-9)
    assert not is_preferred("E12", 4300.0)
    assert is_preferred("E24", 4300.0)
    assert is_preferred("E192", 920.0)
    assert not is_preferred("E192", 919.0)
    assert is_preferred("E12", 4710.0, rel_tol=0.01)
    assert not is_preferred("E12", 4710.0)


def test_lowercase_names_accepted():
    assert check_series_name("e24") == "E24"
    assert check_series_name("E192") == "E192"
    assert mantissas("e12") == mantissas("E12")
    assert nearest("e96", 5e3) == 4990.0
    assert values_in_range("e3", 1.0, 10.0) == (1.0, 2.2, 4.7, 10.0)


# --- errors -------------------------------------------------------------------


def test_unknown_series_suggests_close_match():
    with pytest.raises(InputError) as info:
        check_series_name("E25")
    message = str(info.value)
    assert "unknown series 'E25'" in message
    assert "E3, E6, E12, E24, E48, E96, E192" in message
    assert "did you mean 'E24'?" in message


def test_unknown_series_without_close_match():
    with pytest.raises(InputError) as info:
        nearest("resistor", 1.0)
    assert "did you mean" not in str(info.value)
    assert isinstance(info.value, ValueError)


@pytest.mark.parametrize("bad", [0.0, -1.0, math.nan, math.inf, -math.inf, "1k", None, True])
def test_bad_values_raise(bad):
    with pytest.raises(InputError):
        nearest("E12", bad)
    with pytest.raises(InputError):
        neighbours("E12", bad)
    with pytest.raises(InputError):
        is_preferred("E12", bad)


def test_bad_rel_tol():
    with pytest.raises(InputError):
        is_preferred("E12", 4700.0, rel_tol=-1.0)


def test_module_documents_units():
    assert "IEC 60063:2015" in series.__doc__
    for func in (mantissas, digits, nominal_tolerance, values_in_range, nearest,
                 neighbours, is_preferred, check_series_name):
        assert func.__doc__


# --- properties ---------------------------------------------------------------

names = st.sampled_from(SERIES_NAMES)
# Log-uniform over 1e-12 .. 1e9, so every decade is exercised equally.
positive_values = st.floats(min_value=-12.0, max_value=9.0).map(lambda e: 10.0 ** e)


def _log_distance(a: float, b: float) -> float:
    return abs(math.log(a) - math.log(b))


@given(names, positive_values)
def test_neighbours_bracket_and_are_preferred(name, value):
    below, above = neighbours(name, value)
    assert is_preferred(name, below)
    assert is_preferred(name, above)
    assert below <= above
    if below == above:
        assert math.isclose(below, value, rel_tol=1e-9)
    else:
        assert below <= value <= above
        # Nothing on the series lies strictly between them.
        assert values_in_range(name, below, above) == (below, above)


@given(names, positive_values)
def test_nearest_is_log_closer_neighbour(name, value):
    below, above = neighbours(name, value)
    best = nearest(name, value)
    assert best in (below, above)
    other = above if best == below else below
    assert _log_distance(best, value) <= _log_distance(other, value)


@given(names, positive_values, st.floats(min_value=0.0, max_value=3.0))
def test_values_in_range_sorted_and_preferred(name, lo, span_decades):
    hi = lo * 10.0 ** span_decades
    values = values_in_range(name, lo, hi)
    assert list(values) == sorted(set(values))
    assert all(is_preferred(name, v) for v in values)
    assert all(lo * (1 - 1e-9) <= v <= hi * (1 + 1e-9) for v in values)
    # Roughly N values per decade spanned.
    n = int(name[1:])
    assert abs(len(values) - n * span_decades) <= 2


@given(names, st.integers(min_value=-13, max_value=9), st.integers(min_value=0, max_value=191))
def test_series_values_round_trip(name, decade, position):
    mantissa = _ints(name)[position % len(mantissas(name))]
    value = float(f"{mantissa}e{decade + 1 - digits(name)}")
    assert is_preferred(name, value)
    assert neighbours(name, value) == (value, value)
    assert nearest(name, value) == value
    assert values_in_range(name, value, value) == (value,)
