"""Tolerance, temperature and supply: worst case and Monte Carlo yield of one candidate.

Variation model, per part from its catalog family: value tolerance as a uniform
distribution, or a normal with the tolerance at 3 sigma truncated there; resistor
tempco as a bound, drawn uniformly in +/- tempco; capacitor tempco as its nominal plus
a uniform draw in +/- its spread, or for class-2 and electrolytic parts a uniform draw in
+/- the band scaled by the distance from 25 degC over half the band's span; op-amp GBW
normal with its spread at 3 sigma; limiter forward voltage normal with its spread at 3
sigma; temperature and supply uniform over the spec's ranges. Every build is one draw
of all of these (numpy, vectorised, seeded: ``numpy.random.default_rng(seed)``).

A control with a spread model of its own (the JFET control: its JFET's VTO and BETA,
reference, divider and detector diode) draws those for each build instead of the scalar
forward-voltage spread.

Per build, the physics is the candidate's verified operating point moved by exact and
linearised terms: f0 and the required gain exactly from the drawn arm values; the
gain excess from the drawn gain network with the op-amp's and the limiter's share of
the margin scaled by the drawn GBW; the harmonic pull, amplitude and THD from their
slopes in the gain excess (harmonic balance at the gain and at the gain raised by
0.5 %) and their
temperature dependence (harmonic balance at the temperature ends, interpolated);
the op-amp's frequency pull inversely with the drawn GBW (single-pole). A build
passes when it starts (gain excess > 0), its frequency and its amplitude at the load
lie within their tolerances, its THD under the limit and its op-amp peak inside the
swing at the drawn supply.

The Monte Carlo follows JCGM 101:2008 practice: the result reports how many samples a
stable two-digit yield needs (binomial standard error: N = (1.96 / 0.005)^2 p (1 - p)
for a 95 % interval of +/- 0.5 %).
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass

import numpy as np

from partpick.bom import Bom
from partpick.catalog import Catalog
from partpick.circuits import Circuit, all_slots, balance, linear, log_sensitivities, margin_fn, rest_conductance
from partpick.physics.harmonic import output_figures
from partpick.spec import Spec
from partpick.verify import Verdict, make_check

__all__ = ["Model", "YieldResult", "model_for", "variation", "monte_carlo", "worst_case", "samples_needed", "with_yield",
           "draw_builds", "frequency_and_startup"]

T_REF = 298.15


@dataclass(frozen=True, slots=True)
class Model:
    """Everything the vectorised builds need about one candidate (SI units; ln of
    frequencies in ln Hz, amplitudes in ln V)."""

    topology: object        # the topology plug-in, whose equations the builds evaluate
    values: dict            # role -> nominal value (ohm, F)
    tol: dict               # role -> tolerance (fraction)
    normal: dict            # role -> True when normal (3 sigma), else uniform
    tempco: dict            # role -> (nominal, spread) 1/K
    band: dict              # role -> class-2 band fraction (0 if none) and half-span K
    m_lin: float            # verified small-signal margin at nominal
    m_ideal: float          # ideal-op-amp margin at nominal values
    loss_op: float          # margin the op-amp and limiter leakage cost, nepers
    pull_h: float           # harmonic pull (ln f - ln f_lin) at nominal
    pull_op: float          # op-amp pull at nominal (ln of marginal over textbook frequency)
    s_pull: float
    ln_amp: float           # ln load amplitude at nominal
    s_amp: float
    thd: float
    s_thd: float
    temps: tuple            # temperatures with harmonic-balance points (K)
    dln_amp_t: tuple        # ln amplitude change at those temperatures
    dpull_t: tuple          # harmonic-pull change at those temperatures
    osc_per_load: float     # op-amp peak per load peak
    swing_head: tuple       # (high, low) headroom of the op-amp, V
    gbw_spread: float
    vf_spread_rel: float    # amplitude spread the control's parts give (3 sigma), relative
    spread: object = None   # the control's own build-by-build spread model, or None
    port: str = "feedback"  # the control's port ...
    g_rest: float = 0.0     # ... and the conductance it adds there at rest (S)
    # a second output (a quadrature oscillator's cosine) at nominal: (its load peak over
    # the first load's, its fundamental over the first's, its phase error (rad), its
    # THD and d THD / d ln(1 + m), the topology's ideal amplitude ratio output_ratio at
    # the nominal values); None without one
    second: tuple | None = None


@dataclass(frozen=True, slots=True)
class YieldResult:
    """Monte Carlo over ``samples`` builds (seed ``seed``): the share of builds meeting each
    requirement and all of them, statistics of frequency (Hz), amplitude at the load
    (V peak) and THD, and the sample size a stable two-digit yield needs."""

    samples: int
    seed: int
    yield_frac: float
    share: dict
    stats: dict
    needed: int
    freq_hz: np.ndarray
    amp_v: np.ndarray


def samples_needed(p: float, half_width: float = 0.005) -> int:
    """Binomial sample size for a 95 % interval of +/- half_width on a yield p
    (JCGM 101:2008, 7.9 adaptive procedure's stability target, normal approximation)."""
    p = min(max(p, 1e-4), 1 - 1e-4)
    return int(math.ceil((1.96 / half_width) ** 2 * p * (1 - p)))


def variation(values_by_role: dict, families: dict, catalog: Catalog) -> tuple[dict, ...]:
    """Per role of the resistors and capacitors: (value, tolerance, normal?, tempco
    (nominal, spread), class-2 band (fraction, half-span)) from each part's family."""
    values, tol, normal, tempco, band = {}, {}, {}, {}, {}
    slots = all_slots()
    for role, value in values_by_role.items():
        kind = slots[role].kind
        if kind not in ("resistors", "capacitors"):
            continue
        fam = catalog.find(kind, families[role])
        values[role] = value
        tol[role] = fam.tolerance_frac
        normal[role] = fam.distribution == "normal"
        if kind == "resistors":
            tempco[role] = (0.0, fam.tempco_per_k)
            band[role] = (0.0, 1.0)
        elif fam.has_band:
            tempco[role] = (0.0, 0.0)
            band[role] = (fam.band_frac, 0.5 * (fam.band_max_k - fam.band_min_k))
        else:
            tempco[role] = (fam.tempco_per_k, fam.tempco_spread_per_k)
            band[role] = (0.0, 1.0)
    return values, tol, normal, tempco, band


def model_for(c: Circuit, bom: Bom, catalog: Catalog, spec: Spec, verdict: Verdict) -> Model:
    """The candidate's model: slopes from one more harmonic-balance run with the gain
    raised by 0.5 % (the topology's gain-setting part)."""
    nom = verdict.nominal
    values, tol, normal, tempco, band = variation({ln.role: ln.value for ln in bom.lines},
                                                  {ln.role: ln.family for ln in bom.lines}, catalog)
    cond = nom.cond
    lin = nom.lin
    up = c.topology.nudge_gain(c, 0.005)
    lin_up = linear(up, cond)
    hb = nom.balance if nom.balance is not None else balance(c, cond, lin)
    hb_up = balance(up, cond, lin_up, start=hb) if hb is not None else None
    m_ideal = c.ideal_margin
    if hb is not None and hb_up is not None:
        d = math.log(1 + lin_up.margin) - math.log(1 + lin.margin)
        s_amp = (math.log(hb_up.load_peak_v) - math.log(hb.load_peak_v)) / d
        s_thd = (hb_up.load_thd - hb.load_thd) / d
        s_pull = (math.log(hb_up.freq_hz / lin_up.marginal_hz) - math.log(hb.freq_hz / lin.marginal_hz)) / d
    else:
        s_amp = s_thd = s_pull = 0.0
    pull_op = math.log(lin.marginal_hz / c.f0_hz) if math.isfinite(lin.marginal_hz) else 0.0
    pull_h = math.log(nom.freq_hz / lin.marginal_hz) if nom.starts and math.isfinite(lin.marginal_hz) else 0.0
    temps, damp, dpull = [cond.temp_k], [0.0], [0.0]
    for name in ("temp min", "temp max"):
        p = verdict.corners.get(name)
        if p is not None and p.starts and nom.starts:
            temps.append(p.cond.temp_k)
            damp.append(math.log(p.load_peak_v / nom.load_peak_v))
            dpull.append(math.log(p.freq_hz / p.lin.marginal_hz) - pull_h if math.isfinite(p.lin.marginal_hz) else 0.0)
    order = np.argsort(temps)
    vf_rel = c.control.amplitude_spread(c, cond.temp_k, cond) if nom.starts else 0.0
    hook = getattr(c.control, "spread_model", None)
    spread = hook(c, cond) if hook is not None and nom.starts else None
    second = None
    if nom.starts and nom.outputs:
        name, out = next(iter(nom.outputs.items()))
        target = c.topology.output_phase_rad.get(name, 0.0)
        s_thd2 = 0.0
        if hb is not None and hb_up is not None and name in hb_up.outputs:
            thd2_up = output_figures(hb_up.outputs[name], hb_up.load_harmonics)[1]
            s_thd2 = (thd2_up - out.thd) / d
        second = (out.peak_v / nom.load_peak_v, out.ratio, math.remainder(out.phase_rad - target, 2 * math.pi),
                  out.thd, s_thd2, float(c.topology.output_ratio(values)))
    return Model(c.topology, values, tol, normal, tempco, band, lin.margin, m_ideal,
                 math.log(1 + m_ideal) - math.log(max(1 + lin.margin, 1e-9)), pull_h, pull_op, s_pull,
                 math.log(max(nom.load_peak_v, 1e-12)), s_amp, nom.load_thd if nom.starts else math.nan, s_thd,
                 tuple(np.array(temps)[order]), tuple(np.array(damp)[order]), tuple(np.array(dpull)[order]),
                 nom.osc_peak_v / nom.load_peak_v if nom.starts and nom.load_peak_v > 0 else 1.0,
                 (c.opamp.headroom_high_v, c.opamp.headroom_low_v), c.opamp.gbw_spread_frac, vf_rel, spread,
                 c.control.port, rest_conductance(c), second)


def _draw(rng, n: int, normal: bool) -> np.ndarray:
    """n draws in [-1, 1]: uniform, or a normal with sigma 1/3 truncated at +/-1."""
    if not normal:
        return rng.uniform(-1.0, 1.0, n)
    x = rng.normal(0.0, 1.0 / 3.0, n)
    bad = np.abs(x) > 1
    while np.any(bad):
        x[bad] = rng.normal(0.0, 1.0 / 3.0, int(bad.sum()))
        bad = np.abs(x) > 1
    return x


def draw_builds(model: Model, spec: Spec, n: int, rng) -> dict:
    """n builds: temperature (K), supply (V), each part's value at that temperature
    (ohm, F) and the op-amp's GBW over its nominal."""
    flags = tuple((model.normal[role], model.band[role][0] > 0) for role in model.values)
    t, vs, raw, g = _raw_draws(rng, n, (spec.temperature.min_k, spec.temperature.max_k),
                               (spec.supply.min_v, spec.supply.max_v), flags)
    dt = t - T_REF
    v = {}
    for (role, nominal), (d, u_tc, u_band) in zip(model.values.items(), raw):
        x = nominal * (1 + model.tol[role] * d)
        tc_nom, tc_spread = model.tempco[role]
        b, half = model.band[role]
        drift = (tc_nom + tc_spread * u_tc) * dt
        if b > 0:
            drift = drift + b * np.clip(np.abs(dt) / half, 0, 1) * u_band
        v[role] = x * (1 + drift)
    return {"t": t, "vs": vs, "v": v, "gbw": 1 + model.gbw_spread * g}


_RAW: dict = {}   # _raw_draws: the draws by the generator's state and what they are drawn for
_RAW_KEPT = 6     # (about 5 MB each at 20,000 builds of ten parts)


def _raw_draws(rng, n: int, t_range: tuple, v_range: tuple, flags: tuple) -> tuple:
    """The draws draw_builds scales, in its order: temperature (K) and supply (V)
    uniform over their ranges; per part (flags: whether its tolerance is normal,
    whether it has a temperature band) its tolerance draw in [-1, 1] (_draw), its
    tempco draw and its band draw (uniform in [-1, 1]; None without a band); the GBW
    draw. They depend only on the generator's state and these arguments, which every
    candidate of one run shares (one seed): kept per process and replayed, the
    generator left in the state drawing them leaves it in (the same numbers to the last
    bit, drawn once). Read-only: the caller builds new arrays from them."""
    key = (repr(rng.bit_generator.state), n, t_range, v_range, flags)
    if key in _RAW:
        draws, after = _RAW[key]
        rng.bit_generator.state = after
        return draws
    t = rng.uniform(*t_range, n)
    vs = rng.uniform(*v_range, n)
    raw = []
    for normal, banded in flags:
        d = _draw(rng, n, normal)
        u_tc = rng.uniform(-1, 1, n)
        raw.append((d, u_tc, rng.uniform(-1, 1, n) if banded else None))
    draws = (t, vs, tuple(raw), _draw(rng, n, True))
    for a in (t, vs, draws[3], *(x for r in raw for x in r if x is not None)):
        a.flags.writeable = False
    if len(_RAW) >= _RAW_KEPT:
        del _RAW[next(iter(_RAW))]
    _RAW[key] = (draws, rng.bit_generator.state)
    return draws


def frequency_and_startup(model: Model, b: dict) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Per build: frequency (Hz), ln of (1 + gain excess) and whether it starts, from
    the topology's equations over the drawn values."""
    v = b["v"]
    topo = model.topology
    f0 = topo.f0_hz(v)
    ln_m = np.log(margin_fn(topo, model.port, model.g_rest)(v)) - model.loss_op / b["gbw"]
    dlnm = ln_m - math.log(1 + model.m_lin)
    ln_f = (np.log(f0) + model.pull_op / b["gbw"] + model.pull_h + model.s_pull * dlnm
            + np.interp(b["t"], model.temps, model.dpull_t))
    return np.exp(ln_f), ln_m, ln_m > 0


def monte_carlo(model: Model, spec: Spec, *, samples: int = 20_000, seed: int = 1, stats: bool = True) -> YieldResult:
    """Vectorised Monte Carlo yield of one candidate (see module docstring); ``stats``:
    False leaves out the figures' mean, spread and 0.1 % / 99.9 % quantiles (the yield
    and shares are the same; the search's placement reads the yield alone)."""
    rng = np.random.default_rng(seed)
    n = samples
    b = draw_builds(model, spec, n, rng)
    t, vs = b["t"], b["vs"]
    freq, ln_m, starts = frequency_and_startup(model, b)
    dlnm = ln_m - math.log(1 + model.m_lin)
    ln_a = model.ln_amp + model.s_amp * dlnm + np.interp(t, model.temps, model.dln_amp_t)
    thd = model.thd + model.s_thd * dlnm
    if model.spread is not None:
        # the control's own parts, build by build (its amplitude spread included)
        own = model.spread.draw(rng, b)
        ln_m = ln_m + own["ln_margin"]
        starts = ln_m > 0
        ln_a = ln_a + own["ln_amp"]
        thd = thd - model.thd + own["thd"]
    else:
        ln_a = ln_a + np.log1p(model.vf_spread_rel * _draw(rng, n, True))
    m = np.expm1(ln_m)
    amp = np.exp(ln_a)
    vcc, vee, ref = _rails(spec, vs)
    osc = amp * model.osc_per_load
    swing_ok = (osc <= vcc - model.swing_head[0] - ref) & (osc <= ref - vee - model.swing_head[1])
    f_ok = np.abs(freq / spec.frequency.target_hz - 1) <= spec.frequency.tolerance_frac
    a_ok = np.abs(amp / spec.amplitude.peak_v - 1) <= spec.amplitude.tolerance_frac
    thd_ok = thd <= spec.max_thd_frac
    ok = starts & f_ok & a_ok & thd_ok & swing_ok
    share = {"startup": float(starts.mean()), "frequency": float((starts & f_ok).mean()),
             "amplitude": float((starts & a_ok).mean()), "thd": float((starts & thd_ok).mean()),
             "swing": float((starts & swing_ok).mean())}
    if model.second is not None:
        a2_ok, thd2_ok, q_ok = _second_output(model, spec, b, amp, dlnm)
        ok &= a2_ok & thd2_ok & q_ok
        share["amplitude"] = float((starts & a_ok & a2_ok).mean())
        share["thd"] = float((starts & thd_ok & thd2_ok).mean())
        if spec.quadrature is not None:
            share["quadrature"] = float((starts & q_ok).mean())
    figures = {}
    for name, arr in (("frequency_hz", freq), ("amplitude_v", amp), ("thd", thd), ("margin", m)) if stats else ():
        a_ = arr[starts] if name != "margin" else arr
        if a_.size:
            q001, q999 = np.quantile(a_, (0.001, 0.999))   # (one partition for both)
            figures[name] = {"mean": float(a_.mean()), "std": float(a_.std(ddof=1)) if a_.size > 1 else 0.0,
                             "q001": float(q001), "q999": float(q999)}
    y = float(ok.mean())
    return YieldResult(n, seed, y, share, figures, samples_needed(y), freq[starts], amp[starts])


def _second_output(model: Model, spec: Spec, b: dict, amp: np.ndarray, dlnm: np.ndarray):
    """Per build, whether the second output meets the amplitude and THD requirements
    (when the spec gives it a load, load_cosine: else it is not used) and the quadrature
    requirements (when the spec asks): its amplitude ratio moves with the topology's
    ideal ratio over the drawn values (output_ratio: the parts' tolerances and tempcos),
    its phase error (the op-amps' excess lag) inversely with the drawn GBW, its THD with
    the gain excess."""
    pk_ratio, f_ratio, phase, thd2, s_thd2, ideal = model.second
    k = model.topology.output_ratio(b["v"]) / ideal
    a2_ok = np.abs(amp * pk_ratio * k / spec.amplitude.peak_v - 1) <= spec.amplitude.tolerance_frac
    thd2_ok = thd2 + s_thd2 * dlnm <= spec.max_thd_frac
    if spec.load_cosine is None:
        a2_ok = thd2_ok = np.ones(amp.shape, bool)
    q = spec.quadrature
    if q is None:
        return a2_ok, thd2_ok, np.ones(amp.shape, bool)
    q_ok = (np.abs(f_ratio * k - 1) <= q.amplitude_match_frac) & (np.abs(phase / b["gbw"]) <= q.phase_error_rad)
    return a2_ok, thd2_ok, q_ok


def _rails(spec: Spec, vs: np.ndarray):
    if spec.supply.kind == "dual":
        return vs, -vs, 0.0
    return vs, 0.0, vs / 2


def worst_case(model: Model, spec: Spec) -> dict:
    """Corner analysis: each part at the end of its tolerance in the direction that
    hurts (signs from the sensitivities of the topology's equations: the margin falls
    with some parts up and others down; the frequency moves with every part it depends
    on), at the temperature ends; returns the worst margin, the lowest and highest
    frequency (Hz) and the amplitude range (V)."""
    out = {}
    t_ends = (spec.temperature.min_k, spec.temperature.max_k)
    v, tol = model.values, model.tol
    topo = model.topology

    def tc(role, dt, sign):
        nom, spread = model.tempco[role]
        b, half = model.band[role]
        return (nom + sign * spread) * dt + sign * b * min(abs(dt) / half, 1.0)

    def corner(dt: float, directions: dict[str, float]) -> dict:
        vals = dict(v)
        for role, s in directions.items():
            vals[role] = v[role] * (1 + s * tol[role]) * (1 + tc(role, dt, s))
        return vals

    m_fn = margin_fn(topo, model.port, model.g_rest)
    m_dirs = {r: -math.copysign(1.0, s) for r, s in log_sensitivities(v, m_fn).items() if r in tol}
    f_dirs = {r: math.copysign(1.0, s) for r, s in log_sensitivities(v, topo.f0_hz).items() if r in tol}
    worst_m = math.inf
    for t in t_ends:
        g_k = float(m_fn(corner(t - T_REF, m_dirs)))
        worst_m = min(worst_m, math.expm1(math.log(g_k) - model.loss_op / (1 - model.gbw_spread)))
    out["margin"] = worst_m
    fs = []
    for t in t_ends:
        dt = t - T_REF
        for s in (+1, -1):
            f0 = float(topo.f0_hz(corner(dt, {r: s * d for r, d in f_dirs.items()})))
            for gbw in (1 - model.gbw_spread, 1 + model.gbw_spread):
                fs.append(math.exp(math.log(f0) + model.pull_op / gbw + model.pull_h
                                   + float(np.interp(t, model.temps, model.dpull_t))))
    out["frequency_hz"] = (min(fs), max(fs))
    amps = [math.exp(model.ln_amp + float(np.interp(t, model.temps, model.dln_amp_t))) * (1 + s * model.vf_spread_rel)
            for t in t_ends for s in (+1, -1)]
    out["amplitude_v"] = (min(amps), max(amps))
    return out


def with_yield(verdict: Verdict, c: Circuit, bom: Bom, catalog: Catalog, spec: Spec, *,
               samples: int = 20_000, seed: int = 1) -> tuple[Verdict, YieldResult, dict]:
    """The verdict with the Monte Carlo yield added as a requirement ('yield.min'), the
    Monte Carlo result and the worst-case corners."""
    model = model_for(c, bom, catalog, spec, verdict)
    y = monte_carlo(model, spec, samples=samples, seed=seed)
    wc = worst_case(model, spec)
    checks = tuple(c for c in verdict.checks if c.name != "startup at worst tolerance corner")
    # The worst corner stacks every tolerance at once; with the Monte Carlo the startup
    # requirement is the share of builds that start, against the yield asked for.
    checks += (
        make_check("startup yield (Monte Carlo)", "yield.min", y.share["startup"], spec.yield_min_frac, None, "fraction",
               f"worst tolerance corner {wc['margin'] * 100:+.2f} % margin"),
        make_check("yield (Monte Carlo)", "yield.min", y.yield_frac, spec.yield_min_frac, None, "fraction",
               f"{samples} builds, seed {seed}; frequency {y.share['frequency']:.1%}, amplitude "
               f"{y.share['amplitude']:.1%}, THD {y.share['thd']:.1%}"
               + (f", quadrature {y.share['quadrature']:.1%}" if "quadrature" in y.share else "")
               + f"; {y.needed} builds give +/-0.5 %"),
    )
    return dataclasses.replace(verdict, checks=checks), y, wc
