"""Part families: resistors, capacitors, op-amps, limiter elements and the parts of the
JFET amplitude control (JFETs, detector diodes, voltage references:
:mod:`partpick.actives`).

A catalog is a folder of YAML files; each file may hold any of the sections
``resistors``, ``capacitors``, ``opamps``, ``limiters``, ``jfets``, ``diodes`` and
``references`` (see DEVELOPERS.md for the format), and a ``packages`` section gives
packages' thermal data, which loading hands to the op-amps in them. Loading validates
every field and turns it into SI floats held in frozen records; the rest of partpick
never sees the YAML. Every family may name its maker and maker's part number (optional,
carried to BOM and purchasing files); a ``{value}`` in a part number stands for the
part's value in RKM code. Resistor and capacitor values
come from IEC 60063 series (:mod:`partpick.series`) within each family's range.
"""

from __future__ import annotations

import math
import os
from collections.abc import Iterable
from dataclasses import dataclass, field
from pathlib import Path

from partpick import series
from partpick.actives import Diode, Jfet, Reference
from partpick.errors import CatalogError
from partpick.fileio import os_cause
from partpick.yamlsrc import Fields, read_yaml

__all__ = [
    "KINDS",
    "CORE_KINDS",
    "CapacitorFamily",
    "Catalog",
    "Diode",
    "Jfet",
    "Limiter",
    "OpAmp",
    "Package",
    "Reference",
    "ResistorFamily",
    "default_catalog_dir",
    "load_catalog",
]

KINDS = ("resistors", "capacitors", "opamps", "limiters", "jfets", "diodes", "references")
# kinds every circuit needs; the others only the amplitude controls that use them
CORE_KINDS = ("resistors", "capacitors", "opamps")
DISTRIBUTIONS = ("uniform", "normal")
LIMITER_KINDS = ("diode", "zener-pair", "led")


# Ranges every catalog value must lie in (SI), so the physics never sees a zero, a
# subnormal or an absurd magnitude (facts of the trade, no published source: wide
# enough for any part an oscillator would use).
RESISTANCE_OHM = (0.01, 1e12)
CAPACITANCE_F = (1e-13, 0.1)
TEMPCO_PER_K = (-0.01, 0.01)        # +/-10,000 ppm/K
MIN_TOLERANCE = 1e-6
POWER_W = (1e-4, 1e3)
RATING_V = (0.1, 1e5)
GBW_HZ = (1.0, 10e9)
POLE_HZ = (1e-3, 1e11)
SLEW_V_PER_S = (1e3, 1e12)
SUPPLY_V = (0.5, 1e3)
SIDE_V = (-100.0, 100.0)            # headroom, common-mode distance from a rail
CURRENT_A = (1e-9, 100.0)
SMALL_CURRENT_A = (0.0, 1.0)        # input bias
OUTPUT_OHM = (0.0, 1e6)
THETA_JA_K_PER_W = (0.1, 1e4)       # a heatsinked power package .. the smallest chip-scale one in still air
SATURATION_A = (1e-30, 1.0)
JUNCTION_F = (0.0, 1e-6)
BANDGAP_J = (0.1 * 1.602176634e-19, 10 * 1.602176634e-19)
ZENER_V = (0.1, 1e3)
ZENER_TEMPCO_V_PER_K = (-1.0, 1.0)
BAND_K = (73.15, 573.15)            # -200 degC .. 300 degC
# the JFET control's parts (small-signal n-channel JFETs, shunt references)
VTO_V = (-30.0, -0.05)
BETA_A_PER_V2 = (1e-7, 1.0)
VTO_TEMPCO_V_PER_K = (-0.1, 0.1)
BETA_TEMPCO_PER_K = (-0.1, 0.1)     # BETATCE / 100: +/-10 %/K
REFERENCE_V = (0.1, 100.0)


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
    maker: str = ""
    maker_part: str = ""

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
    maker: str = ""
    maker_part: str = ""

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
class Package:
    """A package's thermal data: junction-to-ambient thermal resistance theta_ja_k_per_w
    (K/W, as the maker measures it on a standard board, JEDEC JESD51) and the maximum
    junction temperature tj_max_k (K)."""

    id: str
    theta_ja_k_per_w: float
    tj_max_k: float
    where: str = field(default="", compare=False)

    def limit_w(self, ambient_k: float) -> float:
        """Dissipation that brings the junction to its maximum at ambient_k (K), W."""
        return max(self.tj_max_k - ambient_k, 0.0) / self.theta_ja_k_per_w


@dataclass(frozen=True, slots=True)
class OpAmp:
    """An op-amp, modelled by a dominant pole (DC gain a0, gain-bandwidth gbw_hz)
    and an optional second pole, with its output and input limits.

    supply_min_v/supply_max_v: total supply across the rails, V; headroom_high_v /
    headroom_low_v: how close the output swings to each rail at light load, V;
    input_cm_low_v / input_cm_high_v: how close the inputs may come to each rail, V
    (negative = beyond the rail); output_current_a: short-circuit limit, A;
    output_resistance_ohm: open-loop output resistance, ohm; slew_v_per_s: V/s;
    gbw_spread_frac: part-to-part GBW spread (3 sigma), fraction; thermal: its
    package's thermal data from the catalog's ``packages`` section (None when it has
    none).
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
    maker: str = ""
    maker_part: str = ""
    thermal: Package | None = None


@dataclass(frozen=True, slots=True)
class Limiter:
    """An amplitude-limiting element: an anti-parallel pair of diodes or LEDs, or a
    back-to-back Zener pair.

    Forward junction (Shockley equation, I = Is (exp(V / (n Vt)) - 1)): is_a, A;
    n; rs_ohm, ohm; eg_j bandgap energy, J, and xti (SPICE-style temperature exponent)
    for Is(T). Its charge, as SPICE's diode models it (one junction, at 25 degC):
    cjo_f zero-bias depletion capacitance, F; vj_v junction potential, V; m grading
    coefficient; fc forward-bias depletion coefficient (the depletion capacitance is
    linearised above fc vj_v); tt_s transit time, s (diffusion charge tt_s times the
    junction current). Zener pairs add the breakdown knee:
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
    cjo_f: float
    vj_v: float
    m: float
    fc: float
    tt_s: float
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
    maker: str = ""
    maker_part: str = ""


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
    packages: tuple[Package, ...] = ()
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

    def package(self, name: str) -> Package | None:
        """The thermal data of package ``name``, or None."""
        for p in self.packages:
            if p.id == name:
                return p
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
        if "\0" in str(p):
            raise CatalogError("the path holds a NUL character", source=str(p))
        try:
            is_dir = p.is_dir()
            found = sorted(e.path for e in os.scandir(p) if e.name.endswith((".yaml", ".yml"))) if is_dir else []
            exists = is_dir or os.path.lexists(p)
        except OSError as exc:
            raise CatalogError(f"cannot read catalog folder or file ({os_cause(exc)})", source=str(p)) from None
        if is_dir:
            if not found:
                raise CatalogError("holds no catalog files (*.yaml); expected part families", source=str(p))
            files.extend(Path(f) for f in found)
        elif exists:
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
    packages: dict[str, Package] = {}
    seen: dict[str, str] = {}
    currency: tuple[str, str] | None = None
    sources = []
    demo = False
    from partpick.catalog_read import READERS, read_package, with_thermal

    for path in _catalog_files(paths):
        source = str(path)
        root = Fields(read_yaml(path, CatalogError), source, CatalogError,
                      allowed=("description", "demo", "currency", "packages") + KINDS)
        sources.append(source)
        demo = root.boolean("demo", default=False) or demo
        if root.has("currency"):
            cur = root.text("currency")
            if currency is not None and cur != currency[0]:
                raise root.error("currency", f"must match '{currency[0]}' of {currency[1]} (got '{cur}')")
            currency = (cur, source)
        count = 0
        for rec in root.records("packages", ("id", "theta_ja", "max_junction")):
            pkg = read_package(rec)
            if pkg.id in packages:
                raise rec.error("id", f"duplicates package '{pkg.id}' first defined at {packages[pkg.id].where}")
            packages[pkg.id] = pkg
            count += 1
        for kind, reader in READERS.items():
            for rec in root.records(kind, reader.allowed):
                fam = reader.read(rec)
                if fam.id in seen:
                    raise rec.error("id", f"duplicates family '{fam.id}' first defined at {seen[fam.id]}")
                seen[fam.id] = fam.where
                families[kind].append(fam)
                count += 1
        if count == 0:
            raise CatalogError("contains no part families; expected at least one of the sections "
                               + ", ".join(KINDS), source=source, line=1)
    if not sources or not seen:
        raise CatalogError("the catalog is empty; expected part families", source=", ".join(map(str, paths)))
    return Catalog(resistors=tuple(families["resistors"]), capacitors=tuple(families["capacitors"]),
                   opamps=tuple(with_thermal(op, packages.get(op.package)) for op in families["opamps"]),
                   limiters=tuple(families["limiters"]), currency=currency[0] if currency else "USD",
                   sources=tuple(sources), demo=demo, packages=tuple(packages.values()),
                   jfets=tuple(families["jfets"]), diodes=tuple(families["diodes"]),
                   references=tuple(families["references"]))
