"""The diode limiter's surrogate for the search: harmonic balance on the topology's
reference network, tabulated once per limiter part, and the describing function that
carries it to other temperatures.

Two numbers fix the steady state of a limiter branch on a given network: the series
resistor rd and the conductance g the branch must supply on average for the loop gain
to be one (the linear analysis's ``marginal_g_s``). The table holds, over r = rd / Rg
and x = g Rg on the reference network (the topology's equal-arm network with Rg at one
of the impedance levels LEVELS, an ideal op-amp, 25 degC) at a few frequencies
F_SLICES, the output
peak, the THD and the frequency pull that harmonic balance finds
(:func:`partpick.physics.harmonic.harmonic_balance`, the same solver verification
uses; the pull includes what the junction capacitance does, which grows with
frequency). Between grid points the surface is interpolated on log axes, and linearly
in frequency between slices (capacitive effects grow in proportion to frequency while
they are small); at another temperature the output is scaled by the ratio of the
branch's describing-function amplitudes (Gelb and Vander Velde, Multiple-Input
Describing Functions, 1968) at that temperature and at 25 degC, which moves with the
junction's forward voltage. A junction is not scale-free (its voltage grows with the
current a lower impedance level drives through it), so each level has its own tables;
a gain network between levels reads the two around it, each carried to the network's
own rd and g by the same describing-function ratio, and blends them in ln Rg. A slice depends only on
the part, the topology, its level and its frequency, so it is computed when first
needed and cached in the user's cache folder (:mod:`partpick.cache`); the demo parts'
are shipped. A part the package has no tables of (a catalog's own, an edited one) is
solved at the design's own frequency instead of at the slices around it: half the
work of its first use, and no blend in frequency.

Accuracy against direct harmonic balance on the reference is checked in
tests/test_limiter_surface.py over the range the search uses.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass

import numpy as np

from partpick.cache import content_key, has_arrays, load_arrays, part_content, shipped_dir, store_arrays
from partpick.forked import fork_map
from partpick.physics.harmonic import harmonic_balance
from partpick.physics.junction import limiter_table
from partpick.physics.linear import LinearResult
from partpick.physics.opamp import ideal_opamp

__all__ = ["Surface", "surface", "compute", "prepare", "ship", "df_table", "compute_df", "DF_T", "surface_at", "df_amplitude", "Planner", "R_GRID", "X_GRID", "REF_RG", "REF_T",
           "F_SLICES", "LEVELS", "level_of"]

R_GRID = np.concatenate([[0.0], np.geomspace(0.01, 40.0, 25)])    # rd / Rg
X_GRID = np.geomspace(3e-4, 0.32, 24)                               # Rg * conductance needed
REF_RG = 10e3          # ohm: the default level
LEVELS = (1e3, 3.3e3, 10e3)   # ohm: the impedance levels (Rg) tabulated, a half decade apart
# ln Rg this close to a level reads its tables as they are: a junction's voltage moves by
# n Vt ln(1.05), about 2.5 mV of some 500 mV, across it
AT_LEVEL = 0.05
REF_T = 298.15         # K
_DM = 0.002          # nepers: the step of the gain excess the slopes (dln_vo, dthd) are taken over
F_SLICES = (200.0, 1e3, 3e3, 10e3, 30e3, 100e3, 300e3)   # Hz: the frequencies the surface is solved at
_R0 = 2e-3             # r axis offset, so r = 0 sits on the log axis
# V, the describing function's amplitude grid: 40 a decade (ln a is interpolated
# linearly in ln N, within 0.4 % of a grid ten times as fine); below 10 mV a pair
# conducts nothing worth limiting with
_AMPS = np.geomspace(1e-2, 300.0, 180)
# phase points of the describing-function integral (midpoint rule on a periodic
# integrand: 32 agree with 256 to 1e-5)
_THETA = 2 * np.pi * (np.arange(32) + 0.5) / 32


@dataclass(frozen=True, slots=True)
class Surface:
    """The tabulated steady state over (R_GRID, X_GRID): vo (output peak at the
    reference's gain of 3, V), thd (fraction), pull (ln of the frequency over the
    marginal one), a_df (describing-function amplitude across the branch, V); NaN where
    the branch cannot hold the loop (it cannot supply x, or does not let it start)."""

    vo: np.ndarray          # held as vo (1 - g rd), see lookup
    thd: np.ndarray
    pull: np.ndarray
    a_df: np.ndarray

    def lookup(self, rd_ohm: np.ndarray, g_s: np.ndarray, rg_ohm: float = REF_RG) -> tuple[np.ndarray, ...]:
        """(vo, thd, pull, a_df) at series resistances rd_ohm (ohm) and needed
        conductances g_s (S), interpolated on the log axes; NaN outside the table.

        The output is held as vo (1 - g rd): the branch cannot supply more than 1/rd,
        and as g rd -> 1 the amplitude grows as 1 / (1 - g rd) (the pair's voltage plus
        the drop across rd, vf (1 - g rd) ~ V_pair), which a grid cannot follow; the
        product is smooth."""
        q = np.asarray(g_s, float) * np.asarray(rd_ohm, float)
        at = _coords(rd_ohm, g_s, rg_ohm)
        with np.errstate(invalid="ignore", divide="ignore"):
            vo = np.exp(_bilinear(np.log(self.vo), at)) / np.where(q < 1, 1 - q, np.nan)
            return (vo, np.exp(_bilinear(np.log(self.thd), at)), _bilinear(self.pull, at),
                    np.exp(_bilinear(np.log(self.a_df), at)))


def _coords(rd_ohm, g_s, rg_ohm: float, r_axis=None):
    """Where (rd_ohm, g_s) fall on the (R_GRID, X_GRID) log axes scaled by rg_ohm: the
    flat index of each point's cell corner, the four corners' bilinear weights, and a
    mask of points off the table (computed once for every table read at those points).
    r_axis: _r_axis(rd_ohm, rg_ohm) when the caller holds it (a Planner's rows take
    their rd from a few choices: it gathers theirs)."""
    i, tu, u = r_axis if r_axis is not None else _r_axis(rd_ohm, rg_ohm)
    with np.errstate(invalid="ignore", divide="ignore"):
        v = np.log(np.asarray(g_s, float) * rg_ohm)
    j = _cell(v)
    tv = (v - _VG[j]) / (_VG[j + 1] - _VG[j])
    outside = (tu < -1e-9) | (tu > 1 + 1e-9) | (tv < -1e-9) | (tv > 1 + 1e-9) | ~np.isfinite(u * v)
    return i * X_GRID.size + j, (1 - tu) * (1 - tv), tu * (1 - tv), (1 - tu) * tv, tu * tv, outside


def _r_axis(rd_ohm, rg_ohm: float):
    """(cell, weight, ln coordinate) of rd_ohm (ohm) on the R_GRID axis at the level rg_ohm."""
    u = np.log(np.asarray(rd_ohm, float) / rg_ohm + _R0)
    i = np.clip(np.searchsorted(_UG, u) - 1, 0, _UG.size - 2)
    return i, (u - _UG[i]) / (_UG[i + 1] - _UG[i]), u


_UG = np.log(R_GRID + _R0)
_VG = np.log(X_GRID)
_VG_STEP = (_VG[-1] - _VG[0]) / (_VG.size - 1)


def _cell(v: np.ndarray) -> np.ndarray:
    """np.clip(np.searchsorted(_VG, v) - 1, 0, _VG.size - 2) for every v not NaN, from
    the axis's even spacing (X_GRID is geometric) instead of a search: the search was
    a third of the search's table reads. Rounding can put the spacing's cell one off,
    which the two comparisons after it put right. (NaN lands in the first cell, the
    search puts it in the last: a point off the table either way.)"""
    top = _VG.size - 2
    with np.errstate(invalid="ignore"):
        j = np.fmin(np.fmax(np.floor((v - _VG[0]) / _VG_STEP), 0.0), top).astype(np.intp)
        j -= (v <= _VG[j]) & (j > 0)
        j += (v > _VG[j + 1]) & (j < top)
    return j


def _bilinear(z: np.ndarray, at) -> np.ndarray:
    """Bilinear interpolation of grid z (R_GRID x X_GRID) at the coordinates ``at``
    (_coords); NaN off it."""
    k, w00, w10, w01, w11, outside = at
    flat = z.ravel()
    nj = X_GRID.size
    out = w00 * flat[k] + w10 * flat[k + nj] + w01 * flat[k + 1] + w11 * flat[k + nj + 1]
    return np.where(outside, np.nan, out)


def level_of(rg_ohm: float) -> float:
    """The tabulated level (LEVELS, ohm) nearest rg_ohm on a log scale."""
    return min(LEVELS, key=lambda lv: abs(math.log(rg_ohm / lv)))


def _reference_balance(topology, lim, rd: float, x: float, control, f_hz: float, start=None, rg: float = REF_RG):
    """Harmonic balance of the reference network at f_hz (Hz), gain network at the
    level rg (ohm), with branch rd (ohm) asked to supply x / rg (S)."""
    from partpick.circuits import Conditions, build_loop

    gv = topology.reference_gain_values(rg, x / rg)
    c = topology.reference(f_hz, gv, ideal_opamp(), control.name, {"limiter": lim}, {"rd": rd})
    cond = Conditions(1e3, REF_T, math.inf)
    loop = build_loop(c, cond)
    br = control.branch(c, cond.temp_k)
    # the reference's linear facts are known: it oscillates at f0 and the branch must
    # supply x / Rg; harmonic balance only takes them as its starting point
    if x / rg <= br.g0_s / (1.0 + rd * br.g0_s) * 1.001:
        return None  # the branch's own leakage already takes the gain excess: no oscillation
    lin = LinearResult((), True, 1.0, f_hz, 0.0, f_hz, f_hz, x / rg)
    # (a warm start that fails is started again cold by _row, once)
    hb = harmonic_balance(loop, br, lin, cond.rails("dual"), kmax=11, start=start, escalate=1, cold_retry=False)
    # a solution that collapsed to (almost) nothing is the trivial one, not an oscillation
    ok = hb is not None and hb.holds and hb.osc_peak_v > 1e-4
    return hb if ok else None


def _row(job: tuple, a: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Row a (r = R_GRID[a]) of the surface for job = (topology, lim, control, f_hz,
    rg): (vo (1 - x r), thd, pull) over X_GRID, NaN where the branch cannot hold the
    loop. Each point starts from the one before it in the same row."""
    topology, lim, control, f_hz, rg = job
    r = R_GRID[a]
    vo, thd, pull = (np.full(X_GRID.size, np.nan) for _ in range(3))
    prev = None
    for b, x in enumerate(X_GRID):
        if x * r >= 1.0:
            # the branch cannot conduct more than 1 / rd: no steady state (and the
            # stored vo (1 - x r) would not be positive), so nothing to solve
            prev = None
            continue
        hb = _reference_balance(topology, lim, r * rg, x, control, f_hz, prev, rg)
        if hb is None and prev is not None:
            hb = _reference_balance(topology, lim, r * rg, x, control, f_hz, rg=rg)
        prev = hb
        if hb is not None:
            vo[b] = hb.osc_peak_v * (1 - x * r)
            thd[b], pull[b] = hb.osc_thd, math.log(hb.freq_hz / f_hz)
    return vo, thd, pull


def compute(topology, lim, control, f_hz: float, rg: float = REF_RG) -> dict[str, np.ndarray]:
    """The surface's arrays (see Surface) at f_hz (Hz) and the level rg (ohm), by
    harmonic balance at every grid point the branch can hold (the rows over the CPUs:
    :func:`partpick.forked.fork_map`)."""
    return _compute_many([(topology, lim, control, f_hz, rg)])[0]


def _job_row(item: tuple) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    return _row(*item)


def _compute_many(jobs: list[tuple]) -> list[dict[str, np.ndarray]]:
    """compute() for each job (topology, lim, control, f_hz, rg), every row of every
    job in one spread over the CPUs: the rows are independent (each starts its own
    continuation), and their costs differ so much (a row of large rd is mostly off the
    table) that a spread per slice leaves a CPU idle at the end of each."""
    rows = fork_map(_job_row, [(job, a) for job in jobs for a in range(R_GRID.size)])
    out = []
    for i, (_, lim, _, _, rg) in enumerate(jobs):
        mine = rows[i * R_GRID.size:(i + 1) * R_GRID.size]
        vo, thd, pull = (np.stack([row[j] for row in mine]) for j in range(3))
        a_df = df_amplitude(lim, R_GRID[:, None] * rg, X_GRID[None, :] / rg, REF_T)
        out.append({"vo": vo, "thd": thd, "pull": pull, "a_df": a_df})
    return out


def prepare(topology, lim, control, f_hz: float, rgs) -> None:
    """Compute at once the slices that Planners at f_hz (Hz) on gain networks at the
    levels rgs (ohm) read and that neither the shipped tables nor the cache hold (a
    part not shipped: a catalog's own, or an edited one), and cache them; what
    surface() then loads. Together their rows balance the CPUs (_compute_many)."""
    need = []
    for rg in sorted({lv for r in rgs for lv in _level_weights(r)}):
        for f in (x for x in _slices(topology, lim, f_hz)[:2] if x is not None):
            key = _key(topology, lim, f, rg)
            if all(key != k for _, k in need) and not has_arrays("limiter-surface", key):
                need.append(((topology, lim, control, f, rg), key))
    if len(need) > 1:
        for (_, key), arrays in zip(need, _compute_many([job for job, _ in need])):
            store_arrays("limiter-surface", key, arrays)
            _FRESH[key] = arrays


_FRESH: dict[str, dict[str, np.ndarray]] = {}   # what prepare() computed (served if the cache cannot be written)


# what a limiter's surface does not depend on (a new field not named here only costs a
# recomputation, never a stale table)
_NOT_PHYSICS = ("id", "description", "vf_spread_v", "parts", "package", "price_unit", "price_line", "maker",
                "maker_part")


@functools.lru_cache(maxsize=1024)   # (read on every design run, by prepare)
def _key(topology, lim, f_hz: float, rg: float = REF_RG) -> str:
    return content_key("limiter-surface-5", topology.name, part_content(lim, _NOT_PHYSICS), rg, REF_T, f_hz,
                       R_GRID.tolist(), X_GRID.tolist())


def _df_key(lim, rg: float = REF_RG) -> str:
    return content_key("limiter-df-2", part_content(lim, _NOT_PHYSICS), rg, R_GRID.tolist(), X_GRID.tolist(),
                       DF_T.tolist())


@functools.lru_cache(maxsize=256)
def _shipped(topology, lim) -> bool:
    """Whether the package ships the part's slices on the topology (the demo parts as
    they are): what decides which slices a design reads (_slices), the same on every
    machine whatever its cache holds, so that a design's ranking does not depend on
    what was run before."""
    return (shipped_dir() / "limiter-surface" / f"{_key(topology, lim, F_SLICES[0])}.npz").is_file()


@functools.lru_cache(maxsize=256)
def surface(topology, lim, control, f_hz: float = F_SLICES[0], rg: float = REF_RG) -> Surface:
    """The limiter part's surface on the topology at one frequency (Hz: one of F_SLICES,
    or a design's own for a part not shipped, see _slices) and one level of LEVELS
    (ohm) (shipped with the package for the demo parts, else computed once and cached
    on disk)."""
    key = _key(topology, lim, f_hz, rg)
    arrays = _FRESH.pop(key, None) or load_arrays("limiter-surface", key)
    if arrays is None or set(arrays) != {"vo", "thd", "pull", "a_df"}:
        arrays = compute(topology, lim, control, f_hz, rg)
        store_arrays("limiter-surface", key, arrays)
    return Surface(arrays["vo"], arrays["thd"], arrays["pull"], arrays["a_df"])


@functools.lru_cache(maxsize=256)
def surface_at(topology, lim, control, f_hz: float, rg: float = REF_RG) -> Surface:
    """The surface at f_hz (Hz) and level rg (ohm, one of LEVELS): the lowest slice
    below it, else the two slices around it blended linearly in frequency (output and
    THD on their log axes, as the lookup interpolates them, so blending the tables is
    blending the lookups)."""
    lo, hi, t = _slices(topology, lim, f_hz)
    if hi is None:
        return surface(topology, lim, control, lo, rg)
    a, b = surface(topology, lim, control, lo, rg), surface(topology, lim, control, hi, rg)
    with np.errstate(divide="ignore", invalid="ignore"):
        return Surface(np.exp((1 - t) * np.log(a.vo) + t * np.log(b.vo)),
                       np.exp((1 - t) * np.log(a.thd) + t * np.log(b.thd)),
                       (1 - t) * a.pull + t * b.pull, a.a_df)


def _slices(topology, lim, f_hz: float) -> tuple[float, float | None, float]:
    """The slices surface_at reads at f_hz (Hz): (lowest, None, 0) at or below the lowest
    of F_SLICES, else the two around it and the weight of the upper one; for a part the
    package does not ship tables of (a catalog's own, or an edited one), f_hz's own
    slice between the lowest and the highest: it is computed anyway, and one slice at
    the design's frequency is half the work of the two around it (and reads no blend)."""
    if f_hz <= F_SLICES[0]:
        return F_SLICES[0], None, 0.0
    if f_hz < F_SLICES[-1] and not _shipped(topology, lim):
        return f_hz, None, 0.0
    i = min(int(np.searchsorted(F_SLICES, f_hz)), len(F_SLICES) - 1)
    lo, hi = F_SLICES[i - 1], F_SLICES[i]
    return lo, hi, min((f_hz - lo) / (hi - lo), 1.0)


@functools.lru_cache(maxsize=256)
def _df_curve(lim, rd_ohm: float, temp_k: float) -> np.ndarray:
    """Describing-function conductance (S) of the branch (the pair behind rd_ohm) at each
    amplitude of _AMPS (V)."""
    table = limiter_table(lim, rd_ohm, temp_k)
    i = table.current(np.outer(_AMPS, np.cos(_THETA)))
    return (i @ np.cos(_THETA)) * (2 / _THETA.size) / _AMPS


def df_amplitude(lim, rd_ohm, g_s, temp_k: float) -> np.ndarray:
    """Amplitude (V) across the branch (pair behind rd_ohm) at which its describing-
    function conductance equals g_s (S); NaN where it never does. Vectorised over
    rd_ohm and g_s (broadcast)."""
    rd, g = np.broadcast_arrays(np.asarray(rd_ohm, float), np.asarray(g_s, float))
    out = np.full(rd.shape, np.nan)
    for value in np.unique(rd):
        sel = rd == value
        n_df = _df_curve(lim, float(value), float(temp_k))
        # the conductance rises with amplitude for a junction pair: interpolate ln a in ln N
        ok = np.flatnonzero(np.diff(n_df) > 0)
        if ok.size == 0:
            continue
        lo = ok[0]
        mono = np.maximum.accumulate(n_df[lo:])
        with np.errstate(divide="ignore", invalid="ignore"):
            ln_a = np.interp(np.log(g[sel]), np.log(np.maximum(mono, 1e-300)), np.log(_AMPS[lo:]),
                             left=np.nan, right=np.nan)
        out[sel] = np.exp(ln_a)
    return out


DF_T = np.arange(213.15, 443.16, 10.0)   # K: the temperatures the describing-function table holds


@functools.lru_cache(maxsize=64)
def df_table(lim, rg: float = REF_RG) -> np.ndarray:
    """ln of the describing-function amplitude (df_amplitude) of the pair behind
    rd = R_GRID x rg asked for g = X_GRID / rg (rg: a level of LEVELS, ohm), at every
    temperature of DF_T: array (DF_T, R_GRID, X_GRID); NaN where the branch cannot
    supply g. Shipped for the demo parts and cached by content like the surface."""
    key = _df_key(lim, rg)
    arrays = load_arrays("limiter-df", key)
    if arrays is None or "ln_a" not in arrays:
        arrays = {"ln_a": compute_df(lim, rg)}
        store_arrays("limiter-df", key, arrays)
    return arrays["ln_a"]


def compute_df(lim, rg: float = REF_RG) -> np.ndarray:
    """The table df_table holds, computed (the temperatures over the CPUs)."""
    return np.stack(fork_map(functools.partial(_df_slice, lim, rg), DF_T.tolist()))


def _df_slice(lim, rg: float, temp_k: float) -> np.ndarray:
    """One temperature's (K) slice of compute_df."""
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.log(df_amplitude(lim, R_GRID[:, None] * rg, X_GRID[None, :] / rg, float(temp_k)))


def _df_at(table: np.ndarray, temp_k: float) -> np.ndarray:
    """The table's (R_GRID, X_GRID) slice at temp_k (K), linear in temperature."""
    k = int(np.clip(np.searchsorted(DF_T, temp_k) - 1, 0, DF_T.size - 2))
    t = (temp_k - DF_T[k]) / (DF_T[k + 1] - DF_T[k])
    return (1 - t) * table[k] + t * table[k + 1]


def _level_weights(rg_ohm: float) -> dict[float, float]:
    """The levels of LEVELS (ohm) a gain network at rg_ohm reads, with their weights:
    within AT_LEVEL of a level (a value of the family nearest it) that level's own
    tables as they are, between two levels both (linear in ln Rg), beyond them the
    nearest."""
    level = level_of(rg_ohm)
    lv = sorted(LEVELS)
    k = int(np.searchsorted(lv, rg_ohm))
    if abs(math.log(rg_ohm / level)) <= AT_LEVEL or k in (0, len(lv)):
        return {level: 1.0}
    t = math.log(rg_ohm / lv[k - 1]) / math.log(lv[k] / lv[k - 1])
    return {lv[k - 1]: 1.0 - t, lv[k]: t}


class Planner:
    """The diode limiter's side of the search for one limiter part and one family of
    series resistors (Rd): for rows of (needed conductance g, output per port amplitude)
    it predicts, for every Rd choice, the output peak at each temperature, the THD, the
    harmonic pull and their slopes in the gain excess, from the surface.

    choices: Rd values (ohm), 0 first (the pair straight across the port); rg: the
    gain network's level (Rg, ohm): read on the tables of that level of LEVELS, or
    between two levels on both, blended linearly in ln Rg (each level's output carried
    to the real rd and g by the describing-function ratio); beyond the levels, on the
    nearest one with that ratio.
    """

    def __init__(self, topology, lim, control, rd_values, temps_k, f_hz: float, rg_ohm: float = REF_RG) -> None:
        self.lim = lim
        self.topology = topology
        # output per port amplitude on the reference (the Wien bridge's 1.5 at gain 3)
        self.osc_ref = float(topology.osc_per_port_k(np.asarray(topology.reference_required_gain, float)))
        self.level = level_of(rg_ohm)
        self.choices = np.concatenate([[0.0], np.asarray(rd_values, float)])
        self.temps_k = tuple(float(t) for t in temps_k)
        self.rg = rg_ohm
        self.scaled = abs(math.log(rg_ohm / self.level)) > AT_LEVEL
        weights = _level_weights(rg_ohm)
        self._tables = []
        with np.errstate(divide="ignore", invalid="ignore"):
            for level, w in weights.items():
                sf = surface_at(topology, lim, control, f_hz, level)
                self._tables.append((w, np.log(sf.vo), np.log(sf.thd), sf.pull, np.log(sf.a_df)))
        table = df_table(lim, self.level)
        ref = _df_at(table, REF_T)
        self._df_shift = [_df_at(table, t) - ref for t in self.temps_k]
        # each choice's place on the r axis, at the network's level and at the tables'
        # (the rows gather theirs: the same numbers as placing every row's rd)
        self._r_axes = {lv: _r_axis(self.choices, lv) for lv in (self.rg, self.level)}

    def _at(self, ci, g, rg: float):
        """_coords of the choices ci (indices into choices) with conductances g (S) at rg."""
        return _coords(None, g, rg, tuple(x[ci] for x in self._r_axes[rg]))

    def _lookup(self, ci, g, vo: bool, thd: bool, pull: bool, at=None):
        """What Surface.lookup gives at the choices ci (indices into choices) and
        conductances g (S), only the fields asked for (None for the others); ``at``:
        their _at at the network's level, where the caller holds it."""
        rd = self.choices[ci]
        at = self._at(ci, g, self.rg) if at is None else at
        out_vo = out_thd = out_pull = None
        if vo:
            q = np.asarray(g, float) * np.asarray(rd, float)
            ln_vo = sum(w * _bilinear(t[0], at) for w, *t in self._tables)
            if self.scaled:
                ln_vo = ln_vo + np.log(df_amplitude(self.lim, rd, g, REF_T)) - sum(w * _bilinear(t[3], at)
                                                                                    for w, *t in self._tables)
            out_vo = np.exp(ln_vo) / np.where(q < 1, 1 - q, np.nan)
        if thd:
            out_thd = np.exp(sum(w * _bilinear(t[1], at) for w, *t in self._tables))
        if pull:
            out_pull = sum(w * _bilinear(t[2], at) for w, *t in self._tables)
        return out_vo, out_thd, out_pull

    def amplitude_slope(self, g_s: np.ndarray, dg_dm: np.ndarray, choice) -> np.ndarray:
        """evaluate's dln_vo alone (d ln vo / d m, one choice index per row), the same
        numbers: for a bound before the rest is worked out."""
        ci = np.broadcast_to(np.asarray(choice), np.shape(g_s))
        g = np.asarray(g_s, float)
        with np.errstate(invalid="ignore", divide="ignore"):
            vo = self._lookup(ci, g, True, False, False)[0]
            return np.log(self._lookup(ci, g + dg_dm * _DM, True, False, False)[0] / vo) / _DM

    def thd(self, g_s: np.ndarray, thd_scale=1.0) -> np.ndarray:
        """THD (fraction) of every Rd choice, array (n rows, n choices), for rows of
        needed conductance g_s (S) and thd_scale (see evaluate): one lookup, for a
        first screen before the full evaluation; NaN where the choice cannot hold the
        loop."""
        g_s = np.asarray(g_s, float)
        ci = np.broadcast_to(np.arange(self.choices.size)[None, :], (g_s.size, self.choices.size))
        with np.errstate(invalid="ignore", divide="ignore"):
            thd = self._lookup(ci, np.broadcast_to(g_s[:, None], ci.shape), False, True, False)[1]
        return thd * (np.asarray(thd_scale, float)[:, None] if np.ndim(thd_scale) else thd_scale)

    def evaluate(self, g_s: np.ndarray, dg_dm: np.ndarray, osc_per_port: np.ndarray, m: np.ndarray,
                 choice=None, thd_scale=1.0) -> dict[str, np.ndarray]:
        """Arrays (n rows, n choices), or (n rows,) for one choice index per row
        (``choice`` an int or an array of ints), for rows of needed conductance g_s (S),
        its slope dg_dm in the gain excess (S per neper), output per port amplitude and
        gain excess m (nepers): vo<i> the output peak at temps_k[i] (V), thd, pull (ln),
        dln_vo and dthd (d ln vo / d m, d thd / d m); NaN where the choice cannot hold
        the loop. The amplitude and the THD follow the conductance the branch must
        supply (the branch is driven alike, so its harmonic currents are the same share
        of its fundamental); the network turns those currents into output harmonics in
        its own proportion, which ``thd_scale`` (per row: the topology's
        ``thd_transfer``) carries from the reference to the design's network. The
        frequency pull follows the gain excess, so it is read at the reference's
        conductance for the same excess (the topology's ``reference_conductance``)."""
        g_s = np.asarray(g_s, float)
        m = np.asarray(m, float)
        g_ref = self.topology.reference_conductance(m, self.rg)     # the reference at the same excess
        if choice is None:
            ci = np.broadcast_to(np.arange(self.choices.size)[None, :], (g_s.size, self.choices.size))
            g = np.broadcast_to(g_s[:, None], ci.shape)
            g_ref = np.broadcast_to(g_ref[:, None], ci.shape)
            scale = np.asarray(osc_per_port, float)[:, None] / self.osc_ref   # the surface holds the reference's
            dg_dm = np.broadcast_to(np.asarray(dg_dm, float)[:, None], ci.shape)
            t_scale = np.asarray(thd_scale, float)[..., None] if np.ndim(thd_scale) else thd_scale
        else:
            ci = np.broadcast_to(np.asarray(choice), g_s.shape)
            g = g_s
            scale = np.asarray(osc_per_port, float) / self.osc_ref
            t_scale = thd_scale
        with np.errstate(invalid="ignore", divide="ignore"):
            at = self._at(ci, g, self.rg)
            vo, thd, pull_g = self._lookup(ci, g, True, True, True, at)
            pull = self._lookup(ci, g_ref, False, False, True)[2]
            pull = np.where(np.isfinite(pull), pull, pull_g)   # the reference's excess off the table
            dm = _DM
            vo2, thd2, _ = self._lookup(ci, g + dg_dm * dm, True, True, False)
            thd, thd2 = thd * t_scale, thd2 * t_scale
            out = {"thd": thd, "pull": pull, "dln_vo": np.log(vo2 / vo) / dm, "dthd": (thd2 - thd) / dm}
            # the output at another temperature: scaled by the ratio of the branch's
            # describing-function amplitudes there and at 25 degC (the table, in the
            # branch's own units: rd and g as they are)
            at = at if self.level == self.rg else self._at(ci, g, self.level)   # (the same where they are)
            for i, t in enumerate(self.temps_k):
                ratio = 1.0 if t == REF_T else np.exp(_bilinear(self._df_shift[i], at))
                out[f"vo{i}"] = vo * scale * ratio
        return out


def ship(catalog_dir: str) -> int:
    """Write every slice of every limiter in the catalogs under catalog_dir into the
    package's tables (for the maintainers: run after a change to the physics or the
    demo parts); returns how many were written."""
    from partpick.catalog import load_catalog
    from partpick.circuits import CONTROLS, TOPOLOGIES

    catalog = load_catalog(catalog_dir)
    control = CONTROLS["diode-limiter"]
    n = 0
    for topology in TOPOLOGIES.values():
        if not hasattr(topology, "reference_gain_values"):
            continue  # no reference network to tabulate on
        for lim in catalog.limiters:
            for rg in topology.gain_levels:
                store_arrays("limiter-df", _df_key(lim, rg), {"ln_a": compute_df(lim, rg)}, root=shipped_dir())
                for f_hz in F_SLICES:
                    store_arrays("limiter-surface", _key(topology, lim, f_hz, rg),
                                 compute(topology, lim, control, f_hz, rg), root=shipped_dir())
                    n += 1
    return n


if __name__ == "__main__":
    import sys

    print(f"{ship(sys.argv[1] if len(sys.argv) > 1 else 'catalogs')} tables written")
