"""The requirement: a YAML spec validated into frozen records, SI floats inside.

Fields and defaults are listed in README.md ("Spec reference"). Cross-checks that
need the catalog (unknown family ids) are in :func:`check_parts`. Every refusal is a
:class:`SpecError` naming the file, the line and the dotted field.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import Path

from partpick import units
from partpick.catalog import CORE_KINDS, KINDS, Catalog
from partpick.derating import RULES, Derating, read_derating
from partpick.errors import SpecError
from partpick.yamlsrc import Fields, Mapping, did_you_mean, parse_yaml, read_text

__all__ = [
    "DEFAULT_TOPOLOGY", "SUPPLY_KINDS", "RANK_KEYS", "OUTPUT_STAGES", "STOCK_MODES", "AMPLITUDE_CONTROLS",
    "MIN_THD",
    "FrequencyReq", "AmplitudeReq", "SupplyReq", "LoadReq", "TemperatureReq", "PartsChoice",
    "QuadratureReq", "StockRef", "Spec", "check_parts", "AUTO_TOPOLOGY",
]

DEFAULT_TOPOLOGY = "wien-bridge"   # the name only: the circuit registry validates it (circuits.check_spec)
AUTO_TOPOLOGY = "auto"             # every topology that can meet the spec, ranked together
SUPPLY_KINDS = ("dual", "single")
RANK_KEYS = ("yield", "frequency_error", "amplitude_error", "thd", "startup_margin", "cost", "parts")
OUTPUT_STAGES = ("auto", "none", "follower", "gain", "attenuator", "buffered-attenuator")
STOCK_MODES = ("prefer", "only")
DEFAULT_RANK = ("yield", "frequency_error", "cost")
# auto: the search picks the control; the words name the registry's controls
AMPLITUDE_CONTROLS = ("auto", "diode", "jfet-agc")
# the parts each choice of control needs families of
_CONTROL_KINDS = {"auto": (), "diode": ("limiters",), "jfet-agc": ("jfets", "diodes")}
MIN_THD = 5e-5    # the lowest THD limit partpick verifies (0.005 %): its harmonic models hold to about there
_OPEN_WORDS = ("open", "none")

# What partpick designs, as ranges every spec value must lie in (SI), so the physics never
# sees a zero, a subnormal or an absurd magnitude. Wide on purpose: the search says what
# binds inside them. Facts of the trade, no published source: RC oscillators from a
# fraction of a hertz to some megahertz; op-amp circuits on supplies up to a few hundred
# volts; signal loads of ohms to teraohms and up to microfarads; the temperature range
# over which parts are rated and the junction and tempco models hold.
FREQUENCY_HZ = (1e-3, 10e6)
AMPLITUDE_PEAK_V = (1e-3, 1e3)
SUPPLY_V = (0.5, 200.0)
LOAD_OHM = (0.1, 1e12)
LOAD_F = (0.0, 10e-6)
TEMPERATURE_K = (173.15, 473.15)     # -100 degC .. 200 degC
MIN_FRACTION = 1e-6                  # 1 ppm: the smallest tolerance, THD or yield read
SETTLING_S = (1e-6, 1e4)             # settling limits: a microsecond to a few hours

_TOP = ("name", "description", "topology", "frequency", "amplitude", "supply", "load", "load_cosine", "temperature",
        "distortion", "quadrature", "yield", "parts", "stock", "rank_by", "results", "builds", "output_stage",
        "catalogs", "derating", "amplitude_control", "settling")
PHASE_RAD = (1e-6, 0.5)               # a quadrature phase tolerance: 0.2 arc-second .. 28.6 deg


@dataclass(frozen=True, slots=True)
class FrequencyReq:
    """Oscillation frequency target_hz (Hz) within +/- tolerance_frac, held over
    part tolerance, temperature and supply."""

    target_hz: float
    tolerance_frac: float

    @property
    def min_hz(self) -> float:
        return self.target_hz * (1 - self.tolerance_frac)

    @property
    def max_hz(self) -> float:
        return self.target_hz * (1 + self.tolerance_frac)


@dataclass(frozen=True, slots=True)
class AmplitudeReq:
    """Sine amplitude at the load (kept in the kind it was written in) within
    +/- tolerance_frac."""

    target: units.Amplitude
    tolerance_frac: float

    @property
    def peak_v(self) -> float:
        """Target peak voltage at the load, V."""
        return self.target.peak_v


@dataclass(frozen=True, slots=True)
class SupplyReq:
    """Supply range. dual: each rail is +/-min_v .. +/-max_v (V, magnitude);
    single: one rail of min_v .. max_v (V) against ground."""

    kind: str
    min_v: float
    max_v: float

    @property
    def span_min_v(self) -> float:
        """Total voltage across the op-amp's rails at the minimum supply, V."""
        return 2 * self.min_v if self.kind == "dual" else self.min_v

    @property
    def span_max_v(self) -> float:
        """Total voltage across the op-amp's rails at the maximum supply, V."""
        return 2 * self.max_v if self.kind == "dual" else self.max_v


@dataclass(frozen=True, slots=True)
class LoadReq:
    """The load at the output: resistance_ohm (ohm; inf = open) in parallel with
    capacitance_f (F)."""

    resistance_ohm: float
    capacitance_f: float

    def admittance_s(self, f_hz: float) -> complex:
        """The load's admittance at f_hz (Hz), S: 1/R + j 2 pi f C (complex: its magnitude
        sets the current the load takes, its phase the power)."""
        return complex(0.0 if math.isinf(self.resistance_ohm) else 1 / self.resistance_ohm,
                       2 * math.pi * f_hz * self.capacitance_f)


@dataclass(frozen=True, slots=True)
class QuadratureReq:
    """Two outputs 90 degrees apart (a quadrature oscillator's sine and cosine): the
    phase difference within 90 deg +/- phase_error_rad (rad) and the amplitude of the
    second output's fundamental within +/- amplitude_match_frac of the first's."""

    phase_error_rad: float
    amplitude_match_frac: float


@dataclass(frozen=True, slots=True)
class TemperatureReq:
    """Ambient temperature range min_k..max_k and the nominal point nominal_k (K)."""

    min_k: float
    max_k: float
    nominal_k: float


@dataclass(frozen=True, slots=True)
class PartsChoice:
    """Allowed family ids per kind; ``None`` means every family of that kind."""

    resistors: tuple[str, ...] | None = None
    capacitors: tuple[str, ...] | None = None
    opamps: tuple[str, ...] | None = None
    limiters: tuple[str, ...] | None = None
    jfets: tuple[str, ...] | None = None
    diodes: tuple[str, ...] | None = None
    references: tuple[str, ...] | None = None

    def of_kind(self, kind: str) -> tuple[str, ...] | None:
        return getattr(self, kind)


@dataclass(frozen=True, slots=True)
class StockRef:
    """A stock list to use: path (resolved against the spec's folder) and mode
    'prefer' (stocked parts cost less) or 'only' (stocked parts only)."""

    path: Path
    mode: str


@dataclass(frozen=True, slots=True)
class Spec:
    """One requirement for one oscillator. Build with :meth:`from_yaml`.

    max_thd_frac: total harmonic distortion limit (fraction, harmonics 2..9, at every
    load); yield_min_frac: share of builds that must meet every requirement (fraction);
    builds: number of boards built from one BOM (for stock quantities);
    amplitude_control: 'auto' (the search chooses), 'diode' or 'jfet-agc';
    settling_max_s: the longest time from power-on until the amplitude stays within its
    tolerance (s), or None when the spec sets no limit; load_cosine: the load of a
    second output (a quadrature oscillator's cosine; None: none given), which must meet
    the amplitude and THD requirements too; quadrature: the phase and amplitude match
    of the two outputs (None: reported, not required).
    """

    name: str
    description: str
    topology: str
    frequency: FrequencyReq
    amplitude: AmplitudeReq
    supply: SupplyReq
    load: LoadReq
    temperature: TemperatureReq
    max_thd_frac: float
    yield_min_frac: float
    parts: PartsChoice
    stock: StockRef | None
    rank_by: tuple[str, ...]
    results: int
    builds: int
    output_stage: str
    catalogs: tuple[Path, ...]
    derating: Derating = Derating()
    amplitude_control: str = "auto"
    settling_max_s: float | None = None
    load_cosine: LoadReq | None = None
    quadrature: QuadratureReq | None = None
    source: str = field(default="<spec>", compare=False)
    where: dict = field(default_factory=dict, compare=False, hash=False, repr=False)

    @classmethod
    def from_yaml(cls, path: str | Path) -> "Spec":
        """Read and validate the spec file at ``path``."""
        return cls.from_text(read_text(path, SpecError), str(path))

    @classmethod
    def from_text(cls, text: str, source: str = "<spec>") -> "Spec":
        """Validate spec text; ``source`` names it in messages and anchors relative paths."""
        root = Fields(parse_yaml(text, source, SpecError), source, SpecError, allowed=_TOP)
        return _read(root, source)

    def line_of(self, field_path: str) -> int | None:
        """The line a field was written on (for messages), if known."""
        return self.where.get(field_path)

    def normalised(self) -> list[tuple[str, object, str]]:
        """The spec as understood: (field, SI value or word, SI unit) rows."""
        f, a, s, ld, t = self.frequency, self.amplitude, self.supply, self.load, self.temperature
        rows: list[tuple[str, object, str]] = [
            ("name", self.name, ""),
            ("topology", self.topology, ""),
            ("frequency.target", f.target_hz, "Hz"),
            ("frequency.tolerance", f.tolerance_frac, "1"),
            ("amplitude.target", a.peak_v, "V peak"),
            ("amplitude.target.as_written", units.format_amplitude(a.target), ""),
            ("amplitude.tolerance", a.tolerance_frac, "1"),
            ("supply.kind", s.kind, ""),
            ("supply.min", s.min_v, "V" + (" per rail" if s.kind == "dual" else "")),
            ("supply.max", s.max_v, "V" + (" per rail" if s.kind == "dual" else "")),
            ("load.resistance", ld.resistance_ohm, "ohm"),
            ("load.capacitance", ld.capacitance_f, "F"),
        ]
        if self.load_cosine is not None:
            rows += [("load_cosine.resistance", self.load_cosine.resistance_ohm, "ohm"),
                     ("load_cosine.capacitance", self.load_cosine.capacitance_f, "F")]
        rows += [
            ("temperature.min", t.min_k, "K"),
            ("temperature.max", t.max_k, "K"),
            ("temperature.nominal", t.nominal_k, "K"),
            ("distortion.max_thd", self.max_thd_frac, "1"),
            ("amplitude_control", self.amplitude_control, ""),
            ("settling.max", self.settling_max_s if self.settling_max_s is not None else "none", "s"),
        ]
        if self.quadrature is not None:
            rows += [("quadrature.phase_error", self.quadrature.phase_error_rad, "rad"),
                     ("quadrature.amplitude_match", self.quadrature.amplitude_match_frac, "1")]
        rows += [
            ("yield.min", self.yield_min_frac, "1"),
        ]
        for kind in KINDS:
            ids = self.parts.of_kind(kind)
            rows.append((f"parts.{kind}", "all" if ids is None else ", ".join(ids), ""))
        rows += [
            ("stock.file", str(self.stock.path) if self.stock else "none", ""),
            ("stock.mode", self.stock.mode if self.stock else "-", ""),
            ("rank_by", ", ".join(self.rank_by), ""),
            ("results", self.results, ""),
            ("builds", self.builds, ""),
            ("output_stage", self.output_stage, ""),
            ("catalogs", ", ".join(map(str, self.catalogs)) or "default", ""),
        ]
        rows += [(f"derating.{r.key}", self.derating.value(r.key), {"power": "W", "voltage": "V"}.get(r.dim, "1"))
                 for r in RULES]
        return rows


def _record(where: dict, fields: Fields, *keys: str) -> None:
    for key in keys:
        if key in fields.node.items:
            where[fields.path(key)] = fields.line_of(key)


def _fraction(fields: Fields, key: str, *, maximum: float, default: float | None = None,
              inclusive: bool = False) -> float:
    value = fields.quantity(key, "fraction", positive=True, default=default)
    if value < MIN_FRACTION:
        raise fields.error(key, f"must be at least {units.format_quantity(MIN_FRACTION, 'fraction')} "
                                f"(got {units.format_quantity(value, 'fraction')})")
    if value > maximum or (value == maximum and not inclusive):
        bound = "<=" if inclusive else "<"
        raise fields.error(key, f"must be {bound} {maximum * 100:g} % (got {value * 100:g} %)")
    return value


def _load(lo: Fields) -> LoadReq:
    """A load: resistance (or 'open') in parallel with an optional capacitance."""
    if lo.has("resistance") and lo.text("resistance") in _OPEN_WORDS:
        r_load = math.inf
    else:
        r_load = lo.quantity("resistance", "resistance", positive=True, bounds=LOAD_OHM)
    return LoadReq(r_load, lo.quantity("capacitance", "capacitance", nonnegative=True, default=0.0, bounds=LOAD_F))


def _relative_paths(root: Fields, key: str, base: Path) -> tuple[Path, ...]:
    names = root.names(key, all_word="\0")
    if names is None:
        return ()
    return tuple((base / name).resolve() if not Path(name).is_absolute() else Path(name) for name, _ in names)


def _read(root: Fields, source: str) -> Spec:
    where: dict[str, int] = {}
    base = Path(source).resolve().parent if source != "<spec>" else Path.cwd()

    name = root.text("name", default=Path(source).stem if source != "<spec>" else "spec")
    topology = root.text("topology", default=DEFAULT_TOPOLOGY)

    fr = root.sub("frequency", ("target", "tolerance"))
    frequency = FrequencyReq(fr.quantity("target", "frequency", positive=True, bounds=FREQUENCY_HZ),
                             _fraction(fr, "tolerance", maximum=0.5))

    am = root.sub("amplitude", ("target", "tolerance"))
    amplitude = AmplitudeReq(am.amplitude("target"), _fraction(am, "tolerance", maximum=1.0))
    if not AMPLITUDE_PEAK_V[0] <= amplitude.peak_v <= AMPLITUDE_PEAK_V[1]:
        lo, hi = (units.format_quantity(v, "voltage") for v in AMPLITUDE_PEAK_V)
        raise am.error("target", f"must lie within {lo} .. {hi} peak (got {am.node.items['target'][1].text})")

    su = root.sub("supply", ("kind", "min", "max"))
    kind = su.text("kind", choices=SUPPLY_KINDS)
    smin = su.quantity("min", "voltage", positive=True, bounds=SUPPLY_V)
    smax = su.quantity("max", "voltage", positive=True, default=smin, bounds=SUPPLY_V)
    if smin > smax:
        raise su.error("min", f"must not exceed supply.max (got {smin:g} V > {smax:g} V)")
    supply = SupplyReq(kind, smin, smax)

    lo = root.sub("load", ("resistance", "capacitance"))
    load = _load(lo)
    lc = root.sub("load_cosine", ("resistance", "capacitance"), required=False)
    load_cosine = _load(lc) if lc is not None else None

    te = root.sub("temperature", ("min", "max", "nominal"), required=False)
    if te is None:
        temperature = TemperatureReq(298.15, 298.15, 298.15)
    else:
        tmin = te.quantity("min", "temperature", bounds=TEMPERATURE_K)
        tmax = te.quantity("max", "temperature", bounds=TEMPERATURE_K)
        if tmin > tmax:
            raise te.error("min", f"must not exceed temperature.max (got {tmin - 273.15:g} degC > "
                                  f"{tmax - 273.15:g} degC)")
        tnom = te.quantity("nominal", "temperature", default=min(max(298.15, tmin), tmax), bounds=TEMPERATURE_K)
        if not tmin <= tnom <= tmax:
            raise te.error("nominal", "must lie within temperature.min..max")
        temperature = TemperatureReq(tmin, tmax, tnom)

    di = root.sub("distortion", ("max_thd",), required=False)
    max_thd = _fraction(di, "max_thd", maximum=1.0) if di is not None else 0.05
    if max_thd < MIN_THD * (1 - 1e-9):
        raise di.error("max_thd", f"must be >= {MIN_THD * 100:g} %, the lowest THD partpick verifies "
                                  f"(got {max_thd * 100:g} %)")

    se = root.sub("settling", ("max",), required=False)
    settling = se.quantity("max", "time", positive=True, bounds=SETTLING_S) if se is not None else None

    qu = root.sub("quadrature", ("phase_error", "amplitude_match"), required=False)
    quadrature = None
    if qu is not None:
        quadrature = QuadratureReq(qu.quantity("phase_error", "angle", positive=True, bounds=PHASE_RAD),
                                   _fraction(qu, "amplitude_match", maximum=0.5))

    yi = root.sub("yield", ("min",), required=False)
    yield_min = _fraction(yi, "min", maximum=1.0, inclusive=True) if yi is not None else 0.99

    pa = root.sub("parts", KINDS, required=False)
    chosen: dict[str, tuple[str, ...] | None] = {}
    for k in KINDS:
        names = pa.names(k) if pa is not None else None
        chosen[k] = None if names is None else tuple(n for n, _ in names)
        if names is not None:
            for i, (n, line) in enumerate(names):
                where[f"parts.{k}[{i}]"] = line
    parts = PartsChoice(**chosen)

    stock = None
    if root.has("stock"):
        node = root.node.items["stock"][1]
        if isinstance(node, Mapping):
            st = root.sub("stock", ("file", "mode"))
            path, mode = st.text("file"), st.text("mode", choices=STOCK_MODES, default="prefer")
        else:
            path, mode = root.text("stock"), "prefer"
        stock = StockRef((base / path).resolve(), mode)

    rank = DEFAULT_RANK
    rank_names = root.names("rank_by", all_word="\0")
    if rank_names is not None:
        seen: list[str] = []
        for key, line in rank_names:
            if key not in RANK_KEYS:
                raise root.error("rank_by", f"must list names from {', '.join(RANK_KEYS)} (got '{key}')"
                                 + did_you_mean(key, RANK_KEYS), line=line)
            if key in seen:
                raise root.error("rank_by", f"lists '{key}' twice", line=line)
            seen.append(key)
        rank = tuple(seen)

    spec = Spec(
        name=name,
        description=root.text("description", default="", multiline=True),
        topology=topology,
        frequency=frequency,
        amplitude=amplitude,
        supply=supply,
        load=load,
        temperature=temperature,
        max_thd_frac=max_thd,
        yield_min_frac=yield_min,
        parts=parts,
        stock=stock,
        rank_by=rank,
        results=root.integer("results", default=10, minimum=1, maximum=100),
        builds=root.integer("builds", default=1, minimum=1, maximum=10_000_000),
        output_stage=root.text("output_stage", choices=OUTPUT_STAGES, default="auto"),
        catalogs=_relative_paths(root, "catalogs", base),
        derating=read_derating(root, "derating", base),
        amplitude_control=root.text("amplitude_control", choices=AMPLITUDE_CONTROLS, default="auto"),
        settling_max_s=settling,
        load_cosine=load_cosine,
        quadrature=quadrature,
        source=source,
        where=where,
    )
    _record(where, root, *_TOP)
    for sub in (fr, am, su, lo, lc, te, di, qu, yi, se):
        if sub is not None:
            _record(where, sub, *sub.allowed)
    return spec


def check_parts(spec: Spec, catalog: Catalog) -> None:
    """Refuse family ids the catalog does not hold, and kinds left with no family (the
    kinds every circuit needs, and those of the amplitude control the spec names).

    Raises :class:`SpecError` at the spec line of the offending id.
    """
    needed = CORE_KINDS + _CONTROL_KINDS[spec.amplitude_control]
    if spec.amplitude_control == "auto" and not all(catalog.ids(k) for k in _CONTROL_KINDS["jfet-agc"]):
        needed += _CONTROL_KINDS["diode"]  # without the JFET control's parts, 'auto' means the limiter
    for kind in KINDS:
        ids = spec.parts.of_kind(kind)
        known = catalog.ids(kind)
        if ids is None:
            if not known and kind in needed:
                raise SpecError(f"needs at least one {kind[:-1]} family, and the catalog has none "
                                f"(read {', '.join(catalog.sources)})", source=spec.source,
                                line=spec.line_of("parts"), field=f"parts.{kind}")
            continue
        for i, fid in enumerate(ids):
            if fid not in known:
                other = catalog.kind_of(fid)
                hint = (f"; '{fid}' is one of the {other}" if other else did_you_mean(fid, known))
                raise SpecError(f"names unknown {kind[:-1]} family '{fid}'; the catalog has "
                                f"{', '.join(known) or 'none'}{hint}", source=spec.source,
                                line=spec.line_of(f"parts.{kind}[{i}]"), field=f"parts.{kind}")
