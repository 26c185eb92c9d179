"""Reading catalog records: one reader per kind of part family and the packages'
thermal records, each validating every field and returning the frozen records of
:mod:`partpick.catalog` (which calls them while loading)."""

from __future__ import annotations

import math
from dataclasses import replace

from partpick import series
from partpick.actives import Diode, Jfet, Reference
from partpick.catalog import (  # noqa: I001 (the ranges every value must lie in)
    BAND_K,
    BANDGAP_J,
    BETA_A_PER_V2,
    BETA_TEMPCO_PER_K,
    CAPACITANCE_F,
    CURRENT_A,
    DISTRIBUTIONS,
    GBW_HZ,
    JUNCTION_F,
    LIMITER_KINDS,
    MIN_TOLERANCE,
    OUTPUT_OHM,
    THETA_JA_K_PER_W,
    POLE_HZ,
    POWER_W,
    RATING_V,
    REFERENCE_V,
    RESISTANCE_OHM,
    SATURATION_A,
    SIDE_V,
    SLEW_V_PER_S,
    SMALL_CURRENT_A,
    SUPPLY_V,
    TEMPCO_PER_K,
    VTO_TEMPCO_V_PER_K,
    VTO_V,
    ZENER_TEMPCO_V_PER_K,
    ZENER_V,
    CapacitorFamily,
    Limiter,
    OpAmp,
    Package,
    ResistorFamily,
)
from partpick.errors import InputError
from partpick.yamlsrc import Fields, Mapping

__all__ = ["READERS", "read_package", "with_thermal"]

_PRICE = ("unit", "line")


def with_thermal(op: OpAmp, pkg: Package | None) -> OpAmp:
    """The op-amp with its package's thermal data (unchanged when the catalog has none)."""
    return op if pkg is None else replace(op, thermal=pkg)


def read_package(rec: Fields) -> Package:
    theta = rec.quantity("theta_ja", "thermal_resistance", positive=True, bounds=THETA_JA_K_PER_W)
    tj = rec.quantity("max_junction", "temperature", bounds=BAND_K)
    if tj <= 273.15:
        raise rec.error("max_junction", f"must be above 0 degC (got {tj - 273.15:g} degC)")
    return Package(_id(rec), theta, tj, _where(rec))


# -- readers, one per kind ---------------------------------------------------------------

def _id(rec: Fields) -> str:
    fid = rec.text("id")
    if not all(c.isalnum() or c in "-_." for c in fid):
        raise rec.error("id", f"must use letters, digits, '-', '_' or '.' only (got '{fid}')")
    return fid


def _where(rec: Fields) -> str:
    return f"{rec.source}:{rec.node.line}"


def _maker(rec: Fields) -> dict[str, str]:
    """The optional maker and maker's part number of a family."""
    part = rec.text("maker_part", default="")
    if "{" in part.replace("{value}", "") or "}" in part.replace("{value}", ""):
        raise rec.error("maker_part", f"may hold '{{value}}' and no other braces (got '{part}')")
    return {"maker": rec.text("maker", default=""), "maker_part": part}


def _tolerance(rec: Fields, key: str = "tolerance") -> float:
    tol = rec.quantity(key, "fraction", positive=True)
    if tol < MIN_TOLERANCE:
        raise rec.error(key, f"must be at least 0.0001 % (got {tol * 100:g} %)")
    if tol >= 0.5:
        raise rec.error(key, f"must be below 50 % (got {tol * 100:g} %)")
    return tol


def _series(rec: Fields) -> str:
    try:
        return series.check_series_name(rec.text("series"))
    except InputError as exc:
        raise rec.error("series", exc.message) from None


def _range(rec: Fields, dim: str, series_name: str, bounds: tuple[float, float]) -> tuple[float, float]:
    r = rec.sub("range", ("min", "max"))
    lo = r.quantity("min", dim, positive=True, bounds=bounds)
    hi = r.quantity("max", dim, positive=True, bounds=bounds)
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


class _Resistors(_Reader):
    allowed = ("id", "description", "technology", "series", "tolerance", "distribution", "tempco",
               "range", "power", "voltage", "package", "price", "maker", "maker_part")

    def read(self, rec: Fields) -> ResistorFamily:
        ser = _series(rec)
        lo, hi = _range(rec, "resistance", ser, RESISTANCE_OHM)
        price = _price(rec)
        return ResistorFamily(
            id=_id(rec),
            description=rec.text("description", default=""),
            technology=rec.text("technology"),
            series=ser,
            tolerance_frac=_tolerance(rec),
            distribution=rec.text("distribution", choices=DISTRIBUTIONS, default="uniform"),
            tempco_per_k=rec.quantity("tempco", "tempco", nonnegative=True, bounds=TEMPCO_PER_K),
            min_ohm=lo,
            max_ohm=hi,
            power_w=rec.quantity("power", "power", positive=True, bounds=POWER_W),
            voltage_v=rec.quantity("voltage", "voltage", positive=True, default=math.inf, bounds=RATING_V),
            package=rec.text("package", default=""),
            price_unit=_cost(price, "unit"),
            price_line=_cost(price, "line", default=0.0),
            where=_where(rec),
            **_maker(rec),
        )


class _Capacitors(_Reader):
    allowed = ("id", "description", "dielectric", "series", "tolerance", "distribution", "tempco",
               "temperature_band", "range", "voltage", "package", "price", "maker", "maker_part")

    def read(self, rec: Fields) -> CapacitorFamily:
        ser = _series(rec)
        lo, hi = _range(rec, "capacitance", ser, CAPACITANCE_F)
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
            tempco = tc.quantity("nominal", "tempco", bounds=TEMPCO_PER_K)
            tempco_spread = tc.quantity("spread", "tempco", nonnegative=True, default=0.0, bounds=TEMPCO_PER_K)
        else:
            tb = rec.sub("temperature_band", ("change", "min", "max"))
            band = tb.quantity("change", "fraction", positive=True, bounds=(MIN_TOLERANCE, 1.0))
            band_lo = tb.quantity("min", "temperature", bounds=BAND_K)
            band_hi = tb.quantity("max", "temperature", bounds=BAND_K)
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
            voltage_v=rec.quantity("voltage", "voltage", positive=True, bounds=RATING_V),
            min_f=lo,
            max_f=hi,
            package=rec.text("package", default=""),
            price_at_min=at_min,
            price_at_max=at_max,
            price_line=_cost(price, "line", default=0.0),
            where=_where(rec),
            **_maker(rec),
        )


class _OpAmps(_Reader):
    allowed = ("id", "description", "gbw", "dc_gain", "second_pole", "slew_rate", "supply", "headroom",
               "output_current", "output_resistance", "input_common_mode", "rail_to_rail", "channels",
               "quiescent_current", "input_bias_current", "gbw_spread", "package", "price", "maker", "maker_part")

    def read(self, rec: Fields) -> OpAmp:
        sup = rec.sub("supply", ("min", "max"))
        smin = sup.quantity("min", "voltage", positive=True, bounds=SUPPLY_V)
        smax = sup.quantity("max", "voltage", positive=True, bounds=SUPPLY_V)
        if smin >= smax:
            raise sup.error("min", f"must be below supply.max (got {smin:g} V >= {smax:g} V)")
        head = rec.sub("headroom", ("high", "low"))
        cm = rec.sub("input_common_mode", ("low", "high"))
        rr = rec.sub("rail_to_rail", ("input", "output"), required=False)
        gbw = rec.quantity("gbw", "frequency", positive=True, bounds=GBW_HZ)
        a0 = rec.quantity("dc_gain", "gain", positive=True)
        if not 1 < a0 <= 1e9:
            raise rec.error("dc_gain", "must lie above 1 V/V (0 dB) and at most 1e9 V/V (180 dB)")
        pole2 = rec.quantity("second_pole", "frequency", positive=True, required=False, bounds=POLE_HZ)
        if pole2 is not None and pole2 <= gbw / a0:
            raise rec.error("second_pole", "must lie above the dominant pole gbw / dc_gain")
        price = _price(rec)
        op = OpAmp(
            id=_id(rec),
            description=rec.text("description", default=""),
            gbw_hz=gbw,
            a0=a0,
            second_pole_hz=pole2,
            slew_v_per_s=rec.quantity("slew_rate", "slew_rate", positive=True, bounds=SLEW_V_PER_S),
            supply_min_v=smin,
            supply_max_v=smax,
            headroom_high_v=head.quantity("high", "voltage", nonnegative=True, bounds=SIDE_V),
            headroom_low_v=head.quantity("low", "voltage", nonnegative=True, bounds=SIDE_V),
            output_current_a=rec.quantity("output_current", "current", positive=True, bounds=CURRENT_A),
            output_resistance_ohm=rec.quantity("output_resistance", "resistance", nonnegative=True,
                                               bounds=OUTPUT_OHM),
            input_cm_low_v=cm.quantity("low", "voltage", bounds=SIDE_V),
            input_cm_high_v=cm.quantity("high", "voltage", bounds=SIDE_V),
            rail_to_rail_in=rr.boolean("input", default=False) if rr else False,
            rail_to_rail_out=rr.boolean("output", default=False) if rr else False,
            channels=rec.integer("channels", default=1, minimum=1, maximum=8),
            quiescent_current_a=rec.quantity("quiescent_current", "current", positive=True, bounds=CURRENT_A),
            input_bias_a=rec.quantity("input_bias_current", "current", nonnegative=True, bounds=SMALL_CURRENT_A),
            gbw_spread_frac=rec.quantity("gbw_spread", "fraction", nonnegative=True, default=0.3, bounds=(0.0, 0.9)),
            package=rec.text("package", default=""),
            price_unit=_cost(price, "unit"),
            price_line=_cost(price, "line", default=0.0),
            where=_where(rec),
            **_maker(rec),
        )
        if op.headroom_high_v + op.headroom_low_v >= smin:
            raise head.error(None, "leaves no output swing at the minimum supply")
        return op


class _Limiters(_Reader):
    allowed = ("id", "description", "kind", "saturation_current", "emission", "series_resistance",
               "capacitance", "bandgap", "xti", "zener_voltage", "zener_current", "zener_resistance",
               "zener_tempco", "forward_voltage_spread", "parts", "package", "price", "maker", "maker_part")

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
            is_a=rec.quantity("saturation_current", "current", positive=True, bounds=SATURATION_A),
            n=n,
            rs_ohm=rec.quantity("series_resistance", "resistance", nonnegative=True, default=0.0, bounds=OUTPUT_OHM),
            **_junction_charge(rec),
            eg_j=rec.quantity("bandgap", "energy", positive=True, default=1.11 * 1.602176634e-19, bounds=BANDGAP_J),
            xti=rec.number("xti", default=3.0, minimum=0.0, maximum=10.0),
            vz_v=rec.quantity("zener_voltage", "voltage", positive=True, bounds=ZENER_V) if zener else 0.0,
            iz_a=rec.quantity("zener_current", "current", positive=True, bounds=CURRENT_A) if zener else 0.0,
            rz_ohm=rec.quantity("zener_resistance", "resistance", nonnegative=True, bounds=OUTPUT_OHM) if zener else 0.0,
            vz_tempco_v_per_k=(rec.quantity("zener_tempco", "voltage_tempco", bounds=ZENER_TEMPCO_V_PER_K)
                               if zener else 0.0),
            vf_spread_v=rec.quantity("forward_voltage_spread", "voltage", nonnegative=True, default=0.0,
                                     bounds=(0.0, 1.0)),
            parts=rec.integer("parts", default=2, minimum=1, maximum=4),
            package=rec.text("package", default=""),
            price_unit=_cost(price, "unit"),
            price_line=_cost(price, "line", default=0.0),
            where=_where(rec),
            **_maker(rec),
        )


# SPICE's defaults for an absent diode charge parameter (ngspice manual, diode model
# parameters: CJO 0, VJ 1 V, M 0.5, FC 0.5, TT 0) and the ranges ngspice accepts (it
# limits M to 0.9 and FC to 0.95).
_CHARGE_DEFAULTS = {"cjo_f": 0.0, "vj_v": 1.0, "m": 0.5, "fc": 0.5, "tt_s": 0.0}


def _junction_charge(rec: Fields) -> dict[str, float]:
    """The junction's charge parameters from ``capacitance``: a mapping of SPICE
    parameters {cjo, vj, m, fc, tt} (absent ones at SPICE's defaults), or, as catalogs
    before the charge model wrote it, one capacitance: a constant one, i.e. CJO with
    M = 0 (and TT = 0)."""
    out = dict(_CHARGE_DEFAULTS)
    if not rec.has("capacitance"):
        return out
    if not isinstance(rec.node.items["capacitance"][1], Mapping):
        out.update(cjo_f=rec.quantity("capacitance", "capacitance", nonnegative=True, bounds=JUNCTION_F), m=0.0)
        return out
    cap = rec.sub("capacitance", ("cjo", "vj", "m", "fc", "tt"))
    out.update(
        cjo_f=cap.quantity("cjo", "capacitance", nonnegative=True, default=0.0, bounds=JUNCTION_F),
        vj_v=cap.quantity("vj", "voltage", positive=True, default=1.0, bounds=(0.05, 10.0)),
        m=cap.number("m", default=0.5, minimum=0.0, maximum=0.9),
        fc=cap.number("fc", default=0.5, minimum=0.0, maximum=0.95),
        tt_s=cap.quantity("tt", "time", nonnegative=True, default=0.0),
    )
    if out["fc"] * out["vj_v"] > 1.0:
        # ngspice limits vj to 1/fc (with a warning): refuse rather than differ
        raise cap.error("vj", f"times fc must not exceed 1 V (got {out['vj_v']:g} V x {out['fc']:g})")
    return out


# -- the JFET control's families (records in partpick.actives) ----------------------------

_COMMON = ("id", "description", "package", "price", "maker", "maker_part")


def _common(rec: Fields) -> dict:
    """The fields every family has: id, description, package, prices, where, maker."""
    price = _price(rec)
    return dict(id=_id(rec), description=rec.text("description", default=""),
                package=rec.text("package", default=""), price_unit=_cost(price, "unit"),
                price_line=_cost(price, "line", default=0.0), where=_where(rec), **_maker(rec))


def _spread(rec: Fields, key: str, dim: str, bounds: tuple[float, float], **kw) -> tuple[float, float, float]:
    """(nominal, min, max) of a {nominal, min, max} field, min <= nominal <= max."""
    sub = rec.sub(key, ("nominal", "min", "max"))
    nom = sub.quantity("nominal", dim, bounds=bounds, **kw)
    lo = sub.quantity("min", dim, default=nom, bounds=bounds, **kw)
    hi = sub.quantity("max", dim, default=nom, bounds=bounds, **kw)
    if not lo <= nom <= hi:
        raise sub.error("nominal", f"must lie within {key}.min..max (got {nom:g} outside {lo:g}..{hi:g})")
    return nom, lo, hi


class _Jfets(_Reader):
    allowed = _COMMON + ("vto", "beta", "lambda", "gate_saturation_current", "capacitance", "vto_tempco",
                         "beta_tempco")

    def read(self, rec: Fields) -> Jfet:
        sub = rec.sub("vto", ("nominal", "min", "max"))
        if sub.has("max") or sub.has("nominal"):
            top = sub.quantity("max" if sub.has("max") else "nominal", "voltage")
            if not top < 0:
                raise rec.error("vto", f"must be negative for an n-channel JFET (got up to {top:g} V)")
        vto, vto_lo, vto_hi = _spread(rec, "vto", "voltage", VTO_V)
        beta, beta_lo, beta_hi = _spread(rec, "beta", "transconductance_parameter", BETA_A_PER_V2, positive=True)
        caps = rec.sub("capacitance", ("gate_source", "gate_drain"), required=False)
        return Jfet(
            vto_v=vto, vto_min_v=vto_lo, vto_max_v=vto_hi,
            beta_a_per_v2=beta, beta_min_a_per_v2=beta_lo, beta_max_a_per_v2=beta_hi,
            lambda_per_v=rec.number("lambda", default=0.0, minimum=0.0, maximum=1.0),
            is_a=rec.quantity("gate_saturation_current", "current", positive=True, default=1e-14,
                              bounds=SATURATION_A),
            cgs_f=(caps.quantity("gate_source", "capacitance", nonnegative=True, default=0.0, bounds=JUNCTION_F)
                   if caps else 0.0),
            cgd_f=(caps.quantity("gate_drain", "capacitance", nonnegative=True, default=0.0, bounds=JUNCTION_F)
                   if caps else 0.0),
            vto_tempco_v_per_k=rec.quantity("vto_tempco", "voltage_tempco", default=0.0, bounds=VTO_TEMPCO_V_PER_K),
            beta_tce_per_k=rec.quantity("beta_tempco", "tempco", default=0.0, bounds=BETA_TEMPCO_PER_K),
            **_common(rec),
        )


class _Diodes(_Reader):
    allowed = _COMMON + ("saturation_current", "emission", "series_resistance", "capacitance", "bandgap", "xti",
                         "forward_voltage_spread")

    def read(self, rec: Fields) -> Diode:
        return Diode(
            is_a=rec.quantity("saturation_current", "current", positive=True, bounds=SATURATION_A),
            n=rec.number("emission", minimum=0.5, maximum=10.0),
            rs_ohm=rec.quantity("series_resistance", "resistance", nonnegative=True, default=0.0, bounds=OUTPUT_OHM),
            # one constant capacitance (CJO with M = 0): beside a hold capacitor it is a detail
            cjo_f=rec.quantity("capacitance", "capacitance", nonnegative=True, default=0.0, bounds=JUNCTION_F),
            eg_j=rec.quantity("bandgap", "energy", positive=True, default=1.11 * 1.602176634e-19, bounds=BANDGAP_J),
            xti=rec.number("xti", default=3.0, minimum=0.0, maximum=10.0),
            vf_spread_v=rec.quantity("forward_voltage_spread", "voltage", nonnegative=True, default=0.0,
                                     bounds=(0.0, 1.0)),
            **_common(rec),
        )


class _References(_Reader):
    allowed = _COMMON + ("voltage", "tolerance", "distribution", "tempco", "min_current")

    def read(self, rec: Fields) -> Reference:
        return Reference(
            voltage_v=rec.quantity("voltage", "voltage", positive=True, bounds=REFERENCE_V),
            tolerance_frac=_tolerance(rec),
            distribution=rec.text("distribution", choices=DISTRIBUTIONS, default="normal"),
            tempco_per_k=rec.quantity("tempco", "tempco", nonnegative=True, default=0.0, bounds=TEMPCO_PER_K),
            min_current_a=rec.quantity("min_current", "current", positive=True, default=1e-3, bounds=CURRENT_A),
            **_common(rec),
        )


READERS: dict[str, _Reader] = {
    "resistors": _Resistors(),
    "capacitors": _Capacitors(),
    "opamps": _OpAmps(),
    "limiters": _Limiters(),
    "jfets": _Jfets(),
    "diodes": _Diodes(),
    "references": _References(),
}
