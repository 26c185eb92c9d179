"""Preferred-number series E3 ... E192 of IEC 60063:2015.

The tables below are the standard's, not the formula ``round(10**(i/N), digits)``:
E24 (and so E12, E6, E3) keeps the historical values 2.7, 3.0, 3.3, 3.6, 3.9,
4.3, 4.7 and 8.2, and E192 (and so nothing coarser) has 9.20 where the formula
gives 9.19.

Every series value is addressed by one integer index ``k`` running over all
decades: ``k = N * decade + position``. Values are built from the decimal text
``f"{mantissa}e{exponent}"`` so that 4.7 kΩ is exactly ``4700.0`` and 2.2 nF is
exactly ``float("2.2e-9")``; multiplying by powers of ten would add float noise
that breaks equality with what users type.

All values are SI floats (ohms, farads, henries, ...); the functions do not care
which unit, only that it is the plain SI unit without a prefix.
"""

from __future__ import annotations

import difflib
import functools
import math

from partpick.errors import InputError

__all__ = [
    "SERIES_NAMES",
    "check_series_name",
    "digits",
    "is_preferred",
    "mantissas",
    "nearest",
    "neighbours",
    "nominal_tolerance",
    "values_in_range",
]

SERIES_NAMES: tuple[str, ...] = ("E3", "E6", "E12", "E24", "E48", "E96", "E192")

# Integer mantissas as IEC 60063:2015 tabulates them (E3..E24 with two
# significant digits, E48..E192 with three).
_TABLES: dict[str, tuple[int, ...]] = {
    "E3": (10, 22, 47),
    "E6": (10, 15, 22, 33, 47, 68),
    "E12": (10, 12, 15, 18, 22, 27, 33, 39, 47, 56, 68, 82),
    "E24": (
        10, 11, 12, 13, 15, 16, 18, 20, 22, 24, 27, 30,
        33, 36, 39, 43, 47, 51, 56, 62, 68, 75, 82, 91,
    ),
    "E48": (
        100, 105, 110, 115, 121, 127, 133, 140, 147, 154, 162, 169, 178, 187, 196, 205,
        215, 226, 237, 249, 261, 274, 287, 301, 316, 332, 348, 365, 383, 402, 422, 442,
        464, 487, 511, 536, 562, 590, 619, 649, 681, 715, 750, 787, 825, 866, 909, 953,
    ),
    "E96": (
        100, 102, 105, 107, 110, 113, 115, 118, 121, 124, 127, 130, 133, 137, 140, 143,
        147, 150, 154, 158, 162, 165, 169, 174, 178, 182, 187, 191, 196, 200, 205, 210,
        215, 221, 226, 232, 237, 243, 249, 255, 261, 267, 274, 280, 287, 294, 301, 309,
        316, 324, 332, 340, 348, 357, 365, 374, 383, 392, 402, 412, 422, 432, 442, 453,
        464, 475, 487, 499, 511, 523, 536, 549, 562, 576, 590, 604, 619, 634, 649, 665,
        681, 698, 715, 732, 750, 768, 787, 806, 825, 845, 866, 887, 909, 931, 953, 976,
    ),
    "E192": (
        100, 101, 102, 104, 105, 106, 107, 109, 110, 111, 113, 114, 115, 117, 118, 120,
        121, 123, 124, 126, 127, 129, 130, 132, 133, 135, 137, 138, 140, 142, 143, 145,
        147, 149, 150, 152, 154, 156, 158, 160, 162, 164, 165, 167, 169, 172, 174, 176,
        178, 180, 182, 184, 187, 189, 191, 193, 196, 198, 200, 203, 205, 208, 210, 213,
        215, 218, 221, 223, 226, 229, 232, 234, 237, 240, 243, 246, 249, 252, 255, 258,
        261, 264, 267, 271, 274, 277, 280, 284, 287, 291, 294, 298, 301, 305, 309, 312,
        316, 320, 324, 328, 332, 336, 340, 344, 348, 352, 357, 361, 365, 370, 374, 379,
        383, 388, 392, 397, 402, 407, 412, 417, 422, 427, 432, 437, 442, 448, 453, 459,
        464, 470, 475, 481, 487, 493, 499, 505, 511, 517, 523, 530, 536, 542, 549, 556,
        562, 569, 576, 583, 590, 597, 604, 612, 619, 626, 634, 642, 649, 657, 665, 673,
        681, 690, 698, 706, 715, 723, 732, 741, 750, 759, 768, 777, 787, 796, 806, 816,
        825, 835, 845, 856, 866, 876, 887, 898, 909, 920, 931, 942, 953, 965, 976, 988,
    ),
}

# E3 has no tolerance of its own in practice (parts are sold as E6 at 20 %),
# so it gets None rather than an invented figure.
_TOLERANCES: dict[str, float | None] = {
    "E3": None,
    "E6": 0.20,
    "E12": 0.10,
    "E24": 0.05,
    "E48": 0.02,
    "E96": 0.01,
    "E192": 0.005,
}

_DIGITS: dict[str, int] = {name: len(str(table[0])) for name, table in _TABLES.items()}

_MANTISSAS: dict[str, tuple[float, ...]] = {
    name: tuple(float(f"{m}e{1 - _DIGITS[name]}") for m in table)
    for name, table in _TABLES.items()
}

# Slack for "this value is on the series": generous enough for values that went
# through a unit conversion or a multiplication, far below any series step.
_ON_SERIES_REL = 1e-9

_LOOKUP = {name.upper(): name for name in SERIES_NAMES}


def check_series_name(name: str) -> str:
    """The canonical series name ("e24" -> "E24").

    Raises InputError for anything that is not one of SERIES_NAMES, suggesting
    the closest name when there is one.
    """
    if isinstance(name, str):
        canonical = _LOOKUP.get(name.strip().upper())
        if canonical is not None:
            return canonical
        close = difflib.get_close_matches(name.strip().upper(), SERIES_NAMES, n=1)
    else:
        close = []
    message = f"unknown series {name!r}; expected one of {', '.join(SERIES_NAMES)}"
    if close:
        message += f"; did you mean {close[0]!r}?"
    raise InputError(message)


def _check_value(value: float, what: str = "value") -> float:
    # bool is an int subclass; True as a resistance is always a mistake.
    if isinstance(value, bool):
        raise InputError(f"{what} must be a positive finite number, got {value!r}")
    try:
        number = float(value)
    except (TypeError, ValueError):
        raise InputError(f"{what} must be a positive finite number, got {value!r}") from None
    if not math.isfinite(number) or number <= 0.0:
        raise InputError(f"{what} must be a positive finite number, got {value!r}")
    return number


def _value(name: str, k: int) -> float:
    """Series value number k across all decades (k = 0 is 1.0)."""
    table = _TABLES[name]
    decade, position = divmod(k, len(table))
    return float(f"{table[position]}e{decade + 1 - _DIGITS[name]}")


def _floor_index(name: str, value: float) -> int:
    """Largest k with _value(name, k) <= value."""
    # The series is close to geometric, so N*log10(value) lands within a step or
    # two of the answer; the exact comparisons below settle float noise and the
    # historical E24 values that sit off the geometric grid.
    k = math.floor(len(_TABLES[name]) * math.log10(value))
    while _value(name, k) > value:
        k -= 1
    while _value(name, k + 1) <= value:
        k += 1
    return k


def mantissas(name: str) -> tuple[float, ...]:
    """The series values in [1, 10), ascending, as dimensionless floats (4.7, 4.99)."""
    return _MANTISSAS[check_series_name(name)]


def digits(name: str) -> int:
    """Significant digits the series is tabulated with: 2 for E3..E24, 3 for E48..E192."""
    return _DIGITS[check_series_name(name)]


def nominal_tolerance(name: str) -> float | None:
    """Tolerance traditionally paired with the series, as a fraction (E24 -> 0.05).

    None for E3, which has no tolerance of its own.
    """
    return _TOLERANCES[check_series_name(name)]


@functools.lru_cache(maxsize=256)   # (a pure function; the search asks for each family's values often)
def values_in_range(name: str, lo: float, hi: float) -> tuple[float, ...]:
    """Every series value v with lo <= v <= hi, ascending, in the unit of lo and hi.

    Both bounds are inclusive with a relative slack of 1e-9, so a bound that is a
    series value up to float noise (10e3 computed as 10 * 1000.0000000001) is
    included. lo and hi are positive SI floats (ohms, farads, ...); lo > hi is an
    error rather than an empty result, since it is almost always swapped bounds.
    """
    name = check_series_name(name)
    lo = _check_value(lo, "lo")
    hi = _check_value(hi, "hi")
    if lo > hi:
        raise InputError(f"empty range: lo {lo!r} is greater than hi {hi!r}")
    first = _floor_index(name, lo * (1.0 - _ON_SERIES_REL))
    if _value(name, first) < lo * (1.0 - _ON_SERIES_REL):
        first += 1
    last = _floor_index(name, hi * (1.0 + _ON_SERIES_REL))
    return tuple(_value(name, k) for k in range(first, last + 1))


def neighbours(name: str, value: float) -> tuple[float, float]:
    """(largest series value <= value, smallest series value >= value), SI floats.

    When value is on the series within a relative 1e-9, both entries are that
    series value. value is a positive SI float (ohms, farads, ...).
    """
    name = check_series_name(name)
    value = _check_value(value)
    k = _floor_index(name, value)
    below, above = _value(name, k), _value(name, k + 1)
    for candidate in (below, above):
        if math.isclose(candidate, value, rel_tol=_ON_SERIES_REL):
            return candidate, candidate
    return below, above


def nearest(name: str, value: float) -> float:
    """The series value closest to value on a log scale (ties go to the lower), SI float.

    Log distance is what matters for parts: 1.0 and 2.2 are equally far from
    their geometric mean. value is a positive SI float (ohms, farads, ...).
    """
    below, above = neighbours(name, value)
    if below == above:
        return below
    value = float(value)
    if math.log(value / below) <= math.log(above / value):
        return below
    return above


def is_preferred(name: str, value: float, rel_tol: float = 1e-9) -> bool:
    """Whether value (a positive SI float: ohms, farads, ...) is a series value.

    rel_tol is the relative tolerance of the match, a non-negative fraction.
    """
    name = check_series_name(name)
    value = _check_value(value)
    if isinstance(rel_tol, bool) or not (isinstance(rel_tol, (int, float)) and rel_tol >= 0):
        raise InputError(f"rel_tol must be a non-negative number, got {rel_tol!r}")
    k = _floor_index(name, value)
    return any(
        math.isclose(_value(name, j), value, rel_tol=rel_tol, abs_tol=0.0) for j in (k, k + 1)
    )
