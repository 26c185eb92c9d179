"""Part families of the JFET amplitude control: n-channel JFETs (the voltage-controlled
resistor), single detector diodes and shunt voltage references. The records, and the
readers of each kind's own fields; :mod:`partpick.catalog` reads the fields every family
shares (id, description, package, price) and hands them in as :class:`Common`.

JFETs follow the SPICE level-1 JFET (Shichman-Hodges) parameters, as Berkeley SPICE
and ngspice name them (ngspice manual, "JFET models (NJF/PJF)"): VTO (pinch-off, V),
BETA (A/V^2), LAMBDA (1/V), IS (gate junction saturation current, A), CGS, CGD (F),
with the temperature laws VTOTC (V/K, linear) and BETATCE (%/K, exponential: BETA(T) =
BETA 1.01^(BETATCE (T - Tnom))). VTO and BETA vary two to three times from part to
part: a catalog entry gives each as a nominal value and the range min..max the maker
guarantees, read as a normal spread truncated there (3 sigma at the wider side).
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

from partpick.yamlsrc import Fields

__all__ = ["Common", "Jfet", "Diode", "Reference", "READERS", "ALLOWED"]

DISTRIBUTIONS = ("uniform", "normal")


@dataclass(frozen=True, slots=True)
class Common:
    """The fields every catalog family has: id, description, package, the price of one
    part and of one BOM line (catalog currency), and where it was defined."""

    id: str
    description: str
    package: str
    price_unit: float
    price_line: float
    where: str
    maker: str = ""
    maker_part: str = ""


@dataclass(frozen=True, slots=True)
class Jfet:
    """An n-channel JFET, SPICE level-1 parameters at 25 degC (see module docstring).

    vto_v: nominal pinch-off voltage (V, negative), vto_min_v..vto_max_v its range;
    beta_a_per_v2: nominal BETA (A/V^2), beta_min..beta_max its range; lambda_per_v;
    is_a: gate junction saturation current (A); cgs_f, cgd_f: gate capacitances, taken
    as constant (F); vto_tempco_v_per_k (V/K); beta_tce_per_k: BETATCE / 100 (1/K).
    """

    id: str
    description: str
    vto_v: float
    vto_min_v: float
    vto_max_v: float
    beta_a_per_v2: float
    beta_min_a_per_v2: float
    beta_max_a_per_v2: float
    lambda_per_v: float
    is_a: float
    cgs_f: float
    cgd_f: float
    vto_tempco_v_per_k: float
    beta_tce_per_k: float
    package: str
    price_unit: float
    price_line: float
    where: str = field(default="", compare=False)
    maker: str = ""
    maker_part: str = ""

    @property
    def r_on_ohm(self) -> float:
        """Channel resistance at V_GS = 0 and small V_DS, 1 / (2 BETA |VTO|), ohm."""
        return 1.0 / (2 * self.beta_a_per_v2 * abs(self.vto_v))

    def with_parameters(self, vto_v: float, beta_a_per_v2: float) -> "Jfet":
        """The same part with another VTO (V) and BETA (A/V^2): one build of the spread."""
        return replace(self, vto_v=vto_v, beta_a_per_v2=beta_a_per_v2)


@dataclass(frozen=True, slots=True)
class Diode:
    """A single small-signal diode (a detector or clamp), Shockley junction with series
    resistance: is_a (A), n, rs_ohm (ohm), eg_j (J) and xti for Is(T) by the SPICE law;
    its capacitance as SPICE's junction charge parameters (cjo_f F, vj_v V, m, fc,
    tt_s s; the catalog gives one constant capacitance: CJO with M = 0);
    vf_spread_v: part-to-part forward-voltage spread at a fixed current (3 sigma, V).
    ``kind`` is 'diode', so the junction physics reads it like one junction of a
    limiter pair."""

    id: str
    description: str
    is_a: float
    n: float
    rs_ohm: float
    cjo_f: float
    eg_j: float
    xti: float
    vf_spread_v: float
    package: str
    price_unit: float
    price_line: float
    where: str = field(default="", compare=False)
    kind: str = "diode"
    parts: int = 1
    vj_v: float = 1.0
    m: float = 0.0
    fc: float = 0.5
    tt_s: float = 0.0
    maker: str = ""
    maker_part: str = ""

    @property
    def cj_f(self) -> float:
        """The junction's (constant) capacitance, F."""
        return self.cjo_f


@dataclass(frozen=True, slots=True)
class Reference:
    """A two-terminal shunt voltage reference: voltage_v (V) within tolerance_frac
    ('uniform' or 'normal' with the tolerance at 3 sigma), tempco_per_k (1/K, a bound
    either way), min_current_a: the cathode current it needs to regulate (A)."""

    id: str
    description: str
    voltage_v: float
    tolerance_frac: float
    distribution: str
    tempco_per_k: float
    min_current_a: float
    package: str
    price_unit: float
    price_line: float
    where: str = field(default="", compare=False)
    maker: str = ""
    maker_part: str = ""


def _range(rec: Fields, key: str, dim: str, **kw) -> tuple[float, float, float]:
    """(nominal, min, max) of a {nominal, min, max} field, min <= nominal <= max."""
    sub = rec.sub(key, ("nominal", "min", "max"))
    nom = sub.quantity("nominal", dim, **kw)
    lo = sub.quantity("min", dim, default=nom, **kw)
    hi = sub.quantity("max", dim, default=nom, **kw)
    if not lo <= nom <= hi:
        raise sub.error("nominal", f"must lie within {key}.min..max (got {nom:g} outside {lo:g}..{hi:g})")
    return nom, lo, hi


def _jfet(rec: Fields, c: Common) -> Jfet:
    vto, vto_lo, vto_hi = _range(rec, "vto", "voltage")
    if not vto_hi < 0:
        raise rec.error("vto", f"must be negative for an n-channel JFET (got up to {vto_hi:g} V)")
    beta, beta_lo, beta_hi = _range(rec, "beta", "transconductance_parameter", positive=True)
    caps = rec.sub("capacitance", ("gate_source", "gate_drain"), required=False)
    return Jfet(
        id=c.id, description=c.description, vto_v=vto, vto_min_v=vto_lo, vto_max_v=vto_hi,
        beta_a_per_v2=beta, beta_min_a_per_v2=beta_lo, beta_max_a_per_v2=beta_hi,
        lambda_per_v=rec.number("lambda", default=0.0, minimum=0.0, maximum=1.0),
        is_a=rec.quantity("gate_saturation_current", "current", positive=True, default=1e-14),
        cgs_f=caps.quantity("gate_source", "capacitance", nonnegative=True, default=0.0) if caps else 0.0,
        cgd_f=caps.quantity("gate_drain", "capacitance", nonnegative=True, default=0.0) if caps else 0.0,
        vto_tempco_v_per_k=rec.quantity("vto_tempco", "voltage_tempco", default=0.0),
        beta_tce_per_k=rec.quantity("beta_tempco", "tempco", default=0.0),
        package=c.package, price_unit=c.price_unit, price_line=c.price_line, where=c.where)


def _diode(rec: Fields, c: Common) -> Diode:
    return Diode(
        id=c.id, description=c.description,
        is_a=rec.quantity("saturation_current", "current", positive=True),
        n=rec.number("emission", minimum=0.5, maximum=10.0),
        rs_ohm=rec.quantity("series_resistance", "resistance", nonnegative=True, default=0.0),
        cjo_f=rec.quantity("capacitance", "capacitance", nonnegative=True, default=0.0),
        eg_j=rec.quantity("bandgap", "energy", positive=True, default=1.11 * 1.602176634e-19),
        xti=rec.number("xti", default=3.0, minimum=0.0, maximum=10.0),
        vf_spread_v=rec.quantity("forward_voltage_spread", "voltage", nonnegative=True, default=0.0),
        package=c.package, price_unit=c.price_unit, price_line=c.price_line, where=c.where)


def _reference(rec: Fields, c: Common) -> Reference:
    tol = rec.quantity("tolerance", "fraction", positive=True)
    if tol >= 0.5:
        raise rec.error("tolerance", f"must be below 50 % (got {tol * 100:g} %)")
    return Reference(
        id=c.id, description=c.description,
        voltage_v=rec.quantity("voltage", "voltage", positive=True), tolerance_frac=tol,
        distribution=rec.text("distribution", choices=DISTRIBUTIONS, default="normal"),
        tempco_per_k=rec.quantity("tempco", "tempco", nonnegative=True, default=0.0),
        min_current_a=rec.quantity("min_current", "current", positive=True, default=1e-3),
        package=c.package, price_unit=c.price_unit, price_line=c.price_line, where=c.where)


# kind -> (its own fields, reader)
READERS = {"jfets": _jfet, "diodes": _diode, "references": _reference}
ALLOWED = {
    "jfets": ("vto", "beta", "lambda", "gate_saturation_current", "capacitance", "vto_tempco", "beta_tempco"),
    "diodes": ("saturation_current", "emission", "series_resistance", "capacitance", "bandgap", "xti",
               "forward_voltage_spread"),
    "references": ("voltage", "tolerance", "distribution", "tempco", "min_current"),
}
