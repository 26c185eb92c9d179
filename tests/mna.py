"""An independent small-signal derivation for the conformance tests: modified nodal
analysis of a partpick netlist written out symbolically with sympy (a general-purpose
computer-algebra library from PyPI), straight from Kirchhoff's current law.

Every node but ground gets its KCL equation; a node held by a DC source to ground
(a supply rail, a reference) is AC ground. A resistor conducts (va - vb)/R, a capacitor
s C (va - vb), the limiter pair its small-signal conductance plus s times its
capacitance. A JFET and a diode are linearised at the circuit's DC operating point (from
partpick's DC solver; the test is about the loop algebra, not the operating point): the
JFET by sympy's derivatives of the SPICE level-1 (Shichman-Hodges) drain current written
out here, with its gate junctions (Shockley) and gate capacitances; the diode by the
Shockley law with its series resistance. An op-amp is
either ideal (a nullor: its inputs at equal voltage, its output current a free unknown)
or the small-signal model every op-amp text gives: internal voltage
X = A0 wa / (s + wa) [* w2 / (s + w2)] (v+ - v-), output (X - vout)/Ro into the output
node. The natural frequencies are the zeros of the determinant; nothing of partpick's
own loop algebra (:mod:`partpick.physics.loop`) is used. Beyond ten unknowns the
symbolic determinant gets slow; every entry is a + b s, so the zeros are then the finite
generalized eigenvalues of the pencil (G, -C) (QZ algorithm, scipy.linalg).
"""

from __future__ import annotations

import math

import numpy as np
import sympy as sp

from partpick.physics.netlist import Capacitor, DiodeX, JfetX, Kick, LimiterX, Netlist, OpAmpX, Resistor, VSource

S = sp.symbols("s")
_SYMBOLIC_MAX = 10     # unknowns up to which the determinant is expanded symbolically
K_OVER_Q = 1.380649e-23 / 1.602176634e-19   # V/K, CODATA 2018 (exact)


def _jfet_conductances(el: JfetX, vd: float, vg: float, vs: float, temp_k: float):
    """(gds, gm, ggs, ggd) of a JFET at its DC voltages: the level-1 drain current in the
    region it is in, differentiated symbolically; gate junctions IS exp(v / Vt) / Vt."""
    part = el.jfet
    dt = temp_k - 298.15
    vto = part.vto_v + part.vto_tempco_v_per_k * dt
    beta = part.beta_a_per_v2 * 1.01 ** (100 * part.beta_tce_per_k * dt)
    x, y = sp.symbols("vds vgs")
    vds, vgs = vd - vs, vg - vs

    def normal(d_, g_, linear: bool):
        """Drain current of the normal mode (drain above source)."""
        over = g_ - vto
        return beta * (1 + part.lambda_per_v * d_) * (d_ * (2 * over - d_) if linear else over ** 2)

    if vds >= 0:
        on, linear = vgs - vto > 0, vgs - vto >= vds
        expr = normal(x, y, linear)
    else:                      # source and drain swap roles: the gate-drain voltage controls
        on, linear = vgs - vds - vto > 0, vgs - vds - vto >= -vds
        expr = -normal(-x, y - x, linear)
    gds = float(sp.diff(expr, x).subs({x: vds, y: vgs})) if on else 0.0
    gm = float(sp.diff(expr, y).subs({x: vds, y: vgs})) if on else 0.0
    vt = K_OVER_Q * temp_k
    ggs, ggd = (part.is_a * math.exp(v / vt) / vt for v in (vgs, vg - vd))
    return gds, gm, ggs, ggd


def _diode_conductance(el: DiodeX, va: float, vk: float, temp_k: float) -> float:
    """Small-signal conductance of a diode (Shockley with series resistance) at its DC
    voltage: 1 / (Rs + n Vt / (I + Is)), the current found by bisection."""
    d = el.diode
    nvt = d.n * K_OVER_Q * temp_k
    v = va - vk
    lo, hi = -d.is_a, max(v / max(d.rs_ohm, 1e-9), d.is_a) + 1.0
    for _ in range(200):
        i = 0.5 * (lo + hi)
        if d.is_a * math.expm1((v - i * d.rs_ohm) / nvt) > i:
            lo = i
        else:
            hi = i
    return 1.0 / (d.rs_ohm + nvt / (0.5 * (lo + hi) + d.is_a))


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

    op = None
    if any(isinstance(el, (JfetX, DiodeX)) for el in net.elements):
        from partpick.physics.transient import operating_point

        op = {**operating_point(net), "0": 0.0}
    for el in net.elements:
        if isinstance(el, JfetX):
            gds, gm, ggs, ggd = _jfet_conductances(el, op[el.d], op[el.g], op[el.s], net.temp_k)
            stamp(el.g, el.s, _exact(ggs) + p * k * _exact(el.jfet.cgs_f))
            stamp(el.g, el.d, _exact(ggd) + p * k * _exact(el.jfet.cgd_f))
            stamp(el.d, el.s, _exact(gds))
            # transconductance: gm (vg - vs) from drain to source
            idd, ig, isrc = v(el.d), v(el.g), v(el.s)
            for row, sign in ((idd, 1), (isrc, -1)):
                if row is None:
                    continue
                if ig is not None:
                    M[row, ig] += sign * _exact(gm)
                if isrc is not None:
                    M[row, isrc] -= sign * _exact(gm)
            continue
        if isinstance(el, DiodeX):
            stamp(el.a, el.k, _exact(_diode_conductance(el, op[el.a], op[el.k], net.temp_k)) + p * k * _exact(el.cap_f))
            continue
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
    if n > _SYMBOLIC_MAX:
        # M(s) = G + s C entry by entry: det M = 0 is the generalized eigenproblem
        # G x = -s C x (QZ, scipy), finite eigenvalues only
        from scipy.linalg import eigvals

        g = np.array(M.subs(S, 0), dtype=float)
        c = np.array(M.diff(S), dtype=float)
        lam = eigvals(g, -c)
        return lam[np.isfinite(lam)] * scale
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
