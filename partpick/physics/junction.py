"""Junction physics for limiter elements (diodes, LEDs, Zener pairs).

Shockley diode equation I = Is (exp(V / (n Vt)) - 1) with Vt = k T / q (CODATA
constants via scipy.constants) and the SPICE temperature law for the saturation
current, Is(T) = Is(T0) (T/T0)^(xti/n) exp((T/T0 - 1) Eg / (n k T)), as used by
Berkeley SPICE and ngspice (ngspice manual, diode model, "Temperature effects").
A series resistance Rs is solved exactly with the Lambert W function (Wright omega
form, so large arguments do not overflow): I = (n Vt / Rs) W(Is Rs/(n Vt)
exp((V + Is Rs)/(n Vt))) - Is.

A Zener's breakdown is modelled as a second, reverse junction with saturation current
Iz exp(-Vz/(nz Vt)) and emission nz = rz Iz / Vt, so it carries Iz at Vz with dynamic
resistance rz there (a soft knee, as low-voltage Zeners have). The catalog's junction
parameters hold at T0 = 25 degC.

Charge (SPICE's diode model, ngspice manual "Junction Diodes", as ngspice's
``dioload.c`` evaluates it), at the junction's own voltage vd (inside Rs):
depletion charge VJ CJO (1 - (1 - vd/VJ)^(1-M)) / (1 - M), capacitance
CJO (1 - vd/VJ)^-M, below FC VJ; above it the capacitance is continued linearly,
CJO / (1 - FC)^(1+M) (1 - FC (1 + M) + M vd / VJ), and the charge is its integral;
plus the diffusion charge TT I. CJO and VJ follow SPICE's temperature law (ngspice
``diotemp.c``, the default TLEVC = 0: the junction potential from the silicon bandgap
law Eg(T) = 1.16 - 7.02e-4 T^2 / (T + 1108) eV, the capacitance with it and with
400 ppm/K), with the catalog's values at T0. The breakdown junction of a Zener carries
no charge of its own: the forward junction's depletion charge, evaluated at the
reverse voltage, is the capacitance of the reverse-biased junction (depletion only;
breakdown current stores no diffusion charge).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from functools import lru_cache

import numpy as np

from partpick.catalog import Limiter

__all__ = ["T0_K", "thermal_voltage", "wright_omega", "Junction", "junctions_at", "LimiterTable", "limiter_table",
           "forward_voltage", "depletion_at"]

T0_K = 298.15
# SPICE's reference temperature and the silicon bandgap there (eV), as ngspice's
# junction-potential law hard-codes them (REFTEMP, 1.1150877 in diotemp.c).
_TREF_K = 300.15
_EG_REF_EV = 1.1150877


# Boltzmann constant (J/K) and elementary charge (C): exact in the 2019 SI (CODATA 2018).
_K_B = 1.380649e-23
_Q_E = 1.602176634e-19
RS_NEGLIGIBLE = 1e-6   # ohm: a series resistance below this drops a microvolt at an ampere: none


def thermal_voltage(temp_k: float) -> float:
    """Vt = k T / q, V (CODATA 2018 exact constants)."""
    return _K_B * temp_k / _Q_E


def wright_omega(z: np.ndarray) -> np.ndarray:
    """The Wright omega function for real z: the w with w + ln w = z (Corless and
    Jeffrey, "The Wright omega function", 2002). Start from ln(1 + e^z), then the
    fourth-order iteration of Fritsch, Shafer and Crowley (CACM 16, 1973) that the
    paper recommends; three steps reach double precision. Checked against
    scipy.special.wrightomega in tests/test_junction.py."""
    z = np.asarray(z, dtype=float)
    tiny = z < -30.0            # there w = e^z (1 - e^z + ...) = e^z to double precision
    zz = np.where(tiny, 0.0, z)
    w = np.where(zz > 30.0, zz - np.log(np.maximum(zz, 1.0)), np.log1p(np.exp(np.minimum(zz, 30.0))))
    for _ in range(4):
        r = zz - w - np.log(w)
        wp1 = 1.0 + w
        t = wp1 * (wp1 + 2.0 * r / 3.0)
        w = w * (1.0 + r / wp1 * (t - 0.5 * r) / (t - r))
    return np.where(tiny, np.exp(np.clip(z, -745.0, -30.0)), w)


@dataclass(frozen=True, slots=True)
class Junction:
    """One junction at a fixed temperature: is_a (A), n, rs_ohm (ohm), vt (V), and its
    charge: cjo_f (F), vj_v (V), m, fc, tt_s (s), SPICE's CJO, VJ, M, FC, TT already
    at that temperature (see module docstring)."""

    is_a: float
    n: float
    rs_ohm: float
    vt: float
    cjo_f: float = 0.0
    vj_v: float = 1.0
    m: float = 0.5
    fc: float = 0.5
    tt_s: float = 0.0

    def depletion(self, vd: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Depletion charge (C) and capacitance (F) at junction voltage vd (V), SPICE's
        law with the linear continuation above fc vj_v."""
        vd = np.asarray(vd, dtype=float)
        if self.cjo_f == 0.0:
            return np.zeros_like(vd), np.zeros_like(vd)
        cjo, vj, m, fc = self.cjo_f, self.vj_v, self.m, self.fc
        vfc = fc * vj
        low = np.minimum(vd, vfc)
        arg = 1.0 - low / vj
        sarg = arg ** -m
        q = vj * cjo * (1.0 - arg * sarg) / (1.0 - m)
        c = cjo * sarg
        hi = vd > vfc
        if np.any(hi):
            f1 = vj * (1.0 - (1.0 - fc) ** (1.0 - m)) / (1.0 - m)
            czof2 = cjo / (1.0 - fc) ** (1.0 + m)
            f3 = 1.0 - fc * (1.0 + m)
            q_hi = cjo * f1 + czof2 * (f3 * (vd - vfc) + m / (2 * vj) * (vd * vd - vfc * vfc))
            q = np.where(hi, q_hi, q)
            c = np.where(hi, czof2 * (f3 + m * vd / vj), c)
        return q, c

    def charge(self, v: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Charge (C) stored in the junction at terminal voltage v (V) and its derivative
        dq/dv (F): depletion at the junction's own voltage v - I Rs plus TT I, taken
        quasi-statically (the charging current's drop across Rs neglected: Rs C is
        nanoseconds against the oscillation's period)."""
        v = np.asarray(v, dtype=float)
        i = self.current(v)
        g = _dI(self, v)
        qd, cd = self.depletion(v - i * self.rs_ohm)
        return qd + self.tt_s * i, cd * (1.0 - self.rs_ohm * g) + self.tt_s * g

    def current(self, v: np.ndarray, omega=wright_omega) -> np.ndarray:
        """Current through the junction plus its series resistance at terminal voltage v (V), A.
        ``omega``: the Wright omega function used (scipy.special.wrightomega where scipy
        is loaded anyway: the same function, compiled)."""
        v = np.asarray(v, dtype=float)
        nvt = self.n * self.vt
        if self.rs_ohm < RS_NEGLIGIBLE:
            # the Wright-omega form's argument would underflow for a vanishing Rs, whose
            # drop is nothing anyway: the plain Shockley equation
            return self.is_a * np.expm1(np.minimum(v / nvt, 700.0))
        z = math.log(self.is_a * self.rs_ohm / nvt) + (v + self.is_a * self.rs_ohm) / nvt
        return nvt / self.rs_ohm * omega(z) - self.is_a

    def voltage(self, i: np.ndarray) -> np.ndarray:
        """Terminal voltage at current i (A, > -Is), V: n Vt ln(1 + i/Is) + i Rs."""
        i = np.asarray(i, dtype=float)
        return self.n * self.vt * np.log1p(i / self.is_a) + i * self.rs_ohm


def _is_at(is0: float, n: float, eg_j: float, xti: float, temp_k: float) -> float:
    ratio = temp_k / T0_K
    return is0 * ratio ** (xti / n) * math.exp((ratio - 1) * eg_j / (n * _K_B * temp_k))


def _pb_shift(temp_k: float) -> float:
    """SPICE's junction-potential temperature term at temp_k (K), V: Eg(T) - Eg(Tref)
    T/Tref - 3 Vt ln(T/Tref) (ngspice diotemp.c's pbfact, written out)."""
    eg = 1.16 - 7.02e-4 * temp_k * temp_k / (temp_k + 1108.0)
    ratio = temp_k / _TREF_K
    return eg - _EG_REF_EV * ratio - 3.0 * thermal_voltage(temp_k) * math.log(ratio)


def depletion_at(cjo_f: float, vj_v: float, m: float, fc: float, temp_k: float,
                 tnom_k: float = T0_K) -> tuple[float, float]:
    """(CJO, VJ) at temp_k (K) from their values at tnom_k (K): SPICE's temperature law
    (ngspice diotemp.c, TLEVC = 0), including its limit VJ <= 1/FC."""
    pbo = (vj_v - _pb_shift(tnom_k)) / (tnom_k / _TREF_K)
    gma_old = (vj_v - pbo) / pbo
    vj_t = _pb_shift(temp_k) + temp_k / _TREF_K * pbo
    gma_new = (vj_t - pbo) / pbo
    cjo_t = (cjo_f * (1.0 + m * (400e-6 * (temp_k - _TREF_K) - gma_new))
             / (1.0 + m * (400e-6 * (tnom_k - _TREF_K) - gma_old)))
    if fc * vj_t > 1.0:
        vj_t = 1.0 / fc
    return cjo_t, vj_t


def junctions_at(lim: Limiter, temp_k: float) -> tuple[Junction, Junction | None]:
    """The forward junction, with its charge, and (Zener pairs only) the breakdown
    junction, which carries none, at temp_k (K)."""
    vt = thermal_voltage(temp_k)
    cjo, vj = depletion_at(lim.cjo_f, lim.vj_v, lim.m, lim.fc, temp_k)
    fwd = Junction(_is_at(lim.is_a, lim.n, lim.eg_j, lim.xti, temp_k), lim.n, lim.rs_ohm, vt,
                   cjo, vj, lim.m, lim.fc, lim.tt_s)
    if lim.kind != "zener-pair":
        return fwd, None
    vz = lim.vz_v + lim.vz_tempco_v_per_k * (temp_k - T0_K)
    nz = max(lim.rz_ohm * lim.iz_a / vt, 1.0)
    brk = Junction(lim.iz_a * math.exp(-vz / (nz * vt)), nz, lim.rs_ohm, vt, 0.0, 1.0, lim.m, lim.fc, 0.0)
    return fwd, brk


@dataclass(frozen=True, slots=True)
class LimiterTable:
    """A tabulated characteristic on the voltage grid v_v (V, ascending): current i_a
    (A), g_s = di/dv (S), stored charge q_c (C) and c_f = dq/dv (F); linear beyond the
    table's ends.

    For a limiter branch (:func:`limiter_table`) it is odd-symmetric: the limiter pair
    in series with series_ohm (ohm), the charge the pair's. Two opposed Zeners in
    series also give ``element``, the table of one Zener (forward direction positive,
    not symmetric), and ``split_v``, the voltage across the forward-conducting one of
    the two at each point of the grid when no charge moves (the pair's current then
    flows through both): a two-terminal i(v) and q(v) describe such a pair only
    quasi-statically, so the analyses that can take the node between the two do
    (:mod:`partpick.physics.harmonic`, :mod:`partpick.physics.transient`)."""

    v_v: np.ndarray
    i_a: np.ndarray
    g_s: np.ndarray
    series_ohm: float
    q_c: np.ndarray | None = None
    c_f: np.ndarray | None = None
    element: "LimiterTable | None" = None
    split_v: np.ndarray | None = None
    # the interpolants' segment slopes (current, charge), made once (every Newton step
    # of harmonic balance reads them), indexed by searchsorted's index m (0 below the
    # grid, n above it: the table's end slopes there), and the grid point each value is
    # carried from
    _i_ext: np.ndarray | None = field(default=None, init=False, compare=False, repr=False)
    _q_ext: np.ndarray | None = field(default=None, init=False, compare=False, repr=False)
    _anchor: np.ndarray | None = field(default=None, init=False, compare=False, repr=False)

    def __post_init__(self) -> None:
        dv = np.diff(self.v_v)
        with np.errstate(divide="ignore", invalid="ignore"):
            object.__setattr__(self, "_i_ext", np.concatenate([self.g_s[:1], np.diff(self.i_a) / dv, self.g_s[-1:]]))
            object.__setattr__(self, "_anchor", np.concatenate([[0], np.arange(self.v_v.size)]))
            if self.q_c is not None:
                object.__setattr__(self, "_q_ext", np.concatenate([self.c_f[:1], np.diff(self.q_c) / dv,
                                                                  self.c_f[-1:]]))

    def current(self, v: np.ndarray) -> np.ndarray:
        """Current at voltage v (V), A."""
        return _interp_linear_ends(v, self.v_v, self.i_a, self.g_s)

    def conductance(self, v: np.ndarray) -> np.ndarray:
        """di/dv at v (V), S."""
        return np.interp(v, self.v_v, self.g_s)

    def slope(self, v: np.ndarray) -> np.ndarray:
        """d current() / dv at v (V), S: the slope of the interpolant's segment (g_s
        beyond the ends). A Newton step on current() needs this one: conductance()
        interpolates the tabulated derivative, which parts from the segment's slope
        where the grid is coarse against the curve (on a 6 ohm Zener's knee enough
        that harmonic balance converged linearly, a tenth a step, not quadratically)."""
        return self._i_ext[np.searchsorted(self.v_v, v, side="right")]

    def charge_slope(self, v: np.ndarray) -> np.ndarray:
        """d charge() / dv at v (V), F (as slope() for the current)."""
        return self._q_ext[np.searchsorted(self.v_v, v, side="right")]

    def sample(self, v: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """(current(), slope(), charge(), charge_slope()) at v (V) of a table with
        charge: the four from one search of the grid (a Newton step of harmonic balance
        takes all four at the same points). The same numbers as the four calls:
        np.interp's own formula, seg[j] (v - v_j) + y_j, on the segment j holding v;
        beyond an end, the end's value carried on the end's slope."""
        m = np.searchsorted(self.v_v, v, side="right")    # the segment's index + 1
        a = self._anchor[m]
        d = v - self.v_v[a]
        g, c = self._i_ext[m], self._q_ext[m]
        return g * d + self.i_a[a], g, c * d + self.q_c[a], c

    @property
    def has_charge(self) -> bool:
        """Charge is stored (a capacitance anywhere on the table)."""
        return self.c_f is not None and bool(np.any(self.c_f > 0))

    def charge(self, v: np.ndarray) -> np.ndarray:
        """Stored charge at voltage v (V), C."""
        return _interp_linear_ends(v, self.v_v, self.q_c, self.c_f)

    def capacitance(self, v: np.ndarray) -> np.ndarray:
        """dq/dv at v (V), F."""
        return np.interp(v, self.v_v, self.c_f)


def _interp_linear_ends(v, xs, ys, gs):
    v = np.asarray(v, dtype=float)
    out = np.interp(v, xs, ys)
    hi, lo = v > xs[-1], v < xs[0]
    if np.any(hi):
        out = np.where(hi, ys[-1] + gs[-1] * (v - xs[-1]), out)
    if np.any(lo):
        out = np.where(lo, ys[0] + gs[0] * (v - xs[0]), out)
    return out


def _pair_voltage(lim: Limiter, temp_k: float, i: np.ndarray) -> np.ndarray:
    """Voltage across the limiter pair carrying current i >= 0 (A), V.

    Diode and LED pairs: two anti-parallel junctions, i = I(v) - I(-v). Zener pairs:
    two Zeners in series, opposed, so one conducts forward and the other in breakdown.
    """
    fwd, brk = junctions_at(lim, temp_k)
    if brk is None:
        return _solve_pair(fwd, i)
    # each Zener: forward junction anti-parallel with its breakdown junction;
    # the pair puts two of them in series, opposed.
    return _solve_zener_element(fwd, brk, i) - _solve_zener_element(fwd, brk, -i)


def _solve_pair(fwd: Junction, i: np.ndarray) -> np.ndarray:
    # i = I(v) - I(-v): start from the forward law and refine with Newton.
    v = fwd.voltage(i)
    for _ in range(30):
        f = fwd.current(v) - fwd.current(-v) - i
        g = _dI(fwd, v) + _dI(fwd, -v)
        step = f / g
        v = v - step
        if np.all(np.abs(step) < 1e-13):
            break
    return v


def _dI(j: Junction, v: np.ndarray) -> np.ndarray:
    """di/dv of a junction with series resistance at terminal voltage v, S."""
    i = j.current(v)
    gd = (i + j.is_a) / (j.n * j.vt)
    return gd / (1.0 + gd * j.rs_ohm)


def _solve_zener_element(fwd: Junction, brk: Junction, i: np.ndarray) -> np.ndarray:
    """Voltage v of one Zener (forward junction minus reverse breakdown junction in
    parallel) at current i (A): i = I_f(v) - I_b(-v); Newton from a bracketing guess."""
    v = np.where(i >= 0, fwd.voltage(np.maximum(i, 0.0)), -brk.voltage(np.maximum(-i, 0.0)))
    for _ in range(60):
        f = fwd.current(v) - brk.current(-v) - i
        g = _dI(fwd, v) + _dI(brk, -v)
        step = np.clip(f / g, -0.2, 0.2)
        v = v - step
        if np.all(np.abs(step) < 1e-13):
            break
    return v


# Table density: points per decade of current (the voltage then steps by n Vt ln(10) /
# 100, about 1 mV, along the exponential part), from a current low enough that the
# first point lies within about 1 mV of zero, so the charge's curvature at low voltage
# is tabulated too, up to 1 A.
_PER_DECADE = 100


@lru_cache(maxsize=256)
def _pair_table(lim: Limiter, temp_k: float) -> tuple:
    """The pair alone, i >= 0, on a log current grid to 1 A: (i, v, q, dq/dv) and, for
    Zener pairs, the element table and the voltage across the forward Zener.

    Diode and LED pairs: q(v) = q_j(v) - q_j(-v), the two anti-parallel junctions at the
    pair's voltage. Zener pairs: the two Zeners' capacitances in series, each at its
    own voltage where the pair carries i (one forward, one in breakdown), integrated
    over v (the quasi-static form; the element table holds the exact one)."""
    fwd, brk = junctions_at(lim, temp_k)
    g0 = _pair_conductance0(fwd, brk)
    lo = min(-12.0, math.floor(math.log10(max(1e-3 * g0, 1e-30))))
    i = np.concatenate([[0.0], np.logspace(lo, 0, int(round(-lo * _PER_DECADE)) + 1)])
    if brk is None:
        v = _solve_pair(fwd, i)
        qa, ca = fwd.charge(v)
        qb, cb = fwd.charge(-v)
        return i, v, qa - qb, ca + cb, None, None
    u_f = _solve_zener_element(fwd, brk, i)      # the Zener carrying i forward
    u_r = _solve_zener_element(fwd, brk, -i)     # the one carrying it in breakdown (u_r < 0)
    v = u_f - u_r
    q_f, c_fw = fwd.charge(u_f)
    q_r, c_rv = fwd.charge(u_r)
    c = np.divide(c_fw * c_rv, c_fw + c_rv, out=np.zeros_like(v), where=c_fw + c_rv > 0)
    q = np.concatenate([[0.0], np.cumsum(0.5 * (c[1:] + c[:-1]) * np.diff(v))])
    # one Zener over its whole range: breakdown side (u_r, current -i) then forward side
    u = np.concatenate([u_r[:0:-1], u_f])
    elem = LimiterTable(u, np.concatenate([-i[:0:-1], i]), _dI(fwd, u) + _dI(brk, -u), 0.0,
                        np.concatenate([q_r[:0:-1], q_f]), np.concatenate([c_rv[:0:-1], c_fw]))
    return i, v, q, c, elem, u_f


def _pair_conductance0(fwd: Junction, brk: Junction | None) -> float:
    """Small-signal conductance of the pair at zero volts, S."""
    g = float(_dI(fwd, np.array(0.0)))
    if brk is None:
        return 2 * g
    return (g + float(_dI(brk, np.array(0.0)))) / 2


@lru_cache(maxsize=2048)
def limiter_table(lim: Limiter, series_ohm: float, temp_k: float) -> LimiterTable:
    """Tabulate the branch (limiter pair + series_ohm in series) to 1 A each way.

    The table is dense on a log current scale so linear interpolation errs by
    well under 0.1 % in current across the knee. Cached: the search and the Monte
    Carlo ask for the same few tables many times; the pair's own table is shared by
    every series_ohm (the series resistor only adds i series_ohm to the voltage).
    """
    i_pos, v_pair, q_pos, c_pos, elem, u_f = _pair_table(lim, temp_k)
    v_pos = v_pair + i_pos * series_ohm
    g_pos = 1.0 / np.gradient(v_pos, i_pos)

    def odd(x):
        return np.concatenate([-x[:0:-1], x])

    def even(x):
        return np.concatenate([x[:0:-1], x])

    if elem is None or series_ohm:
        # the element's table describes the pair alone, on the pair's own voltage
        return LimiterTable(odd(v_pos), odd(i_pos), even(g_pos), series_ohm, odd(q_pos), even(c_pos))
    # the forward-oriented Zener carries the pair's current: forward at v > 0, in breakdown at v < 0
    split = np.concatenate([elem.v_v[:i_pos.size - 1], u_f])
    return LimiterTable(odd(v_pos), odd(i_pos), even(g_pos), series_ohm, odd(q_pos), even(c_pos), elem, split)


def forward_voltage(lim: Limiter, current_a: float, temp_k: float = T0_K) -> float:
    """Voltage across the limiter pair at current_a (A), V (e.g. the knee at 1 mA)."""
    return float(_pair_voltage(lim, temp_k, np.array([current_a]))[0])
