"""An in-memory netlist: the one description of a candidate's circuit that both the
SPICE exporter and partpick's own transient simulator read, so the two cannot drift.

Elements are plain records between named nodes ('0' is ground). The op-amp element
stands for the behavioural macro-model of :mod:`partpick.physics.opamp`; the limiter
element for a junction pair of :mod:`partpick.physics.junction`; the JFET element for
the SPICE level-1 JFET of :mod:`partpick.physics.jfet`, the diode element for one
junction.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from partpick.catalog import Diode, Jfet, Limiter, OpAmp

__all__ = ["Resistor", "Capacitor", "VSource", "Kick", "OpAmpX", "LimiterX", "JfetX", "DiodeX", "Netlist"]


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
    opposed Zeners), each junction with its charge as the catalog's limiter gives it
    (:mod:`partpick.physics.junction`)."""

    name: str
    a: str
    b: str
    limiter: Limiter


@dataclass(frozen=True, slots=True)
class JfetX:
    """An n-channel JFET of the catalog between drain d, gate g and source s; its gate
    capacitances (the part's cgs_f, cgd_f) sit gate-source and gate-drain as constant
    capacitors."""

    name: str
    d: str
    g: str
    s: str
    jfet: Jfet


@dataclass(frozen=True, slots=True)
class DiodeX:
    """One diode of the catalog from anode a to cathode k, with cap_f (F) across it."""

    name: str
    a: str
    k: str
    diode: Diode
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
            for attr in ("a", "b", "node", "inp", "inn", "out", "vcc", "vee", "k", "d", "g", "s"):
                n = getattr(el, attr, None)
                if n is not None and n != "0" and n not in seen:
                    seen.append(n)
        return tuple(seen)
