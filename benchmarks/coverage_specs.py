"""A seeded generator of the requirements practitioners bring to a sine oscillator,
written as spec YAML text (the format of README "Spec reference").

Two kinds, mixed so the set is not all corner cases:

- ``ordinary``: jobs people ask for every week: a 1 kHz, 1 Vrms tone into 600 ohm
  from +/-15 V, audio-range test tones, LVDT-like 2..10 kHz drives, bridge excitation,
  slow calibration signals (common practice, no published source);
- ``spread``: every field drawn over the range the coverage benchmark asks for:
  frequency 1 Hz..200 kHz (log-uniform), amplitude 20 mVrms..10 Vrms (log-uniform,
  written in Vrms, Vpk or Vpp), load 16 ohm..1 Mohm (log-uniform, E12), some with
  100 pF..10 nF across it, some open; single 3.3/5/12/24 V or dual +/-5..+/-18 V
  supplies with a 5 or 10 % range; frequency tolerance 0.2..5 %, amplitude tolerance
  2..20 %, THD 0.3..10 %, 0..50 or -40..85 degC, yield 90..99.9 %; all parts or a
  subset of the catalog's families.

Most spread requirements ask for an amplitude the supply can give (as a practitioner
would); about one in seven is drawn without that care, so that refusals are exercised
too. Everything is a pure function of the seed and the catalog's family ids.

Run: python benchmarks/coverage_specs.py [--count N] [--seed S] [--show I]
"""

from __future__ import annotations

import argparse
import importlib.util
import math
import os
import random
import sys
from dataclasses import dataclass
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
if importlib.util.find_spec("partpick") is None:   # not installed: the checkout's own
    sys.path.insert(0, str(ROOT))

__all__ = ["Requirement", "generate", "ordinary", "catalog_families", "DEFAULT_COUNT", "DEFAULT_SEED",
           "ORDINARY_COUNT", "ORDINARY_SEED", "clean", "CLEAN_COUNT", "CLEAN_SEED"]

DEFAULT_COUNT = 220
DEFAULT_SEED = 1
ORDINARY_COUNT = 64
ORDINARY_SEED = 11

# Round figures people write in a requirement (common practice, no published source).
FREQ_TOLS = (0.2, 0.5, 1, 2, 3, 5)              # %
AMP_TOLS = (2, 5, 10, 15, 20)                   # %
THDS = (0.3, 0.5, 1, 2, 3, 5, 10)               # %
YIELDS = (90, 95, 98, 99, 99.5, 99.9)           # %
SINGLE_RAILS = (3.3, 5.0, 12.0, 24.0)           # V
DUAL_RAILS = (5.0, 6.0, 9.0, 12.0, 15.0, 18.0)  # V per rail
TEMPS = ((0, 50), (-40, 85))                    # degC
E6 = (1.0, 1.5, 2.2, 3.3, 4.7, 6.8)
E12 = (1.0, 1.2, 1.5, 1.8, 2.2, 2.7, 3.3, 3.9, 4.7, 5.6, 6.8, 8.2)
# Capacitor families that may set a frequency; an electrolytic ("alu" in its id) joins
# a subset only as the single-supply bias and coupling part a practitioner would add.
_PREFIXES = ((1e6, "M"), (1e3, "k"), (1.0, ""), (1e-3, "m"), (1e-6, "u"), (1e-9, "n"), (1e-12, "p"))


@dataclass(frozen=True, slots=True)
class Requirement:
    """One generated requirement: its name, its kind ('ordinary' or 'spread'), and the
    spec YAML text."""

    name: str
    kind: str
    text: str


def catalog_families(catalog=None) -> dict[str, tuple]:
    """Per kind, the catalog's family records sorted by id (the shipped demo catalog
    by default)."""
    if catalog is None:
        from partpick.catalog import load_catalog
        catalog = load_catalog(os.environ.get("PARTPICK_CATALOGS", ROOT / "catalogs"))
    return {kind: tuple(sorted(catalog.of_kind(kind), key=lambda f: f.id))
            for kind in ("resistors", "capacitors", "opamps", "limiters")}


# -- text -----------------------------------------------------------------------------------------

def _num(x: float, digits: int = 3) -> str:
    """x with at most ``digits`` significant digits, no trailing zeros."""
    text = f"{x:.{digits}g}"
    if "e" in text:
        text = f"{float(text):f}".rstrip("0").rstrip(".")
    return text


def quantity(x: float, unit: str, digits: int = 3) -> str:
    """'4.7 kohm', '220 mVrms', '1.5 Hz': x (SI) with an SI prefix and ``unit``."""
    for scale, prefix in _PREFIXES:
        if abs(x) >= scale * 0.9995:
            return f"{_num(x / scale, digits)} {prefix}{unit}"
    return f"{_num(x / 1e-12, digits)} p{unit}"


def _round_to(values: tuple[float, ...], x: float) -> float:
    """The value of a decade-repeating series nearest x on a log scale."""
    decade = 10.0 ** math.floor(math.log10(x))
    best = min((v * decade * s for v in values for s in (1, 10)), key=lambda v: abs(math.log(v / x)))
    return float(_num(best, 3))


def _round_sig(x: float, digits: int) -> float:
    return float(f"{x:.{digits}g}")


def _log_uniform(rng: random.Random, lo: float, hi: float) -> float:
    return math.exp(rng.uniform(math.log(lo), math.log(hi)))


def _amplitude_text(rms_v: float, unit: str) -> str:
    factor = {"Vrms": 1.0, "Vpk": math.sqrt(2), "Vpp": 2 * math.sqrt(2)}[unit]
    v = _round_sig(rms_v * factor, 2)
    return quantity(v, unit, 2)


def _supply_text(kind: str, nominal_v: float, range_frac: float) -> str:
    lo, hi = nominal_v * (1 - range_frac), nominal_v * (1 + range_frac)
    return f"{{kind: {kind}, min: {_num(lo, 4)} V, max: {_num(hi, 4)} V}}"


def _load_text(r_ohm: float | None, c_f: float) -> str:
    r = "open" if r_ohm is None else quantity(r_ohm, "ohm")
    return f"{{resistance: {r}" + (f", capacitance: {quantity(c_f, 'F', 2)}" if c_f > 0 else "") + "}"


def _spec_text(name: str, description: str, f_hz: float, f_tol: float, amp: str, a_tol: float, supply: str,
               load: str, temps: tuple[float, float] | None, thd: float, yld: float,
               parts: dict[str, list[str]]) -> str:
    lines = [f"name: {name}", f"description: {description}",
             f"frequency: {{target: {quantity(f_hz, 'Hz')}, tolerance: {_num(f_tol)} %}}",
             f"amplitude: {{target: {amp}, tolerance: {_num(a_tol)} %}}",
             f"supply: {supply}", f"load: {load}"]
    if temps is not None:
        lines.append(f"temperature: {{min: {temps[0]:g} degC, max: {temps[1]:g} degC}}")
    lines += [f"distortion: {{max_thd: {_num(thd)} %}}", f"yield: {{min: {_num(yld)} %}}"]
    chosen = {k: v for k, v in parts.items() if v is not None}
    if chosen:
        lines.append("parts:")
        lines += [f"  {k}: [{', '.join(v)}]" for k, v in chosen.items()]
    return "\n".join(lines) + "\n"


# -- parts -----------------------------------------------------------------------------------------

def _fits_supply(op, kind: str, rail_min: float, rail_max: float) -> bool:
    span_lo = 2 * rail_min if kind == "dual" else rail_min
    span_hi = 2 * rail_max if kind == "dual" else rail_max
    return op.supply_min_v <= span_lo and span_hi <= op.supply_max_v


def _parts(rng: random.Random, fams: dict[str, tuple], kind: str, rail_min: float, rail_max: float,
           f_tol_frac: float, p_all: float) -> dict[str, list[str] | None]:
    """All families (probability p_all), else a subset of one or more kinds: one
    resistor family, one frequency-setting capacitor family (plus an electrolytic for a
    single supply's coupling, usually), op-amps that take the supply (mostly), one or
    two limiters. Most subsets are what a practitioner would pick: passives whose
    tolerance is within twice the frequency tolerance when the catalog has such."""
    out: dict[str, list[str] | None] = {k: None for k in ("resistors", "capacitors", "opamps", "limiters")}
    if rng.random() < p_all:
        return out
    kinds = [k for k in out if rng.random() < 0.5] or [rng.choice(list(out))]
    sensible = rng.random() < 0.8

    def fitting_tolerance(records):
        fit = [f.id for f in records if f.tolerance_frac <= 2 * f_tol_frac]
        return fit if (sensible and fit) else [f.id for f in records]
    for k in kinds:
        ids = [f.id for f in fams[k]]
        if k == "resistors":
            out[k] = [rng.choice(fitting_tolerance(fams[k]))]
        elif k == "capacitors":
            setting = fitting_tolerance([f for f in fams[k] if "alu" not in f.id])
            chosen = [rng.choice(setting)]
            bulk = [i for i in ids if "alu" in i]
            if kind == "single" and bulk and rng.random() < 0.75:
                chosen.append(bulk[0])
            out[k] = chosen
        elif k == "opamps":
            fitting = [f.id for f in fams[k] if _fits_supply(f, kind, rail_min, rail_max)]
            pool = fitting if fitting and sensible else ids
            out[k] = sorted(rng.sample(pool, min(len(pool), rng.choice((1, 2, 3)))))
        else:
            out[k] = sorted(rng.sample(ids, min(len(ids), rng.choice((1, 1, 2)))))
    return out


# -- the two kinds ----------------------------------------------------------------------------------

def _ordinary(rng: random.Random, i: int, fams: dict[str, tuple]) -> Requirement:
    job = rng.choice(("audio-1k-600", "audio-1k-600", "test-tone", "test-tone", "lvdt", "lvdt", "bridge",
                      "slow-cal"))
    temps: tuple[float, float] | None = rng.choice(((0, 50), (15, 35), (0, 50)))
    c_load = 0.0
    if job == "audio-1k-600":
        desc = "1 kHz audio test tone into a 600 ohm line"
        f_hz, amp, r_load = 1e3, _amplitude_text(1.0, "Vrms"), 600.0
        kind, rail, rng_frac = "dual", 15.0, 0.05
        f_tol, a_tol, thd = rng.choice((1, 2)), rng.choice((5, 10)), rng.choice((1, 2, 3))
    elif job == "test-tone":
        desc = "audio-range test tone"
        f_hz = rng.choice((100.0, 400.0, 440.0, 1e3, 2e3, 3.15e3, 10e3))
        amp = _amplitude_text(rng.choice((0.1, 0.25, 0.5, 0.775, 1.0, 2.0)), rng.choice(("Vrms", "Vrms", "Vpp")))
        r_load = rng.choice((600.0, 10e3, 47e3, 100e3))
        kind, rail = rng.choice((("dual", 12.0), ("dual", 15.0), ("single", 5.0), ("single", 12.0)))
        rng_frac = rng.choice((0.05, 0.1))
        if kind == "single" and rail == 5.0:
            amp = _amplitude_text(rng.choice((0.1, 0.25, 0.5, 1.0)), rng.choice(("Vrms", "Vpp")))
        f_tol, a_tol, thd = rng.choice((1, 2, 5)), rng.choice((5, 10)), rng.choice((1, 2, 3, 5))
    elif job == "lvdt":
        desc = "LVDT primary drive"
        f_hz = rng.choice((2e3, 2.5e3, 3e3, 5e3, 10e3))
        amp = _amplitude_text(rng.choice((1.0, 2.0, 3.0, 5.0)), "Vrms")
        r_load = rng.choice((220.0, 330.0, 470.0, 1e3, 2.2e3))
        kind, rail, rng_frac = "dual", rng.choice((12.0, 15.0)), rng.choice((0.05, 0.1))
        f_tol, a_tol, thd = rng.choice((1, 2)), 5, rng.choice((1, 2, 3))
        temps = rng.choice(((0, 50), (-40, 85)))
    elif job == "bridge":
        desc = "AC excitation of a strain-gauge bridge"
        f_hz = rng.choice((1e3, 2.5e3, 5e3))
        amp = _amplitude_text(rng.choice((1.0, 2.5)), rng.choice(("Vrms", "Vpk")))
        r_load = rng.choice((350.0, 1e3))
        kind, rail, rng_frac = "dual", rng.choice((12.0, 15.0)), 0.05
        f_tol, a_tol, thd = 2, rng.choice((5, 10)), rng.choice((2, 3, 5))
    else:
        desc = "slow calibration sine for a sensor or a recorder"
        f_hz = rng.choice((1.0, 2.0, 5.0, 10.0, 20.0, 50.0))
        amp = _amplitude_text(rng.choice((0.1, 0.5, 1.0)), rng.choice(("Vrms", "Vpk")))
        r_load = rng.choice((10e3, 100e3, 1e6))
        kind, rail, rng_frac = "dual", rng.choice((12.0, 15.0)), 0.05
        f_tol, a_tol, thd = rng.choice((2, 5)), rng.choice((5, 10)), rng.choice((2, 3, 5))
        c_load = rng.choice((0.0, 1e-9))
    yld = rng.choice((95, 98, 99))
    parts = _parts(rng, fams, kind, rail * (1 - rng_frac), rail * (1 + rng_frac), f_tol / 100, p_all=0.7)
    name = f"cov-{i:03d}-{job}"
    text = _spec_text(name, desc, f_hz, f_tol, amp, a_tol, _supply_text(kind, rail, rng_frac),
                      _load_text(r_load, c_load), temps, thd, yld, parts)
    return Requirement(name, "ordinary", text)


def _spread(rng: random.Random, i: int, fams: dict[str, tuple]) -> Requirement:
    f_hz = _round_sig(_log_uniform(rng, 1.0, 200e3), rng.choice((2, 2, 3)))
    if rng.random() < 0.5:
        kind, rail = "single", rng.choice(SINGLE_RAILS)
    else:
        kind, rail = "dual", rng.choice(DUAL_RAILS)
    rng_frac = rng.choice((0.05, 0.1))
    rail_min = rail * (1 - rng_frac)
    # what a practitioner expects the supply to give: most of the swing around mid-rail
    cap_pk = 0.8 * (rail_min if kind == "dual" else rail_min / 2) - 0.2
    hi_rms = 10.0 if rng.random() < 0.15 else max(min(10.0, cap_pk / math.sqrt(2)), 0.05)
    rms = _log_uniform(rng, 0.02, hi_rms)
    amp = _amplitude_text(rms, rng.choice(("Vrms", "Vrms", "Vpk", "Vpp")))
    u = rng.random()
    r_load = None if u < 0.12 else _round_to(E12, _log_uniform(rng, 16.0, 1e6))
    c_load = _round_to(E6, _log_uniform(rng, 100e-12, 10e-9)) if rng.random() < 0.25 else 0.0
    temps = rng.choice(TEMPS)
    f_tol = rng.choice(FREQ_TOLS)
    parts = _parts(rng, fams, kind, rail_min, rail * (1 + rng_frac), f_tol / 100, p_all=0.45)
    name = f"cov-{i:03d}-spread"
    desc = "requirement drawn over the coverage ranges"
    text = _spec_text(name, desc, f_hz, f_tol, amp, rng.choice(AMP_TOLS),
                      _supply_text(kind, rail, rng_frac), _load_text(r_load, c_load), temps, rng.choice(THDS),
                      rng.choice(YIELDS), parts)
    return Requirement(name, "spread", text)


def generate(count: int = DEFAULT_COUNT, seed: int = DEFAULT_SEED, catalog=None,
             ordinary_share: float = 0.35) -> list[Requirement]:
    """``count`` requirements from ``seed`` (``random.Random``; the same seed and
    catalog ids always give the same texts), about ``ordinary_share`` of them ordinary
    jobs."""
    fams = catalog_families(catalog)
    rng = random.Random(seed)
    out = []
    for i in range(1, count + 1):
        make = _ordinary if rng.random() < ordinary_share else _spread
        out.append(make(rng, i, fams))
    return out


# Round figures people write for a frequency (common practice, no published source).
ROUND_FREQS = (1.0, 1.2, 1.5, 2.0, 2.5, 3.0, 4.0, 5.0, 6.0, 7.5, 8.0)
ORDINARY_SUPPLIES = (("single", 3.3), ("single", 5.0), ("single", 12.0), ("dual", 5.0), ("dual", 12.0),
                     ("dual", 15.0))
# the rerunnable example of issue 11, at THD 3 % and at 1 %
_EXAMPLE = dict(f_hz=1e3, f_tol=1, rms=1.0, a_tol=10, r_load=600.0, kind="dual", rail=15.0, rng_frac=0.05,
                temps=(15, 35), yld=95)


def _ordinary_text(name: str, f_hz: float, f_tol: float, rms: float, a_tol: float, r_load: float, kind: str,
                   rail: float, rng_frac: float, temps, thd: float, yld: float | None) -> str:
    text = _spec_text(name, "ordinary requirement", f_hz, f_tol, _amplitude_text(rms, "Vrms"), a_tol,
                      _supply_text(kind, rail, rng_frac), _load_text(r_load, 0.0), temps, thd, yld or 99, {})
    # no yield line at all sometimes: the tool's default applies (as a new user writes it)
    return text if yld is not None else text.replace("yield: {min: 99 %}\n", "")


def ordinary(count: int = ORDINARY_COUNT, seed: int = ORDINARY_SEED) -> list[Requirement]:
    """Issue 11's "ordinary requirements, tried as new users would": frequency
    10 Hz..100 kHz (log-uniform, a round figure), 0.1..7 Vrms (log-uniform, capped at
    what the supply gives around mid-rail with a practitioner's headroom: 80 % of the
    half span less 0.2 V, peak), loads 100 ohm..100 kohm (E6), single 3.3/5/12 V or
    dual +/-5/12/15 V with a 5 or 10 % range, THD 1..5 %, frequency tolerance 1..5 %,
    amplitude 5..20 %, 0..50 or 15..35 degC, yield 95 or 99 % or left to the default;
    every demo part allowed. The first two are the issue's rerunnable example (1 kHz,
    1 Vrms into 600 ohm, +/-15 V, THD 3 % and 1 %). A pure function of the seed."""
    out = [Requirement(f"ord-{i:03d}-example-thd{thd}", "ordinary",
                       _ordinary_text(f"ord-{i:03d}-example-thd{thd}", thd=thd, **_EXAMPLE))
           for i, thd in ((1, 3), (2, 1))][:count]
    rng = random.Random(seed)
    for i in range(len(out) + 1, count + 1):
        f_hz = _round_to(ROUND_FREQS, _log_uniform(rng, 10.0, 100e3))
        kind, rail = rng.choice(ORDINARY_SUPPLIES)
        rng_frac = rng.choice((0.05, 0.1))
        half_min = rail * (1 - rng_frac) if kind == "dual" else rail * (1 - rng_frac) / 2
        hi_rms = min(7.0, (0.8 * half_min - 0.2) / math.sqrt(2))
        rms = _round_sig(_log_uniform(rng, 0.1, max(hi_rms, 0.1)), 2)
        r_load = _round_to(E6, _log_uniform(rng, 100.0, 100e3))
        name = f"ord-{i:03d}"
        out.append(Requirement(name, "ordinary", _ordinary_text(
            name, f_hz, rng.choice((1, 2, 5)), rms, rng.choice((5, 10, 20)), r_load, kind, rail, rng_frac,
            rng.choice(((0, 50), (15, 35))), rng.choice((1, 2, 3, 5)), rng.choice((95, 99, None)))))
    return out


CLEAN_COUNT = 12
CLEAN_SEED = 15
CLEAN_THDS = (0.01, 0.02, 0.05, 0.1, 0.3)   # %: what a clean tone is asked at (common practice, no published source)


def clean(count: int = CLEAN_COUNT, seed: int = CLEAN_SEED) -> list[Requirement]:
    """Clean-tone requirements: the ordinary ranges of :func:`ordinary` on a dual
    +/-12 or +/-15 V supply (the JFET control takes its reference from the rail), with
    THD limits of 0.01..0.3 %, frequency 20 Hz..20 kHz, 0.3..3 Vrms, loads 1..100 kohm,
    amplitude tolerance 2..10 %. A pure function of the seed."""
    rng = random.Random(seed)
    out = []
    for i in range(1, count + 1):
        f_hz = _round_to(ROUND_FREQS, _log_uniform(rng, 20.0, 20e3))
        rail = rng.choice((12.0, 15.0))
        rms = _round_sig(_log_uniform(rng, 0.3, 3.0), 2)
        r_load = _round_to(E6, _log_uniform(rng, 1e3, 100e3))
        name = f"clean-{i:03d}"
        out.append(Requirement(name, "clean", _ordinary_text(
            name, f_hz, rng.choice((1, 2)), rms, rng.choice((2, 5, 10)), r_load, "dual", rail,
            rng.choice((0.0, 0.05)), rng.choice(((0, 50), (15, 35))), rng.choice(CLEAN_THDS),
            rng.choice((95, 99)))))
    return out


def main(argv: list[str] | None = None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--count", type=int, default=DEFAULT_COUNT)
    ap.add_argument("--seed", type=int, default=DEFAULT_SEED)
    ap.add_argument("--show", type=int, default=0, help="print the text of requirement I (1-based)")
    args = ap.parse_args(argv)
    reqs = generate(args.count, args.seed)
    if args.show:
        print(reqs[args.show - 1].text, end="")
        return
    kinds = {k: sum(r.kind == k for r in reqs) for k in ("ordinary", "spread")}
    print(f"{len(reqs)} requirements from seed {args.seed}: {kinds['ordinary']} ordinary, {kinds['spread']} spread")
    for r in reqs:
        first = [ln for ln in r.text.splitlines() if ln.startswith(("frequency", "amplitude", "supply", "load"))]
        print(f"{r.name:26s} " + "  ".join(ln.split(": ", 1)[1] for ln in first))


if __name__ == "__main__":
    main()
