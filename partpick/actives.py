"""Part families of the JFET amplitude control: n-channel JFETs (the voltage-controlled
resistor), single detector diodes and shunt voltage references. The frozen records;
:mod:`partpick.catalog_read` reads and checks them like every other family.

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

__all__ = ["Jfet", "Diode", "Reference"]


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
