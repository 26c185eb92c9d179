"""An independent small-signal derivation for the conformance tests: modified nodal
analysis of a partpick netlist written out symbolically with sympy (a general-purpose
computer-algebra library from PyPI), straight from Kirchhoff's current law.

Every node but ground gets its KCL equation; a node held by a DC source to ground
(a supply rail) is AC ground. A resistor conducts (va - vb)/R, a capacitor s C (va - vb),
the limiter pair its small-signal conductance plus s times its capacitance. An op-amp is
either ideal (a nullor: its inputs at equal voltage, its output current a free unknown)
or the small-signal model every op-amp text gives: internal voltage
X = A0 wa / (s + wa) [* w2 / (s + w2)] (v+ - v-), output (X - vout)/Ro into the output
node. The natural frequencies are the zeros of the determinant; nothing of partpick's
own loop algebra (:mod:`partpick.physics.loop`) is used.
"""

from __future__ import annotations

import math

import numpy as np
import sympy as sp

from partpick.physics.netlist import Capacitor, Kick, LimiterX, Netlist, OpAmpX, Resistor, VSource

S = sp.symbols("s")


def _exact(x: float) -> sp.Rational:
    return sp.Rational(x)


def characteristic_roots(net: Netlist, *, ideal_opamps: bool = False, limiter_g: float = 0.0,
                         limiter_c: float = 0.0, scale: float = 1.0) -> np.ndarray:
    """Roots (rad/s) of det M(s) = 0 for the netlist's small-signal circuit. limiter_g,
    limiter_c: small-signal conductance (S) and capacitance (F) of every limiter pair at
    rest. ``scale`` (rad/s) normalises s for conditioning: the polynomial is built in
    s / scale."""
    ground = {"0"}
    for el in net.elements:
        if isinstance(el, VSource):
            ground.update({el.a, el.b})
    nodes = [n for n in net.nodes() if n not in ground]
    index = {n: i for i, n in enumerate(nodes)}
    extra = []  # op-amp unknowns: (kind, element)
    ops = [el for el in net.elements if isinstance(el, OpAmpX)]
    for op in ops:
        if ideal_opamps:
            extra.append(("io", op))
        else:
            extra.append(("x", op))
            if op.opamp.second_pole_hz is not None:
                extra.append(("y", op))
    n = len(nodes) + len(extra)
    M = sp.zeros(n, n)
    p = S  # s in units of `scale`
    k = _exact(scale)

    def v(node):
        return None if node in ground else index[node]

    def stamp(a, b, y):
        ia, ib = v(a), v(b)
        if ia is not None:
            M[ia, ia] += y
        if ib is not None:
            M[ib, ib] += y
        if ia is not None and ib is not None:
            M[ia, ib] -= y
            M[ib, ia] -= y

    for el in net.elements:
        if isinstance(el, Resistor):
            stamp(el.a, el.b, 1 / _exact(el.ohm))
        elif isinstance(el, Capacitor):
            stamp(el.a, el.b, p * k * _exact(el.farad))
        elif isinstance(el, LimiterX):
            stamp(el.a, el.b, _exact(limiter_g) + p * k * _exact(limiter_c))
        elif isinstance(el, (VSource, Kick, OpAmpX)):
            pass
        else:
            raise TypeError(el)
    row = len(nodes)
    for kind, op in extra:
        col = row
        ip, im, io = v(op.inp), v(op.inn), v(op.out)
        o = op.opamp
        if kind == "io":
            # output current I into the output node; constraint v+ - v- = 0
            if io is not None:
                M[io, col] -= 1
            if ip is not None:
                M[row, ip] += 1
            if im is not None:
                M[row, im] -= 1
        elif kind == "x":
            wa = _exact(2 * math.pi * o.gbw_hz / o.a0)
            a0 = _exact(o.a0)
            # (s + wa) X - A0 wa (v+ - v-) = 0
            M[row, col] += p * k + wa
            if ip is not None:
                M[row, ip] -= a0 * wa
            if im is not None:
                M[row, im] += a0 * wa
            y_col = col + 1 if o.second_pole_hz is not None else col
            if o.second_pole_hz is None:
                _output(M, io, y_col, o)
        else:  # y: (s + w2) Y - w2 X = 0
            w2 = _exact(2 * math.pi * o.second_pole_hz)
            M[row, col] += p * k + w2
            M[row, col - 1] -= w2
            _output(M, io, col, o)
        row += 1
    det = sp.Poly(sp.expand(M.det(method="berkowitz")), S)
    coeffs = [float(c) for c in det.all_coeffs()]
    big = max(abs(c) for c in coeffs)
    return np.roots([c / big for c in coeffs]) * scale


def _output(M, io, y_col, o) -> None:
    """The output stage: current (Y - vout)/Ro into the output node."""
    if io is None:
        return
    g = 1 / _exact(max(o.output_resistance_ohm, 1e-3))
    M[io, io] += g
    M[io, y_col] -= g
