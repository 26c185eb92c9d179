"""An in-memory netlist: the one description of a candidate's circuit that both the
SPICE exporter and partpick's own transient simulator read, so the two cannot drift.

The op-amp is a behavioural macro-model (the classic two-stage form): a
transconductance stage that saturates smoothly at the slew-rate current,
i1 = SR C1 tanh(2 pi GBW vd / SR), into an integrator C1 || R1 (dominant pole at
GBW / A0); the integrator node is clamped to the rails less the output headroom by a
stiff restoring conductance; an optional second pole; and an output stage whose
current saturates smoothly, i = Ilim tanh((vy - vout) / (Ro Ilim)), so the
small-signal output resistance is Ro and the short-circuit current Ilim.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

from partpick.catalog import Limiter, OpAmp

__all__ = ["Resistor", "Capacitor", "VSource", "Kick", "OpAmpX", "LimiterX", "Netlist", "MacroParams",
           "macro_params"]


@dataclass(frozen=True, slots=True)
class Resistor:
    name: str
    a: str
    b: str
    ohm: float


@dataclass(frozen=True, slots=True)
class Capacitor:
    name: str
    a: str
    b: str
    farad: float


@dataclass(frozen=True, slots=True)
class VSource:
    """DC source, volt (V) from node a (+) to node b (-)."""

    name: str
    a: str
    b: str
    volt: float


@dataclass(frozen=True, slots=True)
class Kick:
    """A short current pulse from ground into ``node`` that starts the oscillation:
    charge_c (C) delivered over width_s (s) from start_s (s)."""

    name: str
    node: str
    charge_c: float
    start_s: float
    width_s: float

    @property
    def amps(self) -> float:
        return self.charge_c / self.width_s


@dataclass(frozen=True, slots=True)
class OpAmpX:
    """One op-amp (channel) of the catalog's type, pins inp, inn, out, vcc, vee."""

    name: str
    inp: str
    inn: str
    out: str
    vcc: str
    vee: str
    opamp: OpAmp


@dataclass(frozen=True, slots=True)
class LimiterX:
    """The limiter pair between nodes a and b (two anti-parallel diodes or LEDs, or two
    opposed Zeners) with its junction capacitance cap_f (F) across it."""

    name: str
    a: str
    b: str
    limiter: Limiter
    cap_f: float


@dataclass(frozen=True, slots=True)
class Netlist:
    """Elements of one circuit at one operating point: temp_k (K); f_hint_hz the
    expected frequency (Hz) for the analysis window; probes name the nodes of interest
    ('osc' the oscillator output, 'load' the load)."""

    title: str
    elements: tuple
    temp_k: float
    f_hint_hz: float
    probes: dict = field(default_factory=dict, hash=False, compare=False)

    def nodes(self) -> tuple[str, ...]:
        seen: list[str] = []
        for el in self.elements:
            for attr in ("a", "b", "node", "inp", "inn", "out", "vcc", "vee"):
                n = getattr(el, attr, None)
                if n is not None and n != "0" and n not in seen:
                    seen.append(n)
        return tuple(seen)


@dataclass(frozen=True, slots=True)
class MacroParams:
    """Numbers of the op-amp macro-model (see module docstring); SI units."""

    c1_f: float
    gm_s: float
    r1_ohm: float
    imax_a: float
    gclamp_s: float
    head_high_v: float
    head_low_v: float
    ro_ohm: float
    ilim_a: float
    pole2_hz: float | None


def macro_params(op: OpAmp) -> MacroParams:
    """Macro-model values from catalog data: C1 = 1 nF sets the scale; gm = 2 pi GBW C1,
    R1 = A0 / gm, slew current SR C1; the clamp conductance is 100 gm, so clamping acts
    a hundred times faster than the unity-gain frequency."""
    c1 = 1e-9
    gm = 2 * math.pi * op.gbw_hz * c1
    return MacroParams(
        c1_f=c1,
        gm_s=gm,
        r1_ohm=op.a0 / gm,
        imax_a=op.slew_v_per_s * c1,
        gclamp_s=100 * gm,
        head_high_v=op.headroom_high_v,
        head_low_v=op.headroom_low_v,
        ro_ohm=max(op.output_resistance_ohm, 1e-3),
        ilim_a=op.output_current_a,
        pole2_hz=op.second_pole_hz,
    )
