"""The coverage oracle's records: what one requirement asks (``Problem``), a Wien arm set
(``Arms``), one candidate with the estimates that ranked it (``Design``) and how a
candidate's estimated margins combine into its score. partpick supplies only the
IEC 60063 values of a family (``Family.values``, built on ``partpick.series``) and the
catalog and spec records.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass, field
from statistics import NormalDist

import numpy as np

from oracle_physics import f0_hz, required_gain

__all__ = ["Problem", "Arms", "Design", "sigma", "values_of", "prices_of", "nearest_values", "startup_margin",
           "base_score", "combine", "SWING_SHARE", "SLEW_TEXTBOOK", "CURRENT_TEXTBOOK"]

# An oscillator estimated within a tenth of the swing is left out: the describing-function
# estimate is good to a few %, a clipping candidate fails (and its verification, a
# transient, is slow).
SWING_SHARE = 0.9
# Textbook practice (common practice, no published source): keep the signal's slew under a
# fifth of the op-amp's slew rate and its current under 70 % of its limit; beyond them
# the op-amp's output stage distorts (and verification takes the slow transient path).
SLEW_TEXTBOOK = 0.2
CURRENT_TEXTBOOK = 0.7


def sigma(fam) -> float:
    """One standard deviation of a family's value spread, as a fraction: tolerance at
    3 sigma for 'normal' (the catalog's convention), tol/sqrt(3) for 'uniform'."""
    return fam.tolerance_frac / (3.0 if fam.distribution == "normal" else math.sqrt(3.0))


@functools.lru_cache(maxsize=256)
def values_of(fam) -> np.ndarray:
    """The family's IEC 60063 values in its range (ohm or F), cached per family record."""
    arr = np.array(fam.values())
    arr.flags.writeable = False
    return arr


@functools.lru_cache(maxsize=64)
def prices_of(cfam) -> np.ndarray:
    """Unit price of each of a capacitor family's values (aligned with values_of)."""
    return np.array([cfam.unit_price(v) for v in values_of(cfam)])


def nearest_values(values: np.ndarray, x: float, n: int = 1) -> list[float]:
    """The n values nearest x on a log scale."""
    if len(values) == 0:
        return []
    order = np.argsort(np.abs(np.log(values / x)))
    return [float(values[i]) for i in order[:n]]


@dataclass(frozen=True, slots=True)
class Problem:
    """What the sweep needs from one spec, in SI units."""

    spec: object
    catalog: object
    rfams: tuple
    cfams: tuple
    opamps: tuple
    limiters: tuple
    stages: tuple[str, ...]
    z: float                 # normal quantile of the yield asked for
    temps: tuple[float, float, float]   # nominal, min, max (K)

    @classmethod
    def of(cls, spec, catalog, stages: tuple[str, ...]) -> "Problem":
        def allowed(kind):
            ids = spec.parts.of_kind(kind)
            return tuple(f for f in catalog.of_kind(kind) if ids is None or f.id in ids)
        y = min(max(spec.yield_min_frac, 0.5), 0.9999)
        t = spec.temperature
        return cls(spec, catalog, allowed("resistors"), allowed("capacitors"), allowed("opamps"),
                   allowed("limiters"), stages, NormalDist().inv_cdf(0.5 + y / 2), (t.nominal_k, t.min_k, t.max_k))

    @property
    def f_hz(self) -> float:
        return self.spec.frequency.target_hz

    @property
    def load_y(self) -> complex:
        """Load admittance at the target frequency, S (an open load on a single supply
        keeps the coupling capacitor's 10 Mohm bleed path)."""
        ld = self.spec.load
        r = ld.resistance_ohm if math.isfinite(ld.resistance_ohm) else (1e7 if self.single else math.inf)
        return (0.0 if math.isinf(r) else 1.0 / r) + 2j * math.pi * self.f_hz * ld.capacitance_f

    @property
    def single(self) -> bool:
        return self.spec.supply.kind == "single"

    def swing_v(self, op) -> float:
        """Peak the op-amp's output can swing around the signal reference at the
        minimum supply (light load), V."""
        half = self.spec.supply.span_min_v / 2
        return half - max(op.headroom_high_v, op.headroom_low_v)

    def i_max(self, op) -> float:
        """The output current a design may draw from the op-amp, A: the share of its rating
        the spec's derating rule output_current allows (a house rule of the spec, which
        `partpick check` judges)."""
        return self.spec.derating.output_current * op.output_current_a

    def r_max(self, op) -> float:
        """The largest frequency-setting resistor a design may use with op-amp ``op``, ohm:
        where its input bias current drops the spec's derating rule bias_drop, at most
        1 Mohm (a house rule of the spec, which `partpick check` judges)."""
        ib = op.input_bias_a
        return min(1e6, self.spec.derating.bias_drop / ib) if ib > 0 else 1e6

    def physical_opamps(self) -> tuple[list, dict[str, str]]:
        """The allowed op-amps that could possibly work, and why each other one cannot."""
        sp = self.spec
        a_lo = sp.amplitude.peak_v * (1 - sp.amplitude.tolerance_frac)
        ok, dropped = [], {}
        for op in self.opamps:
            if not (op.supply_min_v <= sp.supply.span_min_v and sp.supply.span_max_v <= op.supply_max_v):
                dropped[op.id] = "supply range"
            elif a_lo > self.swing_v(op):
                dropped[op.id] = "swing"
            elif 2 * math.pi * self.f_hz * a_lo > op.slew_v_per_s:
                dropped[op.id] = "slew rate"
            elif a_lo * abs(self.load_y) > self.i_max(op):
                dropped[op.id] = "output current"
            elif op.gbw_hz < 3 * self.f_hz:
                dropped[op.id] = "gain-bandwidth"
            else:
                ok.append(op)
        return ok, dropped


@dataclass(frozen=True, slots=True)
class Arms:
    """A Wien arm set: families, values (ohm, F), textbook f0 (Hz) and needed gain."""

    rfam: str
    cfam: str
    rs: float
    cs: float
    rp: float
    cp: float

    @property
    def f0(self) -> float:
        return float(f0_hz(self.rs, self.cs, self.rp, self.cp))

    @property
    def gain(self) -> float:
        return float(required_gain(self.rs, self.cs, self.rp, self.cp))


@dataclass(frozen=True, slots=True)
class Design:
    """One complete candidate of the oracle, with the estimates that ranked it."""

    opamp: str
    arms: Arms
    gfam: str
    rg: float
    rf: float
    limiter: str
    rdfam: str
    rd: float
    stage: str = "none"
    sfam: str = ""
    ra: float = 0.0
    rb: float = 0.0
    est: dict = field(default_factory=dict, compare=False)   # the estimates behind the score

    def get(self, key: str, default=math.nan):
        return self.est.get(key, default)


def startup_margin(d: "Design", offset: float = 0.0) -> float:
    """Estimated startup margin as a share: the small-signal margin (plus a measured
    offset) less z sigma of its spread, over the margin."""
    e = d.get("margin") + offset
    return min((e - d.get("z") * d.get("s_e")) / max(e, 3e-3), 1.0)


def combine(margins) -> "np.ndarray | float":
    """One score from estimated margins (each a share, negative when missed; arrays
    welcome, stacked on the first axis): the smallest margin when every one is met,
    else the sum of the misses, so that among candidates that miss, the one nearest to
    meeting everything comes first."""
    m = np.asarray(margins, dtype=float)
    misses = np.minimum(m, 0.0).sum(axis=0)
    return np.where(misses < 0, misses, m.min(axis=0))


def base_score(d: Design, thd_cal: float = 1.0, max_thd: float = 1.0) -> float:
    """The estimated margins (frequency, amplitude, THD, startup, op-amp current and
    slew) combined (:func:`combine`)."""
    m_t = 1 - d.get("thd") * thd_cal / max_thd
    return float(combine([d.get("m_f"), d.get("m_a", d.get("m_a0")), m_t, startup_margin(d), d.get("m_i", 1.0)]))
