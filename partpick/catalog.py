"""Part families: resistors, capacitors, op-amps, limiter elements and the parts of the
JFET amplitude control (JFETs, detector diodes, voltage references:
:mod:`partpick.actives`).

A catalog is a folder of YAML files; each file may hold any of the sections
``resistors``, ``capacitors``, ``opamps``, ``limiters``, ``jfets``, ``diodes`` and
``references`` (see DEVELOPERS.md for the format). Loading validates every field and turns it into SI floats held in frozen
records; the rest of partpick never sees the YAML. Resistor and capacitor values
come from IEC 60063 series (:mod:`partpick.series`) within each family's range.
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Iterable

from partpick import series
from partpick.actives import ALLOWED as _ACTIVE_FIELDS, READERS as _ACTIVE_READERS, Common, Diode, Jfet, Reference
from partpick.errors import CatalogError, InputError
from partpick.yamlsrc import Fields, read_yaml

__all__ = [
    "KINDS",
    "ResistorFamily",
    "CapacitorFamily",
    "OpAmp",
    "Limiter",
    "Jfet",
    "Diode",
    "Reference",
    "Catalog",
    "load_catalog",
    "default_catalog_dir",
]

KINDS = ("resistors", "capacitors", "opamps", "limiters", "jfets", "diodes", "references")
# kinds every circuit needs; the others only the amplitude controls that use them
CORE_KINDS = ("resistors", "capacitors", "opamps")
DISTRIBUTIONS = ("uniform", "normal")
LIMITER_KINDS = ("diode", "zener-pair", "led")

_PRICE = ("unit", "line")


@dataclass(frozen=True, slots=True)
class ResistorFamily:
    """A resistor family: one technology, one IEC 60063 series, one tolerance.

    tolerance_frac: value tolerance (0.01 = 1 %); distribution: 'uniform', or
    'normal' (truncated normal with the tolerance at 3 sigma); tempco_per_k: 1/K
    (a bound, either sign); min_ohm/max_ohm: value range, ohm; power_w: rating at
    70 degC, W; voltage_v: limiting element voltage, V; prices in the catalog's
    currency per part and per distinct BOM line.
    """

    id: str
    description: str
    technology: str
    series: str
    tolerance_frac: float
    distribution: str
    tempco_per_k: float
    min_ohm: float
    max_ohm: float
    power_w: float
    voltage_v: float
    package: str
    price_unit: float
    price_line: float
    where: str = field(default="", compare=False)

    def values(self) -> tuple[float, ...]:
        """Every value the family offers, ohm, ascending (IEC 60063 decade expansion)."""
        return series.values_in_range(self.series, self.min_ohm, self.max_ohm)

    def unit_price(self, value_ohm: float) -> float:
        """Price of one part; resistor prices do not depend on value."""
        return self.price_unit


@dataclass(frozen=True, slots=True)
class CapacitorFamily:
    """A capacitor family: one dielectric, one IEC 60063 series, one tolerance.

    Temperature behaviour is either a linear coefficient (class 1 ceramics, film):
    tempco_per_k nominal and tempco_spread_per_k around it, 1/K; or a band (class 2
    ceramics, electrolytics): band_frac maximum change over band_min_k..band_max_k,
    K. Prices grow with value: price_at_min at min_f, price_at_max at max_f,
    interpolated on log-log axes.
    """

    id: str
    description: str
    dielectric: str
    series: str
    tolerance_frac: float
    distribution: str
    tempco_per_k: float
    tempco_spread_per_k: float
    band_frac: float
    band_min_k: float
    band_max_k: float
    voltage_v: float
    min_f: float
    max_f: float
    package: str
    price_at_min: float
    price_at_max: float
    price_line: float
    where: str = field(default="", compare=False)

    @property
    def has_band(self) -> bool:
        return self.band_frac > 0

    def values(self) -> tuple[float, ...]:
        """Every value the family offers, F, ascending (IEC 60063 decade expansion)."""
        return series.values_in_range(self.series, self.min_f, self.max_f)

    def unit_price(self, value_f: float) -> float:
        """Price of one part at ``value_f`` (F): log-log interpolation across the range."""
        if self.max_f <= self.min_f or self.price_at_min <= 0 or self.price_at_max <= 0:
            return self.price_at_min
        t = math.log(value_f / self.min_f) / math.log(self.max_f / self.min_f)
        t = min(max(t, 0.0), 1.0)
        return math.exp((1 - t) * math.log(self.price_at_min) + t * math.log(self.price_at_max))


@dataclass(frozen=True, slots=True)
class OpAmp:
    """An op-amp, modelled by a dominant pole (DC gain a0, gain-bandwidth gbw_hz)
    and an optional second pole, with its output and input limits.

    supply_min_v/supply_max_v: total supply across the rails, V; headroom_high_v /
    headroom_low_v: how close the output swings to each rail at light load, V;
    input_cm_low_v / input_cm_high_v: how close the inputs may come to each rail, V
    (negative = beyond the rail); output_current_a: short-circuit limit, A;
    output_resistance_ohm: open-loop output resistance, ohm; slew_v_per_s: V/s;
    gbw_spread_frac: part-to-part GBW spread (3 sigma), fraction.
    """

    id: str
    description: str
    gbw_hz: float
    a0: float
    second_pole_hz: float | None
    slew_v_per_s: float
    supply_min_v: float
    supply_max_v: float
    headroom_high_v: float
    headroom_low_v: float
    output_current_a: float
    output_resistance_ohm: float
    input_cm_low_v: float
    input_cm_high_v: float
    rail_to_rail_in: bool
    rail_to_rail_out: bool
    channels: int
    quiescent_current_a: float
    input_bias_a: float
    gbw_spread_frac: float
    package: str
    price_unit: float
    price_line: float
    where: str = field(default="", compare=False)


@dataclass(frozen=True, slots=True)
class Limiter:
    """An amplitude-limiting element: an anti-parallel pair of diodes or LEDs, or a
    back-to-back Zener pair.

    Forward junction (Shockley equation, I = Is (exp(V / (n Vt)) - 1)): is_a, A;
    n; rs_ohm, ohm; cj_f junction capacitance, F; eg_j bandgap energy, J, and xti
    (SPICE-style temperature exponent) for Is(T). Zener pairs add the breakdown knee:
    vz_v at iz_a, zener resistance rz_ohm, vz_tempco_v_per_k. vf_spread_v is the
    part-to-part spread of forward voltage at a fixed current (3 sigma), V.
    parts: physical parts one limiter needs (2 for a pair of discrete diodes).
    """

    id: str
    description: str
    kind: str
    is_a: float
    n: float
    rs_ohm: float
    cj_f: float
    eg_j: float
    xti: float
    vz_v: float
    iz_a: float
    rz_ohm: float
    vz_tempco_v_per_k: float
    vf_spread_v: float
    parts: int
    package: str
    price_unit: float
    price_line: float
    where: str = field(default="", compare=False)


Family = ResistorFamily | CapacitorFamily | OpAmp | Limiter | Jfet | Diode | Reference


@dataclass(frozen=True, slots=True)
class Catalog:
    """All families known to one run, by kind; ``sources`` are the files read."""

    resistors: tuple[ResistorFamily, ...]
    capacitors: tuple[CapacitorFamily, ...]
    opamps: tuple[OpAmp, ...]
    limiters: tuple[Limiter, ...]
    currency: str
    sources: tuple[str, ...]
    demo: bool
    jfets: tuple[Jfet, ...] = ()
    diodes: tuple[Diode, ...] = ()
    references: tuple[Reference, ...] = ()

    def of_kind(self, kind: str) -> tuple[Family, ...]:
        return getattr(self, kind)

    def ids(self, kind: str) -> tuple[str, ...]:
        return tuple(f.id for f in self.of_kind(kind))

    def find(self, kind: str, family_id: str) -> Family | None:
        """The family ``family_id`` of ``kind``, or None."""
        for fam in self.of_kind(kind):
            if fam.id == family_id:
                return fam
        return None

    def kind_of(self, family_id: str) -> str | None:
        """Which kind holds ``family_id`` (ids are unique across kinds)."""
        for kind in KINDS:
            if self.find(kind, family_id) is not None:
                return kind
        return None

    def all_ids(self) -> tuple[str, ...]:
        return tuple(i for kind in KINDS for i in self.ids(kind))


def default_catalog_dir() -> Path:
    """``$PARTPICK_CATALOGS``, else ``./catalogs``, else the catalogs shipped beside the package."""
    env = os.environ.get("PARTPICK_CATALOGS")
    if env:
        return Path(env)
    here = Path.cwd() / "catalogs"
    if here.is_dir():
        return here
    return Path(__file__).resolve().parent.parent / "catalogs"


def _catalog_files(paths: Iterable[str | Path]) -> list[Path]:
    files: list[Path] = []
    for p in paths:
        p = Path(p)
        if p.is_dir():
            found = sorted(list(p.glob("*.yaml")) + list(p.glob("*.yml")))
            if not found:
                raise CatalogError("holds no catalog files (*.yaml); expected part families", source=str(p))
            files.extend(found)
        elif p.exists():
            files.append(p)
        else:
            raise CatalogError("catalog folder or file not found", source=str(p))
    return files


def load_catalog(paths: str | Path | Iterable[str | Path] | None = None) -> Catalog:
    """Read and validate catalog files (folders are searched for ``*.yaml``).

    Raises :class:`CatalogError` (file, line, field) on any bad entry, a duplicate
    family id, mixed currencies or a catalog with no families at all.
    """
    if paths is None:
        paths = [default_catalog_dir()]
    elif isinstance(paths, (str, Path)):
        paths = [paths]
    families: dict[str, list] = {k: [] for k in KINDS}
    seen: dict[str, str] = {}
    currency: tuple[str, str] | None = None
    sources = []
    demo = False
    for path in _catalog_files(paths):
        source = str(path)
        root = Fields(read_yaml(path, CatalogError), source, CatalogError,
                      allowed=("description", "demo", "currency") + KINDS)
        sources.append(source)
        demo = root.boolean("demo", default=False) or demo
        if root.has("currency"):
            cur = root.text("currency")
            if currency is not None and cur != currency[0]:
                raise root.error("currency", f"must match '{currency[0]}' of {currency[1]} (got '{cur}')")
            currency = (cur, source)
        count = 0
        for kind, reader in _READERS.items():
            for rec in root.records(kind, reader.allowed):
                fam = reader.read(rec)
                fid = fam.id
                if fid in seen:
                    raise rec.error("id", f"duplicates family '{fid}' first defined at {seen[fid]}")
                seen[fid] = fam.where
                families[kind].append(fam)
                count += 1
        if count == 0:
            raise CatalogError(
                "contains no part families; expected at least one of the sections " + ", ".join(KINDS),
                source=source, line=1)
    if not sources or not seen:
        raise CatalogError("the catalog is empty; expected part families", source=", ".join(map(str, paths)))
    return Catalog(
        resistors=tuple(families["resistors"]),
        capacitors=tuple(families["capacitors"]),
        opamps=tuple(families["opamps"]),
        limiters=tuple(families["limiters"]),
        currency=currency[0] if currency else "USD",
        sources=tuple(sources),
        demo=demo,
        jfets=tuple(families["jfets"]),
        diodes=tuple(families["diodes"]),
        references=tuple(families["references"]),
    )


# -- readers, one per kind ---------------------------------------------------------------

def _id(rec: Fields) -> str:
    fid = rec.text("id")
    if not all(c.isalnum() or c in "-_." for c in fid):
        raise rec.error("id", f"must use letters, digits, '-', '_' or '.' only (got '{fid}')")
    return fid


def _where(rec: Fields) -> str:
    return f"{rec.source}:{rec.node.line}"


def _tolerance(rec: Fields, key: str = "tolerance") -> float:
    tol = rec.quantity(key, "fraction", positive=True)
    if tol >= 0.5:
        raise rec.error(key, f"must be below 50 % (got {tol * 100:g} %)")
    return tol


def _series(rec: Fields) -> str:
    try:
        return series.check_series_name(rec.text("series"))
    except InputError as exc:
        raise rec.error("series", exc.message) from None


def _range(rec: Fields, dim: str, series_name: str) -> tuple[float, float]:
    r = rec.sub("range", ("min", "max"))
    lo = r.quantity("min", dim, positive=True)
    hi = r.quantity("max", dim, positive=True)
    if lo > hi:
        raise r.error("min", f"must not exceed range.max (got {lo:g} > {hi:g})")
    if not series.values_in_range(series_name, lo, hi):
        raise r.error(None, f"holds no {series_name} value")
    return lo, hi


def _price(rec: Fields, allowed=_PRICE) -> Fields:
    return rec.sub("price", allowed)


def _cost(p: Fields, key: str, default: float | None = None) -> float:
    """A price in the catalog's currency, >= 0."""
    return p.number(key, default=default, minimum=0.0)


class _Reader:
    allowed: tuple[str, ...] = ()

    def read(self, rec: Fields):  # pragma: no cover - interface
        raise NotImplementedError


class _Resistors(_Reader):
    allowed = ("id", "description", "technology", "series", "tolerance", "distribution", "tempco",
               "range", "power", "voltage", "package", "price")

    def read(self, rec: Fields) -> ResistorFamily:
        ser = _series(rec)
        lo, hi = _range(rec, "resistance", ser)
        price = _price(rec)
        return ResistorFamily(
            id=_id(rec),
            description=rec.text("description", default=""),
            technology=rec.text("technology"),
            series=ser,
            tolerance_frac=_tolerance(rec),
            distribution=rec.text("distribution", choices=DISTRIBUTIONS, default="uniform"),
            tempco_per_k=rec.quantity("tempco", "tempco", nonnegative=True),
            min_ohm=lo,
            max_ohm=hi,
            power_w=rec.quantity("power", "power", positive=True),
            voltage_v=rec.quantity("voltage", "voltage", positive=True, default=math.inf),
            package=rec.text("package", default=""),
            price_unit=_cost(price, "unit"),
            price_line=_cost(price, "line", default=0.0),
            where=_where(rec),
        )


class _Capacitors(_Reader):
    allowed = ("id", "description", "dielectric", "series", "tolerance", "distribution", "tempco",
               "temperature_band", "range", "voltage", "package", "price")

    def read(self, rec: Fields) -> CapacitorFamily:
        ser = _series(rec)
        lo, hi = _range(rec, "capacitance", ser)
        price = _price(rec, ("at_min", "at_max", "line"))
        at_min = _cost(price, "at_min")
        at_max = _cost(price, "at_max", default=at_min)
        if at_max < at_min:
            raise price.error("at_max", f"must be >= price.at_min (got {at_max:g} < {at_min:g})")
        tempco = tempco_spread = 0.0
        band = band_lo = band_hi = 0.0
        if rec.has("tempco") == rec.has("temperature_band"):
            raise rec.error(None, "needs exactly one of 'tempco' (class 1, film) or 'temperature_band' "
                                  "(class 2, electrolytic)")
        if rec.has("tempco"):
            tc = rec.sub("tempco", ("nominal", "spread"))
            tempco = tc.quantity("nominal", "tempco")
            tempco_spread = tc.quantity("spread", "tempco", nonnegative=True, default=0.0)
        else:
            tb = rec.sub("temperature_band", ("change", "min", "max"))
            band = tb.quantity("change", "fraction", positive=True)
            band_lo = tb.quantity("min", "temperature")
            band_hi = tb.quantity("max", "temperature")
            if band_lo >= band_hi:
                raise tb.error("min", "must be below temperature_band.max")
        return CapacitorFamily(
            id=_id(rec),
            description=rec.text("description", default=""),
            dielectric=rec.text("dielectric"),
            series=ser,
            tolerance_frac=_tolerance(rec),
            distribution=rec.text("distribution", choices=DISTRIBUTIONS, default="uniform"),
            tempco_per_k=tempco,
            tempco_spread_per_k=tempco_spread,
            band_frac=band,
            band_min_k=band_lo,
            band_max_k=band_hi,
            voltage_v=rec.quantity("voltage", "voltage", positive=True),
            min_f=lo,
            max_f=hi,
            package=rec.text("package", default=""),
            price_at_min=at_min,
            price_at_max=at_max,
            price_line=_cost(price, "line", default=0.0),
            where=_where(rec),
        )


class _OpAmps(_Reader):
    allowed = ("id", "description", "gbw", "dc_gain", "second_pole", "slew_rate", "supply", "headroom",
               "output_current", "output_resistance", "input_common_mode", "rail_to_rail", "channels",
               "quiescent_current", "input_bias_current", "gbw_spread", "package", "price")

    def read(self, rec: Fields) -> OpAmp:
        sup = rec.sub("supply", ("min", "max"))
        smin = sup.quantity("min", "voltage", positive=True)
        smax = sup.quantity("max", "voltage", positive=True)
        if smin >= smax:
            raise sup.error("min", f"must be below supply.max (got {smin:g} V >= {smax:g} V)")
        head = rec.sub("headroom", ("high", "low"))
        cm = rec.sub("input_common_mode", ("low", "high"))
        rr = rec.sub("rail_to_rail", ("input", "output"), required=False)
        gbw = rec.quantity("gbw", "frequency", positive=True)
        a0 = rec.quantity("dc_gain", "gain", positive=True)
        if a0 <= 1:
            raise rec.error("dc_gain", "must exceed 1 V/V (0 dB)")
        pole2 = rec.quantity("second_pole", "frequency", positive=True, required=False)
        if pole2 is not None and pole2 <= gbw / a0:
            raise rec.error("second_pole", "must lie above the dominant pole gbw / dc_gain")
        price = _price(rec)
        op = OpAmp(
            id=_id(rec),
            description=rec.text("description", default=""),
            gbw_hz=gbw,
            a0=a0,
            second_pole_hz=pole2,
            slew_v_per_s=rec.quantity("slew_rate", "slew_rate", positive=True),
            supply_min_v=smin,
            supply_max_v=smax,
            headroom_high_v=head.quantity("high", "voltage", nonnegative=True),
            headroom_low_v=head.quantity("low", "voltage", nonnegative=True),
            output_current_a=rec.quantity("output_current", "current", positive=True),
            output_resistance_ohm=rec.quantity("output_resistance", "resistance", nonnegative=True),
            input_cm_low_v=cm.quantity("low", "voltage"),
            input_cm_high_v=cm.quantity("high", "voltage"),
            rail_to_rail_in=rr.boolean("input", default=False) if rr else False,
            rail_to_rail_out=rr.boolean("output", default=False) if rr else False,
            channels=rec.integer("channels", default=1, minimum=1, maximum=8),
            quiescent_current_a=rec.quantity("quiescent_current", "current", positive=True),
            input_bias_a=rec.quantity("input_bias_current", "current", nonnegative=True),
            gbw_spread_frac=rec.quantity("gbw_spread", "fraction", nonnegative=True, default=0.3),
            package=rec.text("package", default=""),
            price_unit=_cost(price, "unit"),
            price_line=_cost(price, "line", default=0.0),
            where=_where(rec),
        )
        if op.headroom_high_v + op.headroom_low_v >= smin:
            raise head.error(None, "leaves no output swing at the minimum supply")
        return op


class _Limiters(_Reader):
    allowed = ("id", "description", "kind", "saturation_current", "emission", "series_resistance",
               "capacitance", "bandgap", "xti", "zener_voltage", "zener_current", "zener_resistance",
               "zener_tempco", "forward_voltage_spread", "parts", "package", "price")

    def read(self, rec: Fields) -> Limiter:
        kind = rec.text("kind", choices=LIMITER_KINDS)
        n = rec.number("emission", minimum=0.5, maximum=10.0)
        zener = kind == "zener-pair"
        if not zener:
            for key in ("zener_voltage", "zener_current", "zener_resistance", "zener_tempco"):
                if rec.has(key):
                    raise rec.error(key, f"applies to kind zener-pair only (this is kind {kind})")
        price = _price(rec)
        return Limiter(
            id=_id(rec),
            description=rec.text("description", default=""),
            kind=kind,
            is_a=rec.quantity("saturation_current", "current", positive=True),
            n=n,
            rs_ohm=rec.quantity("series_resistance", "resistance", nonnegative=True, default=0.0),
            cj_f=rec.quantity("capacitance", "capacitance", nonnegative=True, default=0.0),
            eg_j=rec.quantity("bandgap", "energy", positive=True, default=1.11 * 1.602176634e-19),
            xti=rec.number("xti", default=3.0, minimum=0.0, maximum=10.0),
            vz_v=rec.quantity("zener_voltage", "voltage", positive=True) if zener else 0.0,
            iz_a=rec.quantity("zener_current", "current", positive=True) if zener else 0.0,
            rz_ohm=rec.quantity("zener_resistance", "resistance", nonnegative=True) if zener else 0.0,
            vz_tempco_v_per_k=rec.quantity("zener_tempco", "voltage_tempco") if zener else 0.0,
            vf_spread_v=rec.quantity("forward_voltage_spread", "voltage", nonnegative=True, default=0.0),
            parts=rec.integer("parts", default=2, minimum=1, maximum=4),
            package=rec.text("package", default=""),
            price_unit=_cost(price, "unit"),
            price_line=_cost(price, "line", default=0.0),
            where=_where(rec),
        )


class _Active(_Reader):
    """A kind of :mod:`partpick.actives`: the shared fields here, its own there."""

    def __init__(self, kind: str) -> None:
        self.allowed = ("id", "description", "package", "price") + _ACTIVE_FIELDS[kind]
        self.reader = _ACTIVE_READERS[kind]

    def read(self, rec: Fields):
        price = _price(rec)
        common = Common(_id(rec), rec.text("description", default=""), rec.text("package", default=""),
                        _cost(price, "unit"), _cost(price, "line", default=0.0), _where(rec))
        return self.reader(rec, common)


_READERS: dict[str, _Reader] = {
    "resistors": _Resistors(),
    "capacitors": _Capacitors(),
    "opamps": _OpAmps(),
    "limiters": _Limiters(),
    **{kind: _Active(kind) for kind in _ACTIVE_READERS},
}
