"""Transient simulation of a :class:`~partpick.physics.netlist.Netlist`.

Formulation: modified nodal analysis. The unknowns are the voltage of every node
other than ground, the branch current of every voltage source and, for every op-amp,
its integrator node x and (when the op-amp has a second pole) the node y after that
pole. The circuit is the differential-algebraic system

    d(C z + q(z))/dt + G z + f(z) = s(t)

with C the (constant) capacitance matrix, q the limiters' junction charges, G the
conductances and the source constraints, f the nonlinear element currents and s the
sources. Every row is a
current balance (sum of currents leaving the node), except the voltage-source rows,
which state v_a - v_b = V. The op-amp macro-model is the one of
:mod:`partpick.physics.opamp` (and of the SPICE export): current into x,
imax tanh(gm (v_inp - v_inn) / imax); C1 and R1 from x to ground; the clamp current
out of x, gclamp (v_x - clip(v_x, v_vee + head_low, v_vcc - head_high)) (stamped,
like the SPICE card, as the sum of the two one-sided excesses, which is the same
whenever the clip range is not empty); the second
pole y' = 2 pi f2 (x - y), written as the scaled balance
(gm / (2 pi f2)) y' + gm (y - x) = 0; and the output current into ``out``,
ilim tanh((v_y - v_out) / (ro ilim)). A limiter pair carries table.current(v_a - v_b)
from a to b (:func:`partpick.physics.junction.limiter_table` without series resistance; a
series resistor is its own Resistor) and its charge q(v) across it (charge-based:
the BDF formula differentiates q, so the charge the integration moves is conserved
whatever the step). Two opposed Zeners are two such elements, each Zener's own
table, with the node between them an unknown. A JFET carries the SPICE level-1
channel current and its two gate junctions (:mod:`partpick.physics.jfet`) with its
gate capacitances (constant); a diode its junction current (series resistance
included) with its capacitance (constant). A Kick is a rectangular current
pulse from ground into its node; it enters each step as its mean over the step, so the
delivered charge is exact whatever the step size. A conductance GMIN = 1e-12 S from
every node to ground (as SPICE adds) keeps capacitor-only nodes defined at DC.

Integration: fixed-step BDF2 (Gear's second-order backward differentiation formula,
Gear 1971; the first step backward Euler), h = 1 / (f_hint points_per_cycle), solving
the implicit equations of each step by Newton's method with the analytic Jacobian
(conductances plus the derivatives of the nonlinear currents). BDF2 rather than the
trapezoidal rule because it is L-stable: the algebraic nodes (no capacitor) and the
very fast op-amp loop, whose time constants are far below h, are damped to their
quasi-static values instead of ringing from step to step as they do under the
trapezoidal rule. When Newton fails in a step, that interval is split in two
(variable-step BDF2 coefficients), recursively, down to h / 2**12; beyond that a
RuntimeError names the time.

The start is the DC operating point (capacitors open, kick off): Newton on
G z + f(z) = s, falling back to gmin stepping and then source stepping.
"""

from __future__ import annotations

import math
from bisect import bisect_right
from dataclasses import dataclass, field

import numpy as np
from scipy.linalg import lapack

from partpick.physics.jfet import channel, gate_junction, jfet_at
from partpick.physics.junction import LimiterTable, junctions_at, limiter_table
from partpick.physics.netlist import Capacitor, DiodeX, JfetX, Kick, LimiterX, Netlist, OpAmpX, Resistor, VSource
from partpick.physics.opamp import macro_params
from partpick.physics.waveform import EnvelopeWatch, WaveformStats, analyse

__all__ = ["TransientResult", "simulate", "operating_point", "GMIN_S"]

GMIN_S = 1e-12          # S, from every node to ground
_VNTOL = 1e-6           # V, Newton absolute tolerance on voltages
_ABSTOL = 1e-9          # A, on voltage-source branch currents
_RELTOL = 1e-6          # relative tolerance of both
_MAX_DV = 2.0           # V, largest Newton update of a voltage per iteration
_MAX_ITER = 30          # Newton iterations per transient step
_MAX_ITER_DC = 200
_MAX_SPLIT = 12         # step halvings before giving up
_MAX_RATIO = 2.0        # BDF2 step ratio limit (zero-stable below 1 + sqrt 2); beyond: restart


@dataclass(frozen=True, slots=True, eq=False)
class TransientResult:
    """Samples of a transient run: t_s (s, from 0, the operating point, in steps of
    h), v (probe name -> node voltage, V, same length); steps_split: how many steps
    needed halving for Newton to converge; newton_iterations: total iterations."""

    t_s: np.ndarray
    v: dict
    steps_split: int = 0
    newton_iterations: int = 0
    meta: dict = field(default_factory=dict)

    def stats(self, probe: str = "osc", cycles: int = 20) -> WaveformStats | None:
        """:func:`partpick.physics.waveform.analyse` of the last ``cycles`` cycles at ``probe``."""
        return analyse(self.t_s, self.v[probe], cycles=cycles)


class _Curve:
    """Scalar, allocation-free evaluation of one tabulated function y(v) with its
    derivative d (the same values as LimiterTable's ``current`` and ``conductance``,
    or ``charge`` and ``capacitance``): linear interpolation by bisection, y linear
    beyond the ends."""

    __slots__ = ("v", "y", "slope", "d_end_lo", "d_end_hi", "d", "dslope")

    def __init__(self, v: np.ndarray, y: np.ndarray, d: np.ndarray) -> None:
        v, y, d = (np.asarray(x, dtype=float) for x in (v, y, d))
        self.v = v.tolist()
        self.y = y.tolist()
        self.slope = (np.diff(y) / np.diff(v)).tolist()
        self.d_end_lo = float(d[0])
        self.d_end_hi = float(d[-1])
        self.d = d.tolist()
        self.dslope = (np.diff(d) / np.diff(v)).tolist()

    def value(self, x: float) -> float:
        v = self.v
        if x >= v[-1]:
            return self.y[-1] + self.d_end_hi * (x - v[-1])
        if x <= v[0]:
            return self.y[0] + self.d_end_lo * (x - v[0])
        k = bisect_right(v, x) - 1
        return self.y[k] + self.slope[k] * (x - v[k])

    def derivative(self, x: float) -> float:
        v = self.v
        if x >= v[-1]:
            return self.d_end_hi
        if x <= v[0]:
            return self.d_end_lo
        k = bisect_right(v, x) - 1
        return self.d[k] + self.dslope[k] * (x - v[k])


def _middle(name: str) -> str:
    """The internal node between the two Zeners of limiter ``name``."""
    return name + ":m"


def _curves(tab: LimiterTable) -> tuple[_Curve, _Curve | None]:
    """The current curve and (when the pair stores charge) the charge curve of a table."""
    charge = _Curve(tab.v_v, tab.q_c, tab.c_f) if tab.has_charge else None
    return _Curve(tab.v_v, tab.i_a, tab.g_s), charge


class _System:
    """The MNA matrices and nonlinear element lists of one netlist. Index ``n`` (one
    past the last unknown) stands for ground: vectors and matrices carry one extra
    entry there, which stays zero / is never solved for."""

    def __init__(self, net: Netlist) -> None:
        tables = {el.name: limiter_table(el.limiter, series_ohm=0.0, temp_k=net.temp_k)
                  for el in net.elements if isinstance(el, LimiterX)}
        # two Zeners in series: the node between them is an unknown of its own
        nodes = list(net.nodes()) + [_middle(name) for name, tab in tables.items() if tab.element is not None]
        self.node_index = {name: k for k, name in enumerate(nodes)}
        n_nodes = len(nodes)
        vsrcs = [e for e in net.elements if isinstance(e, VSource)]
        ops = [e for e in net.elements if isinstance(e, OpAmpX)]
        n = n_nodes + len(vsrcs)
        op_idx = []
        for op in ops:
            mp = macro_params(op.opamp)
            ix = n
            n += 1
            if mp.pole2_hz is not None:
                iy = n
                n += 1
            else:
                iy = ix
            op_idx.append((op, mp, ix, iy))
        self.n = n
        gnd = n
        idx = lambda name: gnd if name == "0" else self.node_index[name]  # noqa: E731

        G = np.zeros((n + 1, n + 1))
        C = np.zeros((n + 1, n + 1))
        s = np.zeros(n + 1)
        is_voltage = np.ones(n, dtype=bool)

        def stamp2(M, a, b, val):
            M[a, a] += val
            M[b, b] += val
            M[a, b] -= val
            M[b, a] -= val

        for k in range(n_nodes):
            G[k, k] += GMIN_S
        self.kicks: list[tuple[int, float, float, float]] = []   # node, A, start, end
        self.limiters: list[tuple[int, int, _Curve]] = []
        self.charges: list[tuple[int, int, _Curve]] = []
        self.jfets: list[tuple] = []      # (drain, gate, source, parameters)
        self.diodes: list[tuple] = []     # (anode, cathode, junction)
        self.ops: list[tuple] = []
        self.op_names: dict[str, int] = {}
        krow = n_nodes
        for el in net.elements:
            if isinstance(el, Resistor):
                if not el.ohm > 0:
                    raise ValueError(f"{el.name}: resistance must be > 0")
                stamp2(G, idx(el.a), idx(el.b), 1.0 / el.ohm)
            elif isinstance(el, Capacitor):
                stamp2(C, idx(el.a), idx(el.b), el.farad)
            elif isinstance(el, VSource):
                a, b = idx(el.a), idx(el.b)
                G[a, krow] += 1.0
                G[b, krow] -= 1.0
                G[krow, a] += 1.0
                G[krow, b] -= 1.0
                s[krow] = el.volt
                is_voltage[krow] = False
                krow += 1
            elif isinstance(el, Kick):
                self.kicks.append((idx(el.node), el.amps, el.start_s, el.start_s + el.width_s))
            elif isinstance(el, LimiterX):
                a, b = idx(el.a), idx(el.b)
                tab = tables[el.name]
                if tab.element is None:
                    pairs = [(a, b)]
                else:   # each Zener from the middle node (its anode) to one terminal
                    tab, m = tab.element, idx(_middle(el.name))
                    pairs = [(m, a), (m, b)]
                cur, charge = _curves(tab)
                for x, y in pairs:
                    self.limiters.append((x, y, cur))
                    if charge is not None:
                        self.charges.append((x, y, charge))
            elif isinstance(el, OpAmpX):
                pass
            elif isinstance(el, JfetX):
                d, g, so = idx(el.d), idx(el.g), idx(el.s)
                stamp2(C, g, so, el.jfet.cgs_f)
                stamp2(C, g, d, el.jfet.cgd_f)
                self.jfets.append((d, g, so, jfet_at(el.jfet, net.temp_k)))
            elif isinstance(el, DiodeX):
                a, k = idx(el.a), idx(el.k)
                stamp2(C, a, k, el.cap_f)
                self.diodes.append((a, k, junctions_at(el.diode, net.temp_k)[0]))
            else:
                raise TypeError(f"transient: unsupported element {type(el).__name__}")
        for op, mp, ix, iy in op_idx:
            C[ix, ix] += mp.c1_f
            G[ix, ix] += 1.0 / mp.r1_ohm
            if iy != ix:
                C[iy, iy] += mp.gm_s / (2 * math.pi * mp.pole2_hz)
                G[iy, iy] += mp.gm_s
                G[iy, ix] -= mp.gm_s
            self.op_names[op.name] = len(self.ops)
            self.ops.append((idx(op.inp), idx(op.inn), idx(op.out), idx(op.vcc), idx(op.vee), ix, iy,
                             mp.gm_s / mp.imax_a, mp.imax_a, mp.gm_s, mp.gclamp_s, mp.head_high_v,
                             mp.head_low_v, 1.0 / (mp.ro_ohm * mp.ilim_a), mp.ilim_a, 1.0 / mp.ro_ohm))
        # ground row/column: zero
        G[gnd, :] = 0.0
        G[:, gnd] = 0.0
        C[gnd, :] = 0.0
        C[:, gnd] = 0.0
        self.G, self.C, self.s = G, C, s
        self.is_voltage = is_voltage
        self.atol = np.where(is_voltage, _VNTOL, _ABSTOL)
        self.breakpoints = sorted({t for _, _, b, e in self.kicks for t in (b, e)})

    # --- nonlinear currents ------------------------------------------------------------
    def stamp(self, z: np.ndarray, F: np.ndarray, J: np.ndarray | None) -> None:
        """Add the nonlinear currents at z to F and (when J is given) their derivatives."""
        zl = z.tolist()
        tanh = math.tanh
        for (ip, inn, io, ivcc, ivee, ix, iy, k_in, imax, gm, gcl, hh, hl, k_out, ilim, g_out) in self.ops:
            th = tanh(k_in * (zl[ip] - zl[inn]))
            F[ix] -= imax * th
            vx = zl[ix]
            hi = zl[ivcc] - hh
            lo = zl[ivee] + hl
            th2 = tanh(k_out * (zl[iy] - zl[io]))
            F[io] -= ilim * th2
            # the clamp as the sum of its two one-sided excesses, as the SPICE export
            # writes it: equal to vx - clip(vx, lo, hi) whenever lo <= hi
            if vx > hi:
                F[ix] += gcl * (vx - hi)
            if vx < lo:
                F[ix] += gcl * (vx - lo)
            if J is not None:
                d = gm * (1.0 - th * th)
                J[ix, ip] -= d
                J[ix, inn] += d
                if vx > hi:
                    J[ix, ix] += gcl
                    J[ix, ivcc] -= gcl
                if vx < lo:
                    J[ix, ix] += gcl
                    J[ix, ivee] -= gcl
                d2 = g_out * (1.0 - th2 * th2)
                J[io, iy] -= d2
                J[io, io] += d2
        for a, b, cur in self.limiters:
            vd = zl[a] - zl[b]
            i = cur.value(vd)
            F[a] += i
            F[b] -= i
            if J is not None:
                g = cur.derivative(vd)
                J[a, a] += g
                J[b, b] += g
                J[a, b] -= g
                J[b, a] -= g

        for d, g, so, p in self.jfets:
            _stamp_jfet(F, J, zl, d, g, so, p)
        for a, k, jn in self.diodes:
            vd = zl[a] - zl[k]
            i = float(jn.current(vd))
            F[a] += i
            F[k] -= i
            if J is not None:
                gd = (i + jn.is_a) / (jn.n * jn.vt)
                g = gd / (1.0 + gd * jn.rs_ohm)
                J[a, a] += g
                J[k, k] += g
                J[a, k] -= g
                J[k, a] -= g

    def charge_history(self, a1: float, a2: float, zc: np.ndarray, zp: np.ndarray | None) -> list[float]:
        """Per charged limiter, a1 q(zc) + a2 q(zp): the past steps' part of the BDF
        derivative of its charge (C/s)."""
        out = []
        for a, b, q in self.charges:
            h = a1 * q.value(zc[a] - zc[b])
            if zp is not None and a2 != 0.0:
                h += a2 * q.value(zp[a] - zp[b])
            out.append(h)
        return out

    def stamp_charge(self, z: np.ndarray, F: np.ndarray, J: np.ndarray, a0: float, hist: list[float]) -> None:
        """Add each limiter's charging current, the BDF derivative a0 q(z) + hist of its
        charge q(v) (charge-based, so the charge the integration moves is conserved),
        to F and a0 dq/dv to J."""
        for (a, b, q), h in zip(self.charges, hist):
            vd = z[a] - z[b]
            i = a0 * q.value(vd) + h
            F[a] += i
            F[b] -= i
            c = a0 * q.derivative(vd)
            J[a, a] += c
            J[b, b] += c
            J[a, b] -= c
            J[b, a] -= c

    def kick_source(self, t0: float, t1: float) -> np.ndarray:
        """The source vector averaged over (t0, t1]."""
        s = self.s
        eps = 1e-9 * (t1 - t0)
        hit = [(k, a * (min(t1, e) - max(t0, b))) for k, a, b, e in self.kicks
               if min(t1, e) - max(t0, b) > eps]
        if not hit:
            return s
        s = s.copy()
        for k, q in hit:
            s[k] += q / (t1 - t0)
        return s

    def converged(self, dz: np.ndarray, z: np.ndarray) -> bool:
        return bool(np.all(np.abs(dz) <= self.atol + _RELTOL * np.abs(z[:self.n])))

    def limit(self, dz: np.ndarray) -> np.ndarray:
        m = float(np.max(np.abs(dz[self.is_voltage]))) if self.n else 0.0
        if m > _MAX_DV:
            dz = dz * (_MAX_DV / m)
        return dz


def _stamp_jfet(F, J, zl, d: int, g: int, so: int, p) -> None:
    """Channel current drain to source and the gate junctions gate-source and
    gate-drain of one JFET, with their derivatives."""
    vds, vgs = zl[d] - zl[so], zl[g] - zl[so]
    i, gds, gm = (float(x) for x in channel(p, vds, vgs))
    (igs, igd), (ggs, ggd) = (x.tolist() for x in gate_junction(p, np.array([vgs, vgs - vds])))
    F[d] += i - igd
    F[so] -= i + igs
    F[g] += igs + igd
    if J is None:
        return
    # channel: dI/dVd = gds, dI/dVg = gm, dI/dVs = -(gds + gm)
    for row, sign in ((d, 1.0), (so, -1.0)):
        J[row, d] += sign * gds
        J[row, g] += sign * gm
        J[row, so] -= sign * (gds + gm)
    for a, b, gj in ((g, so, ggs), (g, d, ggd)):
        J[a, a] += gj
        J[b, b] += gj
        J[a, b] -= gj
        J[b, a] -= gj


# --- DC operating point ------------------------------------------------------------------
def _newton_dc(sysm: _System, z: np.ndarray, s: np.ndarray, gshunt: float) -> tuple[np.ndarray, bool]:
    n = sysm.n
    G = sysm.G.copy()
    if gshunt:
        diag = np.flatnonzero(sysm.is_voltage)
        G[diag, diag] += gshunt
    z = z.copy()
    for _ in range(_MAX_ITER_DC):
        J = G.copy()
        F = G @ z - s
        sysm.stamp(z, F, J)
        try:
            dz = np.linalg.solve(J[:n, :n], -F[:n])
        except np.linalg.LinAlgError:
            return z, False
        if not np.all(np.isfinite(dz)):
            return z, False
        dz = sysm.limit(dz)
        z[:n] += dz
        if sysm.converged(dz, z):
            return z, True
    return z, False


def _operating_point(sysm: _System) -> np.ndarray:
    z0 = np.zeros(sysm.n + 1)
    s = sysm.s
    z, ok = _newton_dc(sysm, z0, s, 0.0)
    if ok:
        return z
    # gmin stepping: a shunt conductance on every node, reduced by decades
    z = z0
    ok = True
    for g in [10.0 ** -k for k in range(2, 13)] + [0.0]:
        z, ok = _newton_dc(sysm, z, s, g)
        if not ok:
            break
    if ok:
        return z
    # source stepping: all supplies ramped up from 10 %
    z = z0
    for lam in np.linspace(0.1, 1.0, 10):
        z, ok = _newton_dc(sysm, z, s * lam, 0.0)
        if not ok:
            raise RuntimeError(f"transient: no DC operating point (source stepping failed at {lam:.0%})")
    return z


def operating_point(netlist: Netlist) -> dict[str, float]:
    """DC node voltages (V) of the netlist: capacitors open, kick off."""
    sysm = _System(netlist)
    z = _operating_point(sysm)
    return {name: float(z[k]) for name, k in sysm.node_index.items()}


# --- transient ---------------------------------------------------------------------------
def simulate(netlist: Netlist, *, cycles: float, points_per_cycle: int = 200,
             record: tuple[str, ...] = ("osc", "load"), settled: float | None = None,
             tail_cycles: int = 20) -> TransientResult:
    """Integrate the netlist from its DC operating point for cycles / f_hint seconds.

    record: probe names of ``netlist.probes`` (or node names) whose voltages to keep,
    ``x:NAME`` for op-amp NAME's node x (V, the node its output clamp holds), ``iout:NAME``
    for its output current (A, into the output node).
    Steps of h = 1 / (f_hint points_per_cycle); BDF2 with Newton at each step.

    settled: a fraction: the run ends ``tail_cycles`` after the first probe's envelope
    has settled to it (:class:`partpick.physics.waveform.EnvelopeWatch`); an envelope
    still growing or decaying never ends it early.
    """
    if not (cycles > 0 and points_per_cycle >= 4 and netlist.f_hint_hz > 0):
        raise ValueError(f"transient: cycles > 0, points_per_cycle >= 4 and netlist.f_hint_hz > 0 needed (got "
                         f"{cycles}, {points_per_cycle}, {netlist.f_hint_hz})")
    sysm = _System(netlist)
    n = sysm.n
    probe_idx: dict[str, int | None] = {}
    currents: list[tuple[str, tuple]] = []
    for name in record:
        kind, _, op_name = name.partition(":")
        if kind in ("iout", "x") and op_name:
            if op_name not in sysm.op_names:
                raise ValueError(f"transient: unknown op-amp {op_name!r}")
            if kind == "x":   # (a node of its own: recorded as the probes are)
                probe_idx[name] = sysm.ops[sysm.op_names[op_name]][5]
            else:
                currents.append((name, sysm.ops[sysm.op_names[op_name]]))
            continue
        node = netlist.probes.get(name, name)
        if node == "0":
            probe_idx[name] = None
        elif node in sysm.node_index:
            probe_idx[name] = sysm.node_index[node]
        else:
            raise ValueError(f"transient: unknown probe or node {name!r}")

    h = 1.0 / (netlist.f_hint_hz * points_per_cycle)
    steps = int(math.ceil(cycles * points_per_cycle - 1e-9))
    t = np.arange(steps + 1) * h
    rec = {name: np.zeros(steps + 1) for name in record}

    G, C = sysm.G, sysm.C
    cache: dict[tuple[float, float], tuple[np.ndarray, float, float, float]] = {}

    def coeffs(hc: float, hp: float | None):
        if hp is not None and hc > _MAX_RATIO * hp:
            hp = None
        key = (hc, hp or 0.0)
        got = cache.get(key)
        if got is None:
            if hp is None:       # backward Euler (start, restart, or a step > 2x the last)
                a0, a1, a2 = 1.0 / hc, -1.0 / hc, 0.0
            else:                # variable-step BDF2, w = hc / hp
                w = hc / hp
                a0 = (1 + 2 * w) / ((1 + w) * hc)
                a1 = -(1 + w) / hc
                a2 = w * w / ((1 + w) * hc)
            got = (a0 * C + G, a0, a1, a2)
            if len(cache) < 64:
                cache[key] = got
        return got

    stats = {"iters": 0, "split": 0}
    dgesv = lapack.dgesv
    stamp = sysm.stamp
    atol = sysm.atol

    def newton(zp: np.ndarray | None, zc: np.ndarray, hp: float | None, t0: float, hc: float):
        """One step t0 -> t0 + hc from zc (zp the point before, hp that step)."""
        A, a0, a1, a2 = coeffs(hc, hp)
        hist = a1 * zc if zp is None or a2 == 0.0 else a1 * zc + a2 * zp
        ch = C @ hist - sysm.kick_source(t0, t0 + hc)
        qhist = sysm.charge_history(a1, a2, zc, zp) if sysm.charges else None
        if zp is None or hp is None or hc > _MAX_RATIO * hp:
            z = zc.copy()
        else:
            z = zc + (hc / hp) * (zc - zp)
        tol = atol + _RELTOL * np.abs(zc[:n])
        for _ in range(_MAX_ITER):
            stats["iters"] += 1
            J = A.copy()
            F = A @ z + ch
            stamp(z, F, J)
            if qhist is not None:
                sysm.stamp_charge(z, F, J, a0, qhist)
            _, _, dz, info = dgesv(J[:n, :n], -F[:n])
            if info != 0:
                return None
            m = np.abs(dz)
            big = float(m.max())
            if not math.isfinite(big):
                return None
            if big > _MAX_DV:
                dz *= _MAX_DV / big
                z[:n] += dz
                continue
            z[:n] += dz
            if float((m - tol).max()) <= 0.0:
                return z
        return None

    def advance(zp, zc, hp, t0, hc, depth):
        """Advance t0 -> t0 + hc, splitting on failure; returns (z_prev, z_new, h_last)."""
        if hp is None:
            zp = None
        z = newton(zp, zc, hp, t0, hc)
        if z is not None:
            return zc, z, hc
        if depth >= _MAX_SPLIT:
            raise RuntimeError(f"transient: Newton failed to converge at t = {t0:.9g} s "
                               f"(step {hc:.3g} s after {depth} halvings)")
        stats["split"] += 1
        half = 0.5 * hc
        zp, zc, hp = advance(zp, zc, hp, t0, half, depth + 1)
        return advance(zp, zc, hp, t0 + half, half, depth + 1)

    zc, zp, hp = _operating_point(sysm), None, None
    rec_items = [(rec[name], k) for name, k in probe_idx.items() if k is not None]   # (ground's stay 0)
    # output current of an op-amp: ilim tanh((v_y - v_out) / (Ro ilim)), as stamped
    cur_items = [(rec[name], op[2], op[6], op[13], op[14]) for name, op in currents]

    def keep(step: int, z: np.ndarray) -> None:
        for arr, k in rec_items:
            arr[step] = z[k]
        for arr, io, iy, k_out, ilim in cur_items:
            arr[step] = ilim * math.tanh(k_out * (z[iy] - z[io]))

    keep(0, zc)
    bps = [b for b in sysm.breakpoints if 0.0 <= b < t[-1]]
    snap = 1e-3 * h
    end, first = steps, probe_idx.get(record[0])   # (the probe the envelope is watched at: a node, not ground)
    watch = EnvelopeWatch(rec[record[0]], points_per_cycle, settled) if settled and first is not None else None
    for step in range(steps):
        if step == end:
            break
        if watch is not None and step and step % points_per_cycle == 0 and watch.settled(step):
            end, watch = min(steps, step + tail_cycles * points_per_cycle), None
        t0, t1 = t[step], t[step + 1]
        inner = [b for b in bps if t0 + snap < b < t1 - snap] if bps else []
        for b in inner:              # a source edge inside the step: step to it, restart
            zp, zc, hp = advance(zp, zc, hp, t0, b - t0, 0)
            zp, hp, t0 = None, None, b
        # the regular step is exactly h (so its matrix is cached); t1 - t0 after a split
        zp, zc, hp = advance(zp, zc, hp, t0, t1 - t0 if inner else h, 0)
        if bps and any(abs(b - t1) <= snap for b in bps):
            zp, hp = None, None      # a source edge at the step end: restart with backward Euler
        keep(step + 1, zc)
    t, rec = (t[:end + 1], {name: arr[:end + 1] for name, arr in rec.items()}) if end < steps else (t, rec)
    return TransientResult(t_s=t, v=rec, steps_split=stats["split"], newton_iterations=stats["iters"],
                           meta={"h_s": h, "steps": end, "unknowns": n, "settled_early": end < steps})
