"""Verification of one candidate against a spec: predictions at the operating points
that matter, and every requirement as a check with its margin.

Operating points: nominal (mid supply, nominal temperature), the supply ends at the
nominal temperature (the swing is judged at the minimum supply) and the temperature
ends at mid supply. Each point is solved by harmonic balance when a limiter sets the
amplitude and the op-amp stays linear; otherwise (no limiter, clipping, slewing, current
limit) by transient simulation of the full nonlinear circuit to its settled state.
Part tolerances enter here only as the worst-case corner of the startup margin
(the tolerance Monte Carlo is :mod:`partpick.tolerance`)."""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from partpick import units
from partpick.circuits import (Circuit, Conditions, balance, build_loop, build_netlist, linear, log_sensitivities,
                               margin_fn, periphery, rest_conductance, settled)
from partpick.derating import bias_r_max, package_limit
from partpick.physics.envelope import START_V
from partpick.physics.harmonic import BalanceResult, NeedsTransient, output_figures
from partpick.physics.linear import LinearResult
from partpick.physics.opamp import class_b_loss, loop_figures, power_factor, swing_limits
from partpick.sensitivity import input_capacitance, limiter_capacitance
from partpick.spec import Spec

__all__ = ["OperatingPoint", "OutputPoint", "Check", "Verdict", "predict", "verify", "worst_case_margin",
           "clipping_supply", "operating_conditions", "transient_cycles_for", "make_check", "package_limit",
           "TransientSummary", "transient_check", "nominal_spectrum", "settling_of", "cycles_to_settle"]

@dataclass(frozen=True, slots=True)
class OutputPoint:
    """A further output at its load (a quadrature oscillator's cosine): peak_v (half
    the peak-to-peak value, V), thd (fraction, harmonics 2..9), ratio (its fundamental's
    amplitude over the first load's) and phase_rad (by how much its fundamental leads
    the first load's, rad)."""

    peak_v: float
    thd: float
    ratio: float
    phase_rad: float


@dataclass(frozen=True, slots=True)
class OperatingPoint:
    """What the physics predicts at one operating point.

    freq_hz (Hz), osc_peak_v / load_peak_v (half peak-to-peak, V), osc_thd / load_thd
    (fraction, harmonics 2..9); x_min_v / x_max_v: op-amp internal output swing
    relative to the signal reference (V); swing_low_v / swing_high_v: the op-amp's
    limits there (V); slew_v_per_s; iout_peak_a / iout_rms_a (A); method: 'harmonic
    balance', 'transient' or 'none' (no oscillation); regime: 'limiter', 'swing',
    'slew', 'current' or 'no startup'; freq_per_cap_hz_f: d freq_hz / d C for a
    capacitance C added across the control's element (Hz/F, NaN unless harmonic balance
    solved the point) and cap_eff_f: the capacitance that element presents to the
    fundamental (F); outputs: each further output of the topology (probe name ->
    :class:`OutputPoint`). The op-amp figures are the worst of every channel."""

    cond: Conditions
    lin: LinearResult
    starts: bool
    freq_hz: float
    osc_peak_v: float
    load_peak_v: float
    osc_thd: float
    load_thd: float
    x_min_v: float
    x_max_v: float
    swing_low_v: float
    swing_high_v: float
    slew_v_per_s: float
    iout_peak_a: float
    iout_rms_a: float
    method: str
    regime: str
    freq_per_cap_hz_f: float = math.nan
    cap_eff_f: float = 0.0
    balance: BalanceResult | None = field(default=None, compare=False, repr=False)   # a warm start for neighbours
    outputs: dict = field(default_factory=dict, compare=False)


@dataclass(frozen=True, slots=True)
class Check:
    """One requirement: the predicted value, its limits, pass/fail and the margin
    (distance to the nearest limit in the value's unit, positive when inside).
    dim names the unit for formatting (see :mod:`partpick.units`). A check with no
    limit at all is information (a sensitivity), never a failure."""

    name: str
    field: str
    value: float
    low: float | None
    high: float | None
    dim: str
    passed: bool
    margin: float
    note: str = ""

    @property
    def is_info(self) -> bool:
        """Information only: no limit to meet."""
        return self.low is None and self.high is None


@dataclass(frozen=True, slots=True)
class Verdict:
    """Everything verification says about one candidate."""

    checks: tuple[Check, ...]
    nominal: OperatingPoint
    corners: dict = field(default_factory=dict, hash=False, compare=False)
    cautions: tuple[str, ...] = ()
    worst_margin: float = math.nan

    @property
    def passed(self) -> bool:
        return all(c.passed for c in self.checks)

    def failed(self) -> tuple[Check, ...]:
        return tuple(c for c in self.checks if not c.passed)

    def requirements(self) -> tuple[Check, ...]:
        """The checks that judge a requirement (not the information rows)."""
        return tuple(c for c in self.checks if not c.is_info)


def predict(c: Circuit, cond: Conditions, *, transient_cycles: float | None = None, transient: bool = True,
            analysed=None) -> OperatingPoint:
    """Predict the settled oscillation of ``c`` at ``cond`` (see module docstring);
    ``analysed``: the point's (loop, linear result, balance) already found (``settled``,
    which may start the balance from a neighbouring point's: the same answer, sooner);
    ``transient`` False raises NeedsTransient where a transient run would be needed."""
    loop, lin, hb = analysed or settled(c, cond)
    lo, hi = swing_limits(c.opamp, cond.rails(c.supply_kind))
    if not lin.starts:
        return OperatingPoint(cond, lin, False, math.nan, 0.0, 0.0, math.nan, math.nan, 0.0, 0.0, lo, hi,
                              0.0, 0.0, 0.0, "none", "no startup")
    if hb is not None and hb.holds:
        return _from_balance(cond, lin, hb, lo, hi)
    if not transient:
        raise NeedsTransient
    return _from_transient(c, cond, lin, loop, lo, hi, transient_cycles)


def _output_point(peak_v: float, thd: float, rel: complex | None) -> OutputPoint:
    if rel is None or not np.isfinite(rel):
        return OutputPoint(peak_v, thd, math.nan, math.nan)
    return OutputPoint(peak_v, thd, abs(rel), float(np.angle(rel)))


def _from_balance(cond, lin, hb: BalanceResult, lo, hi) -> OperatingPoint:
    outs = {name: _output_point(*output_figures(h, hb.load_harmonics)) for name, h in hb.outputs.items()}
    return OperatingPoint(cond, lin, True, hb.freq_hz, hb.osc_peak_v, hb.load_peak_v, hb.osc_thd, hb.load_thd,
                          hb.x_min_v, hb.x_max_v, lo, hi, hb.slew_v_per_s, hb.iout_peak_a, hb.iout_rms_a,
                          "harmonic balance", "limiter", hb.freq_per_cap_hz_f, hb.cap_eff_f, hb, outs)


def transient_cycles_for(lin: LinearResult, f_hz: float, final_v: float = 10.0, kick_v: float = 0.01) -> float:
    """Cycles to simulate: build-up at the small-signal growth rate, time for the
    amplitude to settle (about eight growth time constants) and 20 cycles to analyse."""
    tau_cycles = 1.0 / (lin.growth_per_s / f_hz)
    build = math.log(final_v / kick_v) * tau_cycles
    return float(min(max(build + 8 * tau_cycles + 25, 60), 1500))


POINTS_PER_CYCLE = 200  # transient steps per period


def _from_transient(c, cond, lin, loop, lo, hi, cycles) -> OperatingPoint:
    from partpick.physics.transient import simulate
    from partpick.physics.waveform import ENVELOPE_SETTLED, relative_fundamental

    net = build_netlist(c, cond)
    cycles = cycles or transient_cycles_for(lin, c.f0_hz)
    # every channel's node x and output current, under harmonic balance's probe names
    probes = {**{a.x: f"x:{a.name}" for a in loop.amps}, **{a.iout: f"iout:{a.name}" for a in loop.amps}}
    try:
        res = simulate(net, cycles=cycles, points_per_cycle=POINTS_PER_CYCLE,
                       record=("osc", "load", *loop.outputs, *probes.values()), settled=ENVELOPE_SETTLED)
    except RuntimeError:   # no DC operating point to start from: not a circuit that runs here
        res = None
    osc, load = (res.stats("osc"), res.stats("load")) if res is not None else (None, None)
    if osc is None or load is None:
        return OperatingPoint(cond, lin, False, math.nan, 0.0, 0.0, math.nan, math.nan, 0.0, 0.0, lo, hi,
                              0.0, 0.0, 0.0, "transient", "no startup")
    rails = cond.rails(c.supply_kind)
    n = 20 * POINTS_PER_CYCLE  # the last 20 cycles, as the waveform analysis takes
    t = res.t_s[-n:]
    # every channel's swing, slew and current by harmonic balance's rule (the swing at node x,
    # which the output clamp holds: the pin sits inside it by the drop across Ro, hiding clipping)
    xs = {a.x for a in loop.amps}
    series = {p: res.v[name][-n:] - (rails[2] if p in xs else 0.0) for p, name in probes.items()}
    regime, (x_min, x_max, slew, iout, iout_rms) = loop_figures(loop.amps, rails, series.__getitem__,
                                                                 lambda s: s, lambda s: np.gradient(s, t))
    outs = {name: _output_point(st.peak_v, st.thd_frac, relative_fundamental(res.t_s, res.v["load"], res.v[name]))
            for name in loop.outputs if (st := res.stats(name)) is not None}
    return OperatingPoint(cond, lin, True, osc.freq_hz, osc.peak_v, load.peak_v, osc.thd_frac, load.thd_frac,
                          x_min, x_max, lo, hi, slew, iout, iout_rms, "transient", regime, outputs=outs)


def settling_of(c: Circuit, p: OperatingPoint, band_rel: tuple[float, float] | None = None,
                start_v: float = START_V):
    """How the amplitude gets to ``p`` from power-on (a
    :class:`partpick.physics.envelope.Settling`, from the amplitude control's envelope
    model), or None when it does not start. band_rel: the amplitude band relative to
    the settled amplitude (default +/-2 %); start_v: the output's amplitude the power-on
    leaves, V."""
    if not p.starts:
        return None
    cond = p.cond
    loop = build_loop(c, cond)
    hb = balance(c, cond, p.lin, loop=loop)
    lo, hi = band_rel or (0.98, 1.02)
    final = hb.osc_peak_v if hb is not None else p.osc_peak_v
    clip = min(p.swing_high_v, -p.swing_low_v)
    return c.control.settling(c, cond, loop, p.lin, hb, (lo * final, hi * final), start_v, clip)


def cycles_to_settle(c: Circuit, p: OperatingPoint, final_v: float = 10.0) -> float:
    """Cycles a transient run needs to settle and show 20 settled cycles: from the
    control's own envelope when it is a slow one (a loop of its own), else from the
    build-up (:func:`transient_cycles_for`)."""
    if getattr(c.control, "slow", False) and p.starts:
        st = settling_of(c, p, (0.995, 1.005))
        if st is not None and math.isfinite(st.settle_s):
            return float(min(st.settle_s * p.freq_hz * 1.2 + 25, 20000))
    return transient_cycles_for(p.lin, c.f0_hz, final_v)


def clipping_supply(c: Circuit, p: OperatingPoint) -> float:
    """Supply (V; per rail when dual) below which the op-amp's swing no longer holds the
    oscillation at ``p``: each excursion plus the headroom on its side."""
    need = max(p.x_max_v + c.opamp.headroom_high_v, -p.x_min_v + c.opamp.headroom_low_v)
    return need if c.supply_kind == "dual" else 2 * need


def worst_case_margin(c: Circuit, tolerances: dict[str, float], pull: float = 0.0) -> float:
    """Startup margin at the worst tolerance corner: every part the margin depends on at
    the end of its tolerance that lowers it (the directions from the sign of its
    sensitivity in the topology's own equations), plus ``pull`` (the margin the
    op-amp and limiter leakage cost, from the linear analysis)."""
    fn = margin_fn(c.topology, c.control.port, rest_conductance(c))
    sens = log_sensitivities(c.values, fn)
    corner = dict(c.values)
    for role, s in sens.items():
        corner[role] = corner[role] * (1 - math.copysign(tolerances.get(role, 0.0), s))
    return float(fn(corner)) - 1 + pull


def make_check(name, field_, value, low, high, dim, note="") -> Check:
    """A check of ``value`` against [low, high] (either may be None), its margin the
    distance to the nearer limit."""
    inside = (low is None or value >= low) and (high is None or value <= high)
    dists = [d for d in ((value - low) if low is not None else None, (high - value) if high is not None else None)
             if d is not None]
    margin = min(dists) if dists else math.inf
    return Check(name, field_, float(value), low, high, dim, bool(inside) and math.isfinite(value), float(margin),
                 note)


def operating_conditions(spec: Spec) -> dict[str, Conditions]:
    """The named operating points verification looks at."""
    s, t, ld = spec.supply, spec.temperature, spec.load
    l2 = (spec.load_cosine.resistance_ohm, spec.load_cosine.capacitance_f) if spec.load_cosine else (math.inf, 0.0)
    loads = (ld.resistance_ohm, ld.capacitance_f, *l2)
    mid = (s.min_v + s.max_v) / 2
    pts = {"nominal": Conditions(mid, t.nominal_k, *loads)}
    if s.min_v != s.max_v:
        pts["supply min"] = Conditions(s.min_v, t.nominal_k, *loads)
        pts["supply max"] = Conditions(s.max_v, t.nominal_k, *loads)
    if t.min_k != t.max_k:
        pts["temp min"] = Conditions(mid, t.min_k, *loads)
        pts["temp max"] = Conditions(mid, t.max_k, *loads)
    return pts


def _tempco_drift(c: Circuit, tempcos: dict[str, tuple[float, float]], dt_k: float) -> tuple[float, float]:
    """Range of the relative f0 change over a temperature step dt_k (K): each part the
    frequency depends on (exponent s = d ln f0 / d ln value, from the topology's
    equation) drifting by its nominal tempco +/- its spread (1/K)."""
    lo = hi = 0.0
    for role, s in log_sensitivities(c.values, c.topology.f0_hz).items():
        nom, spread = tempcos.get(role, (0.0, 0.0))
        a, b = s * (nom - spread) * dt_k, s * (nom + spread) * dt_k
        lo += min(a, b)
        hi += max(a, b)
    return lo, hi


def verify(c: Circuit, spec: Spec, *, tolerances: dict[str, float] | None = None,
           tempcos: dict[str, tuple[float, float]] | None = None, ratings: dict[str, float] | None = None,
           points: dict[str, OperatingPoint] | None = None) -> Verdict:
    """Check ``c`` against every requirement of ``spec``.

    tolerances: role -> value tolerance (fraction); tempcos: role -> (nominal, spread)
    tempco (1/K); ratings: role -> power rating (W). ``points``: the predictions at
    every operating point (by name, see :func:`operating_conditions`) already made, as
    :func:`partpick.points.predict_points` makes them where they are not given.
    """
    tolerances, tempcos, ratings = tolerances or {}, tempcos or {}, ratings or {}
    conds = operating_conditions(spec)
    if points is None:
        from partpick.points import predict_points   # (it builds on this module's predict)
        points = predict_points(c, conds)
    pts = dict(points)
    nom = pts["nominal"]
    checks: list[Check] = []
    cautions: list[str] = []
    f, a = spec.frequency, spec.amplitude

    pull = nom.lin.margin - c.ideal_margin
    checks.append(make_check("startup margin", "frequency", nom.lin.margin, 0.0, None, "fraction",
                         "small-signal loop gain at the phase-zero frequency, minus 1"))
    wc = worst_case_margin(c, tolerances, pull)
    checks.append(make_check("startup at worst tolerance corner", "frequency", wc, 0.0, None, "fraction",
                         "each part at the end of its tolerance that lowers the margin"))
    if not nom.starts:
        return Verdict(tuple(checks), nom, pts, ("the circuit does not start: no oscillation",), wc)

    # Frequency: nominal, then over temperature with the limiter's change and the parts' tempcos.
    err_nom = nom.freq_hz / f.target_hz - 1
    checks.append(make_check("frequency (nominal)", "frequency.target", nom.freq_hz, f.min_hz, f.max_hz, "frequency",
                         f"error {err_nom * 100:+.3f} %, by {nom.method}"))
    worst_f = [nom.freq_hz]
    for name in ("temp min", "temp max"):
        if name in pts and pts[name].starts:
            dt = pts[name].cond.temp_k - spec.temperature.nominal_k
            lo, hi = _tempco_drift(c, tempcos, dt)
            worst_f += [pts[name].freq_hz * (1 + lo), pts[name].freq_hz * (1 + hi)]
        elif name in pts:
            worst_f.append(math.nan)
    worst = max(worst_f, key=lambda x: abs(x / f.target_hz - 1) if math.isfinite(x) else math.inf)
    checks.append(make_check("frequency over temperature", "temperature", worst, f.min_hz, f.max_hz, "frequency",
                         "worst of the temperature ends with the parts' tempcos"))
    limiter = limiter_capacitance(spec, nom)
    if limiter is not None:
        checks.append(Check("frequency per pF at the limiter", "frequency.tolerance", limiter[0], None, None,
                            "frequency", True, math.inf, limiter[1]))
    cautions += [x for x in (limiter and limiter[2], input_capacitance(spec, c)) if x]

    # Amplitude at the load over supply and temperature.
    lo_a, hi_a = a.peak_v * (1 - a.tolerance_frac), a.peak_v * (1 + a.tolerance_frac)
    checks.append(make_check("amplitude at load (nominal)", "amplitude.target", nom.load_peak_v, lo_a, hi_a, "voltage",
                         f"{nom.load_peak_v * 2:.4g} Vpp, {nom.load_peak_v / math.sqrt(2):.4g} Vrms"))
    amps = {n: p.load_peak_v if p.starts else 0.0 for n, p in pts.items()}
    wname = max(amps, key=lambda n: abs(amps[n] / a.peak_v - 1))
    checks.append(make_check("amplitude over supply and temperature", "amplitude.tolerance", amps[wname], lo_a, hi_a,
                         "voltage", f"worst at {wname}"))
    thds = {n: p.load_thd for n, p in pts.items() if p.starts}
    tname = max(thds, key=lambda n: thds[n])
    checks.append(make_check("THD at load", "distortion.max_thd", thds[tname], None, spec.max_thd_frac, "fraction",
                         f"worst at {tname}"))
    for name in nom.outputs:
        checks += _output_checks(c, spec, pts, name)
    if spec.settling_max_s is not None:
        checks.append(_settling_check(c, nom, spec))

    # Op-amp limits at the minimum supply.
    low_pt = pts.get("supply min", nom)
    head = min(low_pt.swing_high_v - low_pt.x_max_v, low_pt.x_min_v - low_pt.swing_low_v)
    clip_at = clipping_supply(c, nom)
    clip_note = ("clipping" if low_pt.regime == "swing" else
                 f"clipping starts below {'+/-' if c.supply_kind == 'dual' else ''}{clip_at:.3g} V")
    checks.append(make_check("output swing headroom at minimum supply", "supply.min", head, 0.0, None, "voltage",
                         clip_note))
    sr = c.opamp.slew_v_per_s
    need = max(p.slew_v_per_s for p in pts.values())
    checks.append(make_check("slew rate needed", "frequency.target", need, None, sr, "slew_rate",
                         f"2 pi f Vpk = {2 * math.pi * nom.freq_hz * nom.osc_peak_v / 1e6:.3g} V/µs; op-amp {sr / 1e6:.3g} V/µs"))
    ipk = max(p.iout_peak_a for p in pts.values())
    y_load = spec.load.admittance_s(nom.freq_hz)   # the part of the load that takes most of the current binds
    load_field = "load.capacitance" if y_load.imag > y_load.real else "load.resistance"
    share, rated = spec.derating.output_current, c.opamp.output_current_a   # (derating rule output_current)
    i_max, i_how = share * rated, f"{share:.0%} of {units.format_quantity(rated, 'current')}"
    checks.append(make_check("op-amp output current", load_field, ipk, None, i_max, "current", f"load, "
                             f"{c.topology.network_name} and gain network; limit {i_how}"))
    if periphery.has_buffer(c):   # the output stage's own channel drives the load: its current and swing
        i_buf = max(p.load_peak_v for p in pts.values()) * abs(periphery.stage_load_admittance(c, y_load))
        checks.append(make_check("output stage current", load_field, i_buf, None, i_max, "current",
                                 f"the buffer channel into the load; limit {i_how}"))
        buf_head = min(low_pt.swing_high_v, -low_pt.swing_low_v) - low_pt.load_peak_v
        checks.append(make_check("output stage swing headroom", "supply.min", buf_head, 0.0, None, "voltage",
                             "the buffer channel at the minimum supply"))
        ipk = max(ipk, i_buf)
    span_lo, span_hi = spec.supply.span_min_v, spec.supply.span_max_v
    op = c.opamp
    sup_margin = min(span_lo - op.supply_min_v, op.supply_max_v - span_hi)
    checks.append(make_check("op-amp supply range", "supply", sup_margin, 0.0, None, "voltage",
                         f"needs {span_lo:g}..{span_hi:g} V, part takes {op.supply_min_v:g}..{op.supply_max_v:g} V"))
    # The bias current through the largest frequency-setting resistor (derating rule bias_drop).
    arm_r = max((c.value(s.role) for s in c.topology.slots if s.role in c.topology.network_roles
                 and s.dim == "resistance"), default=0.0)
    r_max = bias_r_max(op, spec.derating)
    checks.append(make_check("input bias drop", "frequency.target", op.input_bias_a * arm_r, None,
                             op.input_bias_a * r_max, "voltage", f"{units.format_quantity(op.input_bias_a, 'current')}"
                             f" through {units.format_quantity(arm_r, 'resistance')}; limit "
                             f"{units.format_quantity(float(f'{r_max:.4g}'), 'resistance')} (derating rule bias_drop)"))
    # Inputs swing around the reference by the output over the network's required gain.
    vcc, vee, ref = low_pt.cond.rails(c.supply_kind)
    vin = c.topology.input_swing_v(c, nom.osc_peak_v)
    cm_head = min(vcc - op.input_cm_high_v - (ref + vin), (ref - vin) - (vee + op.input_cm_low_v))
    checks.append(make_check("input common-mode headroom", "supply.min", cm_head, 0.0, None, "voltage",
                         c.topology.input_note + ", at the minimum supply"))

    # Dissipation (fundamental only; the harmonics carry little power).
    vo = nom.osc_peak_v
    share = spec.derating.resistor_power
    for role, p_w in c.topology.dissipation(c, nom.freq_hz, vo).items():
        rating = ratings.get(role)
        if rating and p_w > share * rating:
            cautions.append(f"{role} dissipates {p_w * 1e3:.3g} mW, over {share:.0%} of its {rating * 1e3:.3g} mW "
                            f"rating (derating rule resistor_power)")
    p_op, packages = _package_dissipation(c, spec, nom)
    limit, how = package_limit(op, spec)
    checks.append(make_check("op-amp package dissipation", "supply.max", p_op, None, limit, "power",
                             f"quiescent plus output stage at the maximum supply, {packages}; limit {how}"))
    if p_op > 0.5 * limit:
        cautions.append(f"the op-amp package dissipates about {p_op:.2g} W of its {limit:.2g} W limit; check its "
                        f"thermal rating and copper")
    if ipk > 0.7 * op.output_current_a:
        cautions.append("the op-amp runs near its output current limit: the load is heavy for it; use a buffer "
                        "or a higher-current part")
    if c.supply_kind == "single" and periphery.coupling_gain(spec, c.value("coupling_c")) < 0.9:
        cautions.append("the output coupling capacitor loses over 10 % of the amplitude: the load's amplitude follows "
                        "its value, tolerance and temperature; a larger one (or a dual supply) is steadier")
    if span_hi > 0.9 * op.supply_max_v:
        cautions.append("the maximum supply is within 10 % of the op-amp's absolute supply rating")
    cautions.append("low-voltage signal circuit: for anything mains-connected or safety-related follow local "
                    "codes and licensed practice")
    return Verdict(tuple(checks), nom, pts, tuple(cautions), wc)


def _output_checks(c: Circuit, spec: Spec, pts: dict, name: str) -> list[Check]:
    """A further output's checks: its amplitude and THD at its load against the same
    requirements as the first load's (when the spec gives it a load), and its phase and amplitude against the first
    load's (the spec's quadrature requirements; information rows without them), each
    the worst of the operating points."""
    word, target = c.topology.output_labels.get(name, name), c.topology.output_phase_rad.get(name, 0.0)
    a, q = spec.amplitude, spec.quadrature
    lo_a, hi_a = a.peak_v * (1 - a.tolerance_frac), a.peak_v * (1 + a.tolerance_frac)
    max_thd = spec.max_thd_frac
    if spec.load_cosine is None:   # an output the spec does not use: its figures shown, not required
        lo_a = hi_a = max_thd = None
    outs = {n: p.outputs[name] for n, p in pts.items() if p.starts and name in p.outputs}
    nom = outs.get("nominal")
    if nom is None:
        return []

    def worst(fn, bad):   # (value, where) at the operating point where bad(value) is largest (NaN worst)
        vals = {n: fn(o) for n, o in outs.items()}
        n = max(vals, key=lambda k: bad(vals[k]) if math.isfinite(vals[k]) else math.inf)
        return vals[n], n

    amp, wa = worst(lambda o: o.peak_v, lambda v: abs(v / a.peak_v - 1))
    thd, wt = worst(lambda o: o.thd, lambda v: v)
    err, wp = worst(lambda o: math.remainder(o.phase_rad - target, 2 * math.pi), abs)
    match, wm = worst(lambda o: o.ratio - 1, abs)
    lim_p = (-q.phase_error_rad, q.phase_error_rad) if q is not None else (None, None)
    lim_m = (-q.amplitude_match_frac, q.amplitude_match_frac) if q is not None else (None, None)
    return [make_check(f"amplitude at {word} load (nominal)", "amplitude.target", nom.peak_v, lo_a, hi_a, "voltage",
                       f"{nom.peak_v * 2:.4g} Vpp, {nom.peak_v / math.sqrt(2):.4g} Vrms"),
            make_check(f"amplitude at {word} load over supply and temperature", "amplitude.tolerance", amp, lo_a, hi_a,
                       "voltage", f"worst at {wa}"),
            make_check(f"THD at {word} load", "distortion.max_thd", thd, None, max_thd, "fraction",
                       f"worst at {wt}"),
            make_check(f"phase error at {word} load", "quadrature.phase_error", err, *lim_p, "angle",
                       f"{math.degrees(target + err):.4g} deg from the first load, worst at {wp}"),
            make_check(f"amplitude match at {word} load", "quadrature.amplitude_match", match, *lim_m, "fraction",
                       f"fundamental over the first load's, minus 1; worst at {wm}")]


def _settling_check(c: Circuit, nom: OperatingPoint, spec: Spec) -> Check:
    """Time from power-on until the amplitude at the load stays within its tolerance."""
    a = spec.amplitude
    ratio = nom.load_peak_v / nom.osc_peak_v if nom.osc_peak_v > 0 else 1.0
    band = tuple(a.peak_v * (1 + s * a.tolerance_frac) / ratio / nom.osc_peak_v for s in (-1, 1))
    st = settling_of(c, nom, band)
    if st is None:
        return make_check("settling time", "settling.max", math.inf, None, spec.settling_max_s, "time",
                          "no settled oscillation")
    note = (f"start-up {st.startup_s * 1e3:.3g} ms, overshoot {st.overshoot * 100:.3g} %, damping {st.damping:.2g}"
            if math.isfinite(st.startup_s) else "the amplitude never reaches its band")
    return make_check("settling time", "settling.max", st.settle_s, None, spec.settling_max_s, "time", note)


def _package_dissipation(c: Circuit, spec: Spec, nom: OperatingPoint) -> tuple[float, str]:
    """(W, which package) the hottest op-amp package dissipates at the maximum supply:
    the quiescent power of every channel it holds (catalog figures are per channel) plus
    the output stage of each channel in use, class B (:func:`partpick.physics.opamp.class_b_loss`; a
    buffer's load at its power factor: a capacitive load takes current, not power);
    an amplitude control's integrator channel counts as a channel in use, its output
    stage's loss left out (it drives a JFET's gate: microamps)."""
    op, span = c.opamp, spec.supply.span_max_v
    # each of the topology's channels at the worst channel's output current
    losses = [class_b_loss(span / 2, nom.osc_peak_v, nom.iout_peak_a)] * c.topology.channels
    if periphery.has_buffer(c):
        y = periphery.stage_load_admittance(c, spec.load.admittance_s(nom.freq_hz))
        losses.append(class_b_loss(span / 2, nom.load_peak_v, nom.load_peak_v * abs(y), power_factor(y)))
    quiescent = span * op.quiescent_current_a * op.channels
    used = periphery.channels_used(c)
    if op.channels >= used:
        return quiescent + sum(losses), f"{used} of {op.channels} channel(s) in one package"
    if op.channels == 1:
        return quiescent + max(losses), "one channel per package, the hotter one"
    hottest = sorted(losses, reverse=True)[:op.channels]
    return quiescent + sum(hottest), f"{op.channels} of {used} channels in the hotter package"


@dataclass(frozen=True, slots=True)
class TransientSummary:
    """What a transient run of the nominal circuit shows: whether it starts, the cycles
    simulated, the waveform statistics at the load (None when no oscillation shows) and
    the time after which the amplitude stays within 2 % (s, None if not in the run)."""

    starts: bool
    cycles: float = 0.0
    stats: object = None
    settle_s: float | None = None


def transient_check(c: Circuit, cond: Conditions) -> TransientSummary:
    """Simulate ``c`` at ``cond`` from a small kick to its settled state."""
    from partpick.physics.transient import simulate
    from partpick.physics.waveform import settle_time

    point = predict(c, cond)
    if not point.starts:
        return TransientSummary(False)
    net = build_netlist(c, cond)
    cycles = cycles_to_settle(c, point, max(point.osc_peak_v, 1e-3))
    res = simulate(net, cycles=cycles, record=("osc", "load"))
    st = res.stats("load")
    if st is None:
        return TransientSummary(True, cycles)
    return TransientSummary(True, cycles, st, settle_time(res.t_s, res.v["load"], st.peak_v))


def nominal_spectrum(c: Circuit, cond: Conditions) -> tuple[float, tuple[complex, ...]] | None:
    """(frequency in Hz, complex harmonics 1..K of the load voltage in V) of the steady
    state at ``cond`` by harmonic balance; None when it does not apply."""
    hb = balance(c, cond, linear(c, cond))
    return None if hb is None else (hb.freq_hz, hb.load_harmonics)
