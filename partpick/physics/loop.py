"""The oscillator loop as the physics sees it: a linear network and one control branch.

Every oscillator partpick builds is a linear network (resistors, capacitors, op-amps in
their small-signal model, the load) closed through one two-terminal branch that controls
the amplitude (a junction pair, a JFET channel). With V the voltage across the branch
and I the current through it (from its first terminal to its second), the linear
network imposes, at every complex frequency p = s / w_ref,

    alpha(p) V + gamma(p) I = 0,

so with the branch linearised (I = Y V) the natural frequencies are the roots of
alpha + gamma Y. The loop gain, broken where the circuit's own convention puts it, is

    L(p, Y) = 1 - (alpha + gamma Y) / (d0 + d1 Y),

so that 1 - L = 0 is the same characteristic equation (the return-difference form of
the Barkhausen criterion: H. W. Bode, Network Analysis and Feedback Amplifier Design,
1945, chapter 4). Every voltage or current of interest (a probe) is linear in (V, I):
probe = cv(p) V + ci(p) I. A topology plug-in builds these rationals for its circuit;
the analyses in :mod:`partpick.physics.linear` and :mod:`partpick.physics.harmonic`
take them and know no circuit.

The branch itself (:class:`Branch`) is a memoryless element, which may store charge,
behind a series resistance: the junction pair of a diode limiter with its junction
charge (depletion and diffusion) and series resistor, or (table None) a plain
conductance.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from partpick.catalog import OpAmp
from partpick.physics.rational import Rational

__all__ = ["Loop", "Branch", "AmpProbe"]


@dataclass(frozen=True, slots=True)
class AmpProbe:
    """An op-amp whose limits a steady-state solution must respect: x names the probe of
    its internal output voltage (before Ro, relative to the signal reference, V) and
    iout that of its output current (A)."""

    name: str
    opamp: OpAmp
    x: str
    iout: str


@dataclass(frozen=True, slots=True)
class Loop:
    """The linear network at the control branch, in p = s / w_ref (w_ref in rad/s).

    alpha, gamma: the network's constraint alpha V + gamma I = 0 on the branch voltage
    V (V) and current I (A); d0, d1: the loop gain's return-difference denominator (see
    module docstring); probes: (name, cv, ci) with probe = cv V + ci I ('osc' the
    oscillator output and 'load' the load voltage are always present); amps: the op-amps
    whose swing, slew and current the steady state must respect; inject: when the
    topology gives it, the coefficient eta of a current J drawn from the oscillator's
    output node (a detector there): alpha V + gamma I + eta J = 0, the probes unchanged;
    outputs: the names of further output probes whose waveforms the analyses report
    ('load2', a quadrature oscillator's second output at its load).
    """

    w_ref: float
    alpha: Rational
    gamma: Rational
    d0: Rational
    d1: Rational
    probes: tuple[tuple[str, Rational, Rational], ...]
    amps: tuple[AmpProbe, ...] = ()
    inject: Rational | None = None
    outputs: tuple[str, ...] = ()

    def coefficients(self, p: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """(alpha, gamma) at p (complex arrays)."""
        return self.alpha(p), self.gamma(p)

    def loop_gain(self, p: np.ndarray, y: np.ndarray | float) -> np.ndarray:
        """L(p, Y) = 1 - (alpha + gamma Y) / (d0 + d1 Y) with Y the branch admittance at
        p (S; an array over p or one number)."""
        return 1.0 - (self.alpha(p) + self.gamma(p) * y) / (self.d0(p) + self.d1(p) * y)

    def probe(self, name: str, p: np.ndarray, v: np.ndarray, i: np.ndarray) -> np.ndarray:
        """The probe ``name`` at p for branch voltage v (V) and current i (A), phasors."""
        for key, cv, ci in self.probes:
            if key == name:
                return cv(p) * v + ci(p) * i
        raise KeyError(f"the loop has no probe {name!r}; it has {', '.join(k for k, _, _ in self.probes)}")

    def has_probe(self, name: str) -> bool:
        return any(key == name for key, _, _ in self.probes)


@dataclass(frozen=True, slots=True)
class Branch:
    """The control branch: a resistance series_ohm (ohm) in series with a memoryless element whose
    tabulated characteristic ``table`` (current(v) in A, conductance(v) in S and, when it
    stores charge, charge(v) in C and capacitance(v) = dq/dv in F; None for a plain
    conductance g0) has a further linear capacitance cap_f (F) across it. g0_s is the
    element's small-signal conductance at zero volts (S); series_table the characteristic
    of element and series resistance together (for the describing-function start of
    harmonic balance; the element's own when the series resistance is 0).

    The small-signal analyses see the element at zero volts: g0_s and c0_f (cap_f plus
    the table's dq/dv at 0 V); harmonic balance sees the whole charge q(v)."""

    table: object | None
    series_ohm: float = 0.0
    cap_f: float = 0.0
    g0_s: float = 0.0
    series_table: object | None = None

    def __post_init__(self) -> None:
        if self.series_table is None and self.series_ohm == 0.0:
            object.__setattr__(self, "series_table", self.table)

    @property
    def has_charge(self) -> bool:
        """The element's table stores charge (a voltage-dependent capacitance)."""
        return self.table is not None and getattr(self.table, "has_charge", False)

    @property
    def c0_f(self) -> float:
        """Small-signal capacitance across the element at zero volts, F."""
        extra = float(self.table.capacitance(np.array([0.0]))[0]) if self.has_charge else 0.0
        return self.cap_f + extra

    def admittance(self, p: np.ndarray, w_ref: float, g_element: float | None = None) -> np.ndarray:
        """Small-signal admittance of the whole branch at p, S: the element's conductance
        (g_element, default g0_s) and its capacitance c0_f, behind the series resistance."""
        g = self.g0_s if g_element is None else g_element
        ye = g + p * w_ref * self.c0_f
        return ye / (1.0 + self.series_ohm * ye)

    def rational(self, w_ref: float, g_element: float | None = None) -> Rational:
        """:meth:`admittance` as a rational function of p."""
        g = self.g0_s if g_element is None else g_element
        c = self.c0_f
        return Rational(np.array([g, w_ref * c]), np.array([1.0 + self.series_ohm * g, self.series_ohm * w_ref * c]))

    @property
    def is_linear_zero(self) -> bool:
        """The branch adds nothing at small signal (no conductance, no capacitance)."""
        return not self.g0_s and not self.c0_f

    def element_coefficients(self, loop: Loop, p: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """The loop equation written for the voltage across the element itself, Ve, and
        the element's own current Ie (its table's current and charging current): with
        I = Ie + s C Ve through the branch (C the linear cap_f) and V = Ve + Rser I,
        alpha V + gamma I = 0 becomes (alpha + (alpha Rser + gamma) s C) Ve
        + (alpha Rser + gamma) Ie = 0. This keeps the capacitance where it is, behind
        the series resistance Rser."""
        al, ga = loop.alpha(p), loop.gamma(p)
        k = al * self.series_ohm + ga
        return al + k * (p * loop.w_ref * self.cap_f), k
