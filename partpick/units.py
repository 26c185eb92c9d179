"""Quantities as text: the only module that turns text into SI floats and back.

API
---
``DIMENSIONS``
    The dimension names this module knows (``"resistance"``, ``"capacitance"``, ...).
:func:`unit_symbol` ``(dim) -> str``
    The unit a dimension is displayed in (``"Ω"``, ``"F"``, ``"Hz"``, ``"degC"``, ``"%"``,
    ``"ppm/K"``, ``"V/µs"``, ...).
:func:`parse_quantity` ``(text, dim) -> float``
    ``"4.7 kΩ"``, ``"100n"``, ``"4k7"``, ``"-10 degC"``, ``"200 ppm/K"`` -> SI float in
    the base unit of ``dim`` (ohm, F, Hz, V, A, W, s, K, 1, 1/K, V/K, V/s, V/V, J, A/V², rad).
:func:`format_quantity` ``(value, dim, digits=None) -> str``
    SI float -> ``"4.7 kΩ"`` (engineering notation, SI prefix, display unit).
:func:`parse_rkm` / :func:`format_rkm`
    The RKM code of IEC 60062 for resistance and capacitance (``"4k7"``, ``"R47"``,
    ``"2n2"``).
:class:`Amplitude`, :func:`parse_amplitude`, :func:`format_amplitude`
    A sine amplitude that keeps its kind: peak (``Vpk``, ``Vp``), peak-to-peak (``Vpp``)
    or rms (``Vrms``).

Rules
-----
* Strict and case-sensitive, as the SI is: ``M`` is mega, ``m`` is milli, ``K`` is not
  kilo (except as the IEC 60062 RKM letter). Micro may be written ``u``, ``µ`` (U+00B5
  MICRO SIGN) or ``μ`` (U+03BC GREEK SMALL LETTER MU); ``µ`` is printed. Ohm may be
  written ``ohm``, ``Ω`` (U+03A9) or ``Ω`` (U+2126 OHM SIGN); U+03A9 is printed.
* Every prefix spelling lives in the one table :data:`_PREFIXES` (SI prefixes from
  femto to tera, BIPM *The International System of Units (SI)*, 9th edition 2019,
  section 3, Table 7). Every unit spelling of every dimension is generated from it.
* Whitespace around and between number and unit is allowed; a bare number is read in
  the base unit of the dimension, except that a bare temperature is in degC (people
  write ``-40``), a bare fraction is the fraction itself (``0.01`` is 1 %) and a bare
  gain is the ratio V/V. Resistances and capacitances may also be written with the
  prefix letter only (``"4.7k"``, ``"100n"``) or as an RKM code.
* Decimal text is converted exactly (one correctly rounded step), so ``"4.7 nF"`` is
  the float nearest to 4.7e-9. The electronvolt is exactly 1.602176634e-19 J (SI 2019
  redefinition; SI Brochure Table 8); ``dB`` is a voltage ratio, 20 log10.
* Zero and negative values are read (range checks are the caller's job); empty text,
  ``None``, booleans, NaN, infinities and overflowing values are not. Every failure is a
  :class:`~partpick.errors.UnitError` saying what was expected, with a did-you-mean for
  a wrong case or a near miss (``'4.7 uf'`` -> ``'4.7 uF'``).
* Formatting with ``digits=None`` uses the fewest significant digits that read back to
  within a relative 1e-12 (typically 1..9, at most 17), so text round trips hold;
  ``digits=N`` prints exactly N significant digits, trailing zeros kept
  (``"10.0 kΩ"``). The prefix is chosen after rounding (999.96 at 3 digits is
  ``"1.00 k..."``).

RKM code (IEC 60062, "Marking codes for resistors and capacitors"): the multiplier
letter stands where the decimal point would be: ``4k7`` = 4.7 kΩ, ``2R2`` = 2.2 Ω,
``R47`` = 0.47 Ω, ``1M0`` = 1 MΩ, ``2n2`` = 2.2 nF, ``4u7`` = 4.7 µF.
"""

from __future__ import annotations

import difflib
import math
import re
import sys
from dataclasses import dataclass, replace

from partpick.errors import UnitError

__all__ = [
    "DIMENSIONS",
    "unit_symbol",
    "parse_quantity",
    "format_quantity",
    "parse_rkm",
    "format_rkm",
    "Amplitude",
    "parse_amplitude",
    "format_amplitude",
]

# --------------------------------------------------------------------------------------
# The one prefix table (BIPM SI Brochure, 9th ed., Table 7): spelling -> power of ten.
# The first spelling of each power is the one printed.
# --------------------------------------------------------------------------------------
_PREFIXES: tuple[tuple[str, int], ...] = (
    ("f", -15),
    ("p", -12),
    ("n", -9),
    ("\u00b5", -6),  # MICRO SIGN (printed)
    ("u", -6),  # ASCII stand-in, also the RKM letter
    ("\u03bc", -6),  # GREEK SMALL LETTER MU
    ("m", -3),
    ("", 0),
    ("k", 3),
    ("M", 6),
    ("G", 9),
    ("T", 12),
)

_PRINTED_PREFIX: dict[int, str] = {}
_ASCII_PREFIX: dict[int, str] = {}
for _spelling, _power in _PREFIXES:
    _PRINTED_PREFIX.setdefault(_power, _spelling)
    if _spelling.isascii():
        _ASCII_PREFIX.setdefault(_power, _spelling)
_POWER_MIN = min(_PRINTED_PREFIX)
_POWER_MAX = max(_PRINTED_PREFIX)

_OHM = "\u03a9"  # GREEK CAPITAL LETTER OMEGA (printed)
_OHM_SIGN = "\u2126"  # OHM SIGN
_DEG = "\u00b0"  # DEGREE SIGN
_ELECTRONVOLT_J = 1.602176634e-19  # exact since the 2019 SI redefinition

# Lookalike spellings folded together when suggesting, so a did-you-mean never offers
# two strings that print the same.
_LOOKALIKE = str.maketrans({_OHM_SIGN: _OHM, "\u03bc": "\u00b5"})


@dataclass(frozen=True, slots=True)
class _Unit:
    """How a number written with one unit spelling becomes SI.

    si = decimal(number * 10**exp10) * factor + offset, or 10**(that/20) for dB; the
    offset is added in exact decimal arithmetic, so "-40 degC" is 233.15.
    """

    exp10: int = 0
    factor: float = 1.0
    offset: tuple[int, int] = (0, 0)  # exact decimal: mantissa * 10**exponent
    decibel: bool = False


def _expand(template: str, base: _Unit = _Unit(), *, powers: tuple[int, ...] | None = None,
            per: bool = False) -> dict[str, _Unit]:
    """All prefixed spellings of ``template`` (``{}`` marks where the prefix goes).

    ``per=True``: the prefix is in the denominator (``V/{}s``).
    """
    out: dict[str, _Unit] = {}
    for spelling, power in _PREFIXES:
        if powers is not None and power not in powers:
            continue
        out[template.format(spelling)] = replace(base, exp10=base.exp10 + (-power if per else power))
    return out


def _table(*parts: dict[str, _Unit]) -> dict[str, _Unit]:
    table: dict[str, _Unit] = {}
    for part in parts:
        for spelling, unit in part.items():
            if table.setdefault(spelling, unit) != unit:  # pragma: no cover - table bug
                raise AssertionError(f"unit spelling {spelling!r} defined twice")
    return table


@dataclass(frozen=True, slots=True, eq=False)
class _Dim:
    name: str
    label: str  # "a frequency"
    units: dict[str, _Unit]  # every accepted spelling
    bare: _Unit  # how a bare number is read
    display: str  # unit_symbol(); printed after the (optional) prefix
    display_unit: _Unit  # the unit of the printed number (without prefix)
    prefixed: bool  # printed in engineering notation with an SI prefix
    examples: tuple[str, ...]
    rkm_letters: dict[str, int] | None = None
    rkm_example: str = ""


_BARE_PREFIXES = {spelling: _Unit(exp10=power) for spelling, power in _PREFIXES if spelling}
_CELSIUS = _Unit(offset=(27315, -2))  # 273.15 K
_ELECTRONVOLT = _Unit(factor=_ELECTRONVOLT_J)
_DEGREE = _Unit(factor=math.pi / 180)   # SI Brochure Table 8: 1 deg = pi/180 rad

# RKM letters (IEC 60062): resistance R (unit), K or k, M, G, T; capacitance p, n,
# u/µ/μ, m, F (unit). The prefix letters come from the one prefix table.
_RKM_RESISTANCE: dict[str, int] = {"R": 0, "K": 3} | {
    s: p for s, p in _PREFIXES if s and 3 <= p <= 12
}
_RKM_CAPACITANCE: dict[str, int] = {"F": 0} | {s: p for s, p in _PREFIXES if s and -12 <= p <= -3}

_DIMS: dict[str, _Dim] = {
    d.name: d
    for d in (
        _Dim("resistance", "a resistance",
             _table(_expand("{}" + _OHM), _expand("{}ohm"), _expand("{}" + _OHM_SIGN), _BARE_PREFIXES),
             _Unit(), _OHM, _Unit(), True, (_OHM, "k" + _OHM), _RKM_RESISTANCE, "4k7"),
        _Dim("capacitance", "a capacitance", _table(_expand("{}F"), _BARE_PREFIXES),
             _Unit(), "F", _Unit(), True, ("pF", "nF", "\u00b5F"), _RKM_CAPACITANCE, "2n2"),
        _Dim("frequency", "a frequency", _expand("{}Hz"), _Unit(), "Hz", _Unit(), True,
             ("Hz", "kHz")),
        _Dim("voltage", "a voltage", _expand("{}V"), _Unit(), "V", _Unit(), True, ("V", "mV")),
        _Dim("current", "a current", _expand("{}A"), _Unit(), "A", _Unit(), True, ("mA", "\u00b5A")),
        _Dim("power", "a power", _expand("{}W"), _Unit(), "W", _Unit(), True, ("W", "mW")),
        _Dim("time", "a time", _expand("{}s"), _Unit(), "s", _Unit(), True, ("s", "ms", "\u00b5s")),
        _Dim("temperature", "a temperature",
             {"degC": _CELSIUS, _DEG + "C": _CELSIUS, "K": _Unit()},
             _CELSIUS, "degC", _CELSIUS, False, ("degC", "K")),
        _Dim("fraction", "a fraction", {"%": _Unit(exp10=-2), "ppm": _Unit(exp10=-6)},
             _Unit(), "%", _Unit(exp10=-2), False, ("%", "ppm")),
        _Dim("tempco", "a temperature coefficient",
             {f"{num}/{den}": _Unit(exp10=e)
              for num, e in (("ppm", -6), ("%", -2), ("", 0))
              for den in ("K", "degC", _DEG + "C")},
             _Unit(), "ppm/K", _Unit(exp10=-6), False, ("ppm/K", "%/K")),
        _Dim("voltage_tempco", "a voltage temperature coefficient",
             _table(_expand("{}V/K"), _expand("{}V/degC"), _expand("{}V/" + _DEG + "C")),
             _Unit(), "V/K", _Unit(), True, ("mV/K", "\u00b5V/K")),
        _Dim("slew_rate", "a slew rate",
             _table(_expand("{}V/s"), _expand("V/{}s", powers=(-3, -6, -9), per=True)),
             _Unit(), "V/\u00b5s", _Unit(exp10=6), False, ("V/\u00b5s", "V/s")),
        _Dim("gain", "a gain", {"dB": _Unit(decibel=True), "V/V": _Unit()},
             _Unit(), "V/V", _Unit(), False, ("dB", "V/V")),
        _Dim("thermal_resistance", "a thermal resistance",
             {"K/W": _Unit(), "degC/W": _Unit(), _DEG + "C/W": _Unit()},
             _Unit(), "K/W", _Unit(), False, ("K/W",)),
        _Dim("energy", "an energy", _table(_expand("{}eV", _ELECTRONVOLT), _expand("{}J")),
             _Unit(), "eV", _ELECTRONVOLT, True, ("eV", "J")),
        # BETA of the SPICE JFET model (drain current = BETA (V_GS - VTO)^2 in saturation)
        _Dim("transconductance_parameter", "a transconductance parameter",
             _table(_expand("{}A/V2"), _expand("{}A/V^2"), _expand("{}A/V\u00b2")),
             _Unit(), "A/V\u00b2", _Unit(), True, ("mA/V2", "mA/V\u00b2")),
        _Dim("angle", "an angle", {"deg": _DEGREE, _DEG: _DEGREE, "rad": _Unit(), "mrad": _Unit(exp10=-3)},
             _Unit(), "deg", _DEGREE, False, ("deg", "rad")),
    )
}

DIMENSIONS: tuple[str, ...] = tuple(_DIMS)

# --------------------------------------------------------------------------------------
# Amplitudes: prefix + "V" + kind.
# --------------------------------------------------------------------------------------
_KINDS: tuple[str, ...] = ("pk", "pp", "rms")
_KIND_SUFFIXES: dict[str, str] = {"pk": "pk", "p": "pk", "pp": "pp", "rms": "rms"}
_AMPLITUDE_UNITS: dict[str, tuple[_Unit, str]] = {
    f"{spelling}V{suffix}": (_Unit(exp10=power), kind)
    for spelling, power in _PREFIXES
    for suffix, kind in _KIND_SUFFIXES.items()
}
_PLAIN_VOLTS: frozenset[str] = frozenset(f"{spelling}V" for spelling, _ in _PREFIXES)
_SAY_WHICH = "say which amplitude: 'Vpk', 'Vpp' or 'Vrms'"

# --------------------------------------------------------------------------------------
# Grammar
# --------------------------------------------------------------------------------------
_NUMBER = (
    r"(?P<sign>[+-]?)"
    r"(?:(?P<int>[0-9]+)(?:\.(?P<frac>[0-9]*))?|\.(?P<frac2>[0-9]+))"
    r"(?:[eE](?P<exp>[+-]?[0-9]+))?"
)
_QUANTITY_RE = re.compile(rf"{_NUMBER}\s*(?P<unit>.*?)", re.DOTALL)
_RKM_RE = re.compile(r"(?P<sign>[+-]?)(?P<int>[0-9]*)(?P<letter>[^\W\d_])(?P<frac>[0-9]*)")

_REL = 1e-12  # round-trip tolerance of digits=None
_MAX_DIGITS = 17  # enough for any float


# --------------------------------------------------------------------------------------
# Helpers
# --------------------------------------------------------------------------------------
def _spec(dim: str) -> _Dim:
    try:
        return _DIMS[dim]
    except (KeyError, TypeError):
        raise ValueError(f"unknown dimension {dim!r}; expected one of {', '.join(DIMENSIONS)}") from None


def _shown(text: object) -> str:
    return f"'{text}'" if isinstance(text, str) else repr(text)


def _cannot(text: object, label: str, detail: str) -> UnitError:
    return UnitError(f"cannot read {_shown(text)} as {label}; {detail}")


def _quote_list(items: list[str] | tuple[str, ...]) -> str:
    quoted = [f"'{i}'" for i in items]
    return quoted[0] if len(quoted) == 1 else ", ".join(quoted[:-1]) + " or " + quoted[-1]


def _expected(spec: _Dim) -> str:
    units = ", ".join(f"'{u}'" for u in spec.examples)
    if spec.rkm_letters:
        return f"expected a number with a unit like {units}, or an RKM code like '{spec.rkm_example}'"
    return f"expected a number with a unit like {units}"


def _decimal(sign: str, int_digits: str, frac_digits: str, exp: int,
             offset: tuple[int, int] = (0, 0)) -> tuple[float, bool]:
    """The float nearest to sign int.frac * 10**exp (+ offset), and whether the digits
    are nonzero."""
    digits = (int_digits + frac_digits) or "0"
    exp -= len(frac_digits)
    nonzero = digits.strip("0") != ""
    if offset[0] and abs(exp - offset[1]) < 400 and len(digits) < 400:  # exact decimal sum
        low = min(exp, offset[1])
        total = int(f"{sign}{digits}") * 10 ** (exp - low) + offset[0] * 10 ** (offset[1] - low)
        return float(f"{total}e{low}"), nonzero
    value = float(f"{sign}{digits}e{exp}")
    if offset[0]:
        value += float(f"{offset[0]}e{offset[1]}")
    return value, nonzero


def _exponent(text: str | None) -> int:
    if not text:
        return 0
    if len(text.lstrip("+-")) > 6:  # far beyond any float; also keeps int() cheap
        return 10**7 if not text.startswith("-") else -(10**7)
    return int(text)


def _to_si(number: re.Match[str], unit: _Unit, text: object, label: str) -> float:
    """Apply ``unit`` to the number matched by ``_NUMBER``; overflow is an error."""
    frac = number["frac"] if number["frac"] is not None else (number["frac2"] or "")
    offset = unit.offset if not unit.decibel and unit.factor == 1.0 else (0, 0)
    value, nonzero = _decimal(number["sign"], number["int"] or "", frac,
                              _exponent(number["exp"]) + unit.exp10, offset)
    # a subnormal float has lost its precision: no physical quantity is written that small
    if nonzero and abs(value) < sys.float_info.min and not offset[0]:
        raise _cannot(text, label, "the value is too small to represent")
    if unit.decibel:
        try:
            value = 10.0 ** (value / 20.0)
        except OverflowError:
            value = math.inf
    else:
        if unit.factor != 1.0:
            value *= unit.factor
            if unit.offset[0]:  # pragma: no cover - no such unit in the tables
                value += float(f"{unit.offset[0]}e{unit.offset[1]}")
    if not math.isfinite(value):
        raise _cannot(text, label, "the value is too large to represent")
    return value


def _from_number(value: object, spec: _Dim) -> float:
    """A number given as int/float is read like its shortest decimal text in the bare
    unit of the dimension (so -40 as a temperature is exactly 233.15 K)."""
    try:
        x = float(value)  # type: ignore[arg-type]
    except OverflowError:
        raise _cannot(value, spec.label, "the value is too large to represent") from None
    if not math.isfinite(x):
        raise _cannot(value, spec.label, "expected a finite number")
    m = _QUANTITY_RE.fullmatch(repr(x))
    assert m is not None and not m["unit"]
    return _to_si(m, spec.bare, value, spec.label)


def _is_number(value: object) -> bool:
    return isinstance(value, (int, float)) and not isinstance(value, bool)


def _fold(spelling: str) -> str:
    return "".join(spelling.split()).translate(_LOOKALIKE).lower()


def _suggest(unit_text: str, spellings: list[str], display: str | None) -> list[str]:
    """Spellings the user may have meant: same letters in another case, a prefix without
    its unit, then the closest spelling (difflib)."""
    key = _fold(unit_text)
    seen: dict[str, str] = {}
    for s in spellings:  # one candidate per printed look; table order puts preferred first
        seen.setdefault(s.translate(_LOOKALIKE), s)
    candidates = list(seen.values())
    hits = [c for c in candidates if _fold(c) == key]
    if hits:
        return hits
    if display is not None:
        prefixes = [s for s, _ in _PREFIXES if s and s == unit_text]
        prefixes = prefixes or [s for s, _ in _PREFIXES if s and s.lower() == unit_text.lower()]
        hits = [p + display for p in dict.fromkeys(prefixes) if p + display in candidates]
        if hits:
            return hits
    by_key: dict[str, list[str]] = {}
    for c in candidates:
        by_key.setdefault(_fold(c), []).append(c)
    close = difflib.get_close_matches(key, list(by_key), n=1, cutoff=0.8)
    return by_key[close[0]] if close else []


def _did_you_mean(text: str, match: re.Match[str], hits: list[str]) -> str:
    start, end = match.span("unit")
    options = [text[:start] + h + text[end:] for h in hits]
    return f"did you mean {_quote_list(options)}?"


def _not_a_number_detail(text: str, spec_expected: str) -> str:
    head = text.split()[0] if text.split() else text
    try:
        if not math.isfinite(float(head)):
            return "expected a finite number"
    except ValueError:
        pass
    return spec_expected


def _other_rkm_dim(text: str, spec: _Dim) -> _Dim | None:
    m = _RKM_RE.fullmatch(text)
    if m is None or not (m["int"] or m["frac"]):
        return None
    for other in _DIMS.values():
        if other is not spec and other.rkm_letters and m["letter"] in other.rkm_letters:
            return other
    return None


# --------------------------------------------------------------------------------------
# Public API
# --------------------------------------------------------------------------------------
def unit_symbol(dim: str) -> str:
    """The unit ``dim`` is displayed in by :func:`format_quantity`.

    A gain is displayed as a bare ratio; its symbol is ``"V/V"``.
    """
    return _spec(dim).display


def parse_quantity(text: str | int | float, dim: str) -> float:
    """Read ``text`` as a quantity of dimension ``dim``; returns an SI float.

    >>> parse_quantity("4.7 kΩ", "resistance")
    4700.0
    >>> parse_quantity("-10 degC", "temperature")
    263.15
    """
    spec = _spec(dim)
    if _is_number(text):
        return _from_number(text, spec)
    if not isinstance(text, str):
        raise _cannot(text, spec.label, _expected(spec))
    s = text.strip()
    if not s:
        raise _cannot(text, spec.label, "the value is empty")
    if spec.rkm_letters is not None:
        m = _RKM_RE.fullmatch(s)
        if m is not None and (m["int"] or m["frac"]) and m["letter"] in spec.rkm_letters:
            return _rkm_value(m, spec, text)
    m = _QUANTITY_RE.fullmatch(s)
    if m is None:
        raise _comma_hint(s, text, spec) or _cannot(text, spec.label, _not_a_number_detail(s, _expected(spec)))
    unit_text = m["unit"]
    if not unit_text:
        return _to_si(m, spec.bare, text, spec.label)
    unit = spec.units.get(unit_text)
    if unit is not None:
        return _to_si(m, unit, text, spec.label)
    hits = _suggest(unit_text, list(spec.units), spec.display if spec.prefixed else None)
    if hits:
        raise _cannot(text, spec.label, _did_you_mean(s, m, hits))
    hint = _comma_hint(s, text, spec)
    if hint is not None:
        raise hint
    other = _other_rkm_dim(s, spec)
    if other is not None:
        raise _cannot(text, spec.label,
                      f"that is an RKM code for {other.label.split(' ', 1)[1]}; {_expected(spec)}")
    raise _cannot(text, spec.label, _expected(spec))


def _comma_hint(s: str, text: object, spec: _Dim) -> UnitError | None:
    """'4,7 kΩ': a decimal comma where the decimal point belongs."""
    if s.count(",") != 1:
        return None
    fixed = s.replace(",", ".")
    try:
        parse_quantity(fixed, spec.name)
    except UnitError:
        return None
    return _cannot(text, spec.label, f"did you mean '{fixed}'? (the decimal mark is '.')")


def _rkm_value(m: re.Match[str], spec: _Dim, text: object) -> float:
    assert spec.rkm_letters is not None
    power = spec.rkm_letters[m["letter"]]
    value, nonzero = _decimal(m["sign"], m["int"], m["frac"], power)
    if not math.isfinite(value) or (nonzero and value == 0.0):  # pragma: no cover - needs ~300 digits
        raise _cannot(text, spec.label, "the value is out of range")
    return value


def parse_rkm(text: str, dim: str) -> float:
    """Read an RKM code (IEC 60062) as a resistance (ohm) or capacitance (F).

    The letter stands where the decimal point is: ``4k7`` = 4700, ``R47`` = 0.47,
    ``2n2`` = 2.2e-9. At least one digit and exactly one letter; resistance letters
    R K k M G T, capacitance letters p n u µ μ m F. An optional leading sign is allowed.
    """
    spec = _spec(dim)
    if spec.rkm_letters is None:
        raise _cannot(text, spec.label, "RKM codes exist only for resistance and capacitance")
    letters = " ".join(spec.rkm_letters)
    detail = (f"expected an RKM code (IEC 60062) like '{spec.rkm_example}': digits with one of "
              f"the letters {letters} where the decimal point goes")
    if not isinstance(text, str):
        raise _cannot(text, spec.label, detail)
    s = text.strip()
    m = _RKM_RE.fullmatch(s)
    if m is None or not (m["int"] or m["frac"]) or m["letter"] not in spec.rkm_letters:
        raise _cannot(text, spec.label, detail)
    return _rkm_value(m, spec, text)


def _check_digits(digits: int | None) -> None:
    if digits is None:
        return
    if isinstance(digits, bool) or not isinstance(digits, int) or not 1 <= digits <= _MAX_DIGITS:
        raise ValueError(f"digits must be None or an int in 1..{_MAX_DIGITS}, got {digits!r}")


def _check_value(value: object, label: str) -> float:
    if not _is_number(value):
        raise UnitError(f"cannot format {value!r} as {label}; expected a number")
    x = float(value)  # type: ignore[arg-type]
    if not math.isfinite(x):
        raise UnitError(f"cannot format {value!r} as {label}; expected a finite number")
    return x


def _sci(v: float, d: int) -> tuple[str, int]:
    """|v| rounded to d significant digits: (the digits, power of ten of the first)."""
    mantissa, _, exp = f"{abs(v):.{d - 1}e}".partition("e")
    return mantissa.replace(".", ""), int(exp)


def _place(digits: str, point: int) -> str:
    """``digits`` with ``point`` of them before the decimal point (padding with zeros)."""
    if point <= 0:
        return "0." + "0" * (-point) + digits
    if point >= len(digits):
        return digits + "0" * (point - len(digits))
    return digits[:point] + "." + digits[point:]


def _engineering(v: float, d: int) -> tuple[str, str]:
    """(signed mantissa, printed prefix) of v at d significant digits; the prefix is
    picked after rounding. Beyond the prefix table the mantissa takes a power of ten
    and no prefix (``2.7e-22 V``, not a femto with six leading zeros)."""
    digits, e = _sci(v, d)
    power = 3 * (e // 3)
    sign = "-" if v < 0 else ""
    if not _POWER_MIN <= power <= _POWER_MAX:
        return _e_form(sign, digits, e), ""
    return sign + _place(digits, e - power + 1), _PRINTED_PREFIX[power]


def _e_form(sign: str, digits: str, e: int) -> str:
    """``1.5e-11`` form of the significant digits ``digits`` times 10**e."""
    return f"{sign}{digits[0]}{'.' + digits[1:] if len(digits) > 1 else ''}e{e:+03d}"


def _plain(v: float, d: int, exact: bool) -> str:
    """v without prefix: plain decimals for 1e-5 <= |v| < 1e6, else ``1.5e-11`` form;
    ``exact`` keeps trailing zeros (exactly d significant digits)."""
    digits, e = _sci(v, d)
    if not exact:
        digits = digits.rstrip("0") or "0"
    sign = "-" if v < 0 else ""
    if -5 <= e < 6:
        return sign + _place(digits, e + 1)
    return _e_form(sign, digits, e)


def _fit(x: float, digits: int | None, render, read) -> str:  # type: ignore[no-untyped-def]
    """render(digits), or with digits=None the shortest render that reads back to x."""
    if digits is not None:
        return render(digits)
    for d in range(1, _MAX_DIGITS + 1):
        s = render(d)
        try:
            back = read(s)
        except UnitError:  # pragma: no cover - defensive
            continue
        if math.isclose(back, x, rel_tol=_REL, abs_tol=0.0):
            return s
    return render(_MAX_DIGITS)


def _display_value(x: float, unit: _Unit) -> float:
    """SI value x expressed in ``unit`` (inverse of _to_si without rounding the text)."""
    v = x - float(f"{unit.offset[0]}e{unit.offset[1]}") if unit.offset[0] else x
    if unit.factor != 1.0:
        v /= unit.factor
    if unit.exp10 > 0:
        v /= 10.0**unit.exp10
    elif unit.exp10 < 0:
        v *= 10.0 ** (-unit.exp10)
    return v


def format_quantity(value: float, dim: str, digits: int | None = None) -> str:
    """Print an SI value of dimension ``dim``: ``"4.7 kΩ"``, ``"10.0 kΩ"`` (digits=3),
    ``"-10 degC"``, ``"0.5 %"``, ``"200 ppm/K"``, ``"10 V/µs"``; a gain is a bare ratio
    (``"1e+05"``). Micro is printed as ``µ`` (U+00B5)."""
    spec = _spec(dim)
    _check_digits(digits)
    x = _check_value(value, spec.label)
    v = _display_value(x, spec.display_unit)
    suffix = f" {spec.display}" if dim != "gain" else ""  # a gain prints as a bare ratio
    if v == 0.0:
        return "0" + suffix
    if spec.prefixed:

        def render(d: int) -> str:
            mantissa, prefix = _engineering(v, d)
            return f"{mantissa} {prefix}{spec.display}"

    else:

        def render(d: int) -> str:
            return _plain(v, d, digits is not None) + suffix

    return _fit(x, digits, render, lambda s: parse_quantity(s, dim))


def format_rkm(value: float, dim: str, digits: int | None = None) -> str:
    """Print a resistance or capacitance as an RKM code (IEC 60062): ``"4k7"``, ``"R47"``,
    ``"1M0"``, ``"2n2"``, ``"4u7"`` (ASCII ``u``). At least two digits are printed
    (1000 ohm -> ``"1k0"``)."""
    spec = _spec(dim)
    _check_digits(digits)
    if spec.rkm_letters is None:
        raise UnitError(f"cannot format {value!r} as {spec.label}; RKM codes exist only for "
                        "resistance and capacitance")
    x = _check_value(value, spec.label)
    unit_letter = "R" if dim == "resistance" else "F"
    letters = {p: _ASCII_PREFIX[p] for p in set(spec.rkm_letters.values()) if p != 0} | {0: unit_letter}
    lo, hi = min(letters), max(letters)
    if x == 0.0:
        return f"0{unit_letter}0"

    def render(d: int) -> str:
        digs, e = _sci(x, d)
        power = min(max(3 * (e // 3), lo), hi)
        point = e - power + 1
        if point <= 0:
            whole, frac = "", "0" * (-point) + digs
        elif point >= len(digs):
            whole, frac = digs + "0" * (point - len(digs)), ""
        else:
            whole, frac = digs[:point], digs[point:]
        if len(whole) + len(frac) < 2:
            frac += "0"
        return ("-" if x < 0 else "") + whole + letters[power] + frac

    return _fit(x, digits, render, lambda s: parse_rkm(s, dim))


# --------------------------------------------------------------------------------------
# Amplitudes
# --------------------------------------------------------------------------------------
@dataclass(frozen=True, slots=True)
class Amplitude:
    """A sine amplitude in volts of one kind: ``"pk"``, ``"pp"`` or ``"rms"``."""

    value_v: float
    kind: str

    def __post_init__(self) -> None:
        if self.kind not in _KINDS:
            raise UnitError(f"unknown amplitude kind {self.kind!r}; expected 'pk', 'pp' or 'rms'")
        if not _is_number(self.value_v) or not math.isfinite(self.value_v):
            raise UnitError(f"an amplitude needs a finite number of volts, got {self.value_v!r}")
        object.__setattr__(self, "value_v", float(self.value_v))

    @property
    def peak_v(self) -> float:
        """Peak voltage (half the peak-to-peak swing)."""
        if self.kind == "pk":
            return self.value_v
        if self.kind == "pp":
            return self.value_v / 2.0
        return self.value_v * math.sqrt(2.0)

    @property
    def pp_v(self) -> float:
        """Peak-to-peak voltage (2 x peak)."""
        return self.value_v if self.kind == "pp" else 2.0 * self.peak_v

    @property
    def rms_v(self) -> float:
        """RMS voltage of the sine (peak / sqrt 2)."""
        return self.value_v if self.kind == "rms" else self.peak_v / math.sqrt(2.0)

    def as_kind(self, kind: str) -> "Amplitude":
        """The same amplitude expressed as ``kind``."""
        if kind not in _KINDS:
            raise UnitError(f"unknown amplitude kind {kind!r}; expected 'pk', 'pp' or 'rms'")
        value = {"pk": self.peak_v, "pp": self.pp_v, "rms": self.rms_v}[kind]
        return Amplitude(value, kind)


_AMPLITUDE_LABEL = "an amplitude"


def parse_amplitude(text: str) -> Amplitude:
    """Read ``"3.0 Vrms"``, ``"3 Vpk"``, ``"2 Vp"`` (peak), ``"8.5 Vpp"``, ``"300 mVrms"``.

    The kind is required: ``"3 V"`` or a bare number is a :class:`UnitError`.
    """
    if isinstance(text, Amplitude):
        return text
    if _is_number(text):
        raise _cannot(text, _AMPLITUDE_LABEL, _SAY_WHICH)
    expected = "expected a number with a unit like 'Vpk', 'Vpp' or 'Vrms'"
    if not isinstance(text, str):
        raise _cannot(text, _AMPLITUDE_LABEL, expected)
    s = text.strip()
    if not s:
        raise _cannot(text, _AMPLITUDE_LABEL, "the value is empty")
    m = _QUANTITY_RE.fullmatch(s)
    if m is None:
        raise _cannot(text, _AMPLITUDE_LABEL, _not_a_number_detail(s, expected))
    unit_text = m["unit"]
    if not unit_text or unit_text in _PLAIN_VOLTS:
        raise _cannot(text, _AMPLITUDE_LABEL, _SAY_WHICH)
    found = _AMPLITUDE_UNITS.get(unit_text)
    if found is None:
        hits = _suggest(unit_text, list(_AMPLITUDE_UNITS), None)
        if hits:
            raise _cannot(text, _AMPLITUDE_LABEL, _did_you_mean(s, m, hits))
        raise _cannot(text, _AMPLITUDE_LABEL, expected)
    unit, kind = found
    return Amplitude(_to_si(m, unit, text, _AMPLITUDE_LABEL), kind)


def format_amplitude(a: Amplitude, digits: int | None = None) -> str:
    """Print an amplitude with its kind: ``"3 Vrms"``, ``"300 mVrms"``, ``"8.49 Vpp"``."""
    _check_digits(digits)
    if not isinstance(a, Amplitude):
        raise UnitError(f"cannot format {a!r} as an amplitude; expected an Amplitude")
    v = a.value_v
    if v == 0.0:
        return f"0 V{a.kind}"

    def render(d: int) -> str:
        mantissa, prefix = _engineering(v, d)
        return f"{mantissa} {prefix}V{a.kind}"

    return _fit(v, digits, render, lambda s: parse_amplitude(s).value_v)
