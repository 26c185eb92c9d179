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
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache

import numpy as np
from scipy import constants, special

from partpick.catalog import Limiter

__all__ = ["T0_K", "thermal_voltage", "Junction", "junctions_at", "LimiterTable", "limiter_table",
           "forward_voltage"]

T0_K = 298.15


def thermal_voltage(temp_k: float) -> float:
    """Vt = k T / q, V (CODATA 2018 exact constants, scipy.constants)."""
    return constants.k * temp_k / constants.e


@dataclass(frozen=True, slots=True)
class Junction:
    """One junction at a fixed temperature: is_a (A), n, rs_ohm (ohm), vt (V)."""

    is_a: float
    n: float
    rs_ohm: float
    vt: float

    def current(self, v: np.ndarray) -> np.ndarray:
        """Current through the junction plus its series resistance at terminal voltage v (V), A."""
        v = np.asarray(v, dtype=float)
        nvt = self.n * self.vt
        if self.rs_ohm <= 0:
            return self.is_a * np.expm1(np.minimum(v / nvt, 700.0))
        z = math.log(self.is_a * self.rs_ohm / nvt) + (v + self.is_a * self.rs_ohm) / nvt
        return nvt / self.rs_ohm * np.real(special.wrightomega(z)) - self.is_a

    def voltage(self, i: np.ndarray) -> np.ndarray:
        """Terminal voltage at current i (A, > -Is), V: n Vt ln(1 + i/Is) + i Rs."""
        i = np.asarray(i, dtype=float)
        return self.n * self.vt * np.log1p(i / self.is_a) + i * self.rs_ohm


def _is_at(is0: float, n: float, eg_j: float, xti: float, temp_k: float) -> float:
    ratio = temp_k / T0_K
    return is0 * ratio ** (xti / n) * math.exp((ratio - 1) * eg_j / (n * constants.k * temp_k))


def junctions_at(lim: Limiter, temp_k: float) -> tuple[Junction, Junction | None]:
    """The forward junction and (Zener pairs only) the breakdown junction at temp_k (K)."""
    vt = thermal_voltage(temp_k)
    fwd = Junction(_is_at(lim.is_a, lim.n, lim.eg_j, lim.xti, temp_k), lim.n, lim.rs_ohm, vt)
    if lim.kind != "zener-pair":
        return fwd, None
    vz = lim.vz_v + lim.vz_tempco_v_per_k * (temp_k - T0_K)
    nz = max(lim.rz_ohm * lim.iz_a / vt, 1.0)
    brk = Junction(lim.iz_a * math.exp(-vz / (nz * vt)), nz, lim.rs_ohm, vt)
    return fwd, brk


@dataclass(frozen=True, slots=True)
class LimiterTable:
    """Tabulated branch characteristic i(v) (odd-symmetric): v_v (V, ascending),
    i_a (A), g_s = di/dv (S). The branch is the limiter pair in series with series_ohm (ohm)."""

    v_v: np.ndarray
    i_a: np.ndarray
    g_s: np.ndarray
    series_ohm: float

    def current(self, v: np.ndarray) -> np.ndarray:
        """Branch current at branch voltage v (V), A; linear beyond the table ends."""
        return _interp_linear_ends(v, self.v_v, self.i_a, self.g_s)

    def conductance(self, v: np.ndarray) -> np.ndarray:
        """di/dv of the branch at v (V), S."""
        return np.interp(np.abs(v), self.v_v[self._half:], self.g_s[self._half:])

    @property
    def _half(self) -> int:
        return len(self.v_v) // 2


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


@lru_cache(maxsize=256)
def _pair_table(lim: Limiter, temp_k: float, points: int) -> tuple[np.ndarray, np.ndarray]:
    """The pair alone, i >= 0: (i, v) on a log current grid from 1 pA to 1 A."""
    i_pos = np.concatenate([[0.0], np.logspace(-12, 0, points)])
    return i_pos, _pair_voltage(lim, temp_k, i_pos)


@lru_cache(maxsize=2048)
def limiter_table(lim: Limiter, series_ohm: float, temp_k: float, points: int = 1200) -> LimiterTable:
    """Tabulate the branch (limiter pair + series_ohm in series) from 1 pA to 1 A each way.

    The table is dense on a log current scale so linear interpolation errs by
    well under 0.1 % in current across the knee. Cached: the search and the Monte
    Carlo ask for the same few tables many times; the pair's own table is shared by
    every series_ohm (the series resistor only adds i series_ohm to the voltage).
    """
    i_pos, v_pair = _pair_table(lim, temp_k, points)
    v_pos = v_pair + i_pos * series_ohm
    g_pos = 1.0 / np.gradient(v_pos, i_pos)
    v = np.concatenate([-v_pos[:0:-1], v_pos])
    i = np.concatenate([-i_pos[:0:-1], i_pos])
    g = np.concatenate([g_pos[:0:-1], g_pos])
    return LimiterTable(v, i, g, series_ohm)


def forward_voltage(lim: Limiter, current_a: float, temp_k: float = T0_K) -> float:
    """Voltage across the limiter pair at current_a (A), V (e.g. the knee at 1 mA)."""
    return float(_pair_voltage(lim, temp_k, np.array([current_a]))[0])
