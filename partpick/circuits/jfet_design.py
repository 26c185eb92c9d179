"""The design rule of the JFET amplitude control: from a target (frequency, amplitude,
THD, settling time, supply, temperatures) and the allowed parts to standard values for
every slot, checked with the control's own physics.

Steps (each a rule of the JFET voltage-controlled-resistor application notes and of
loop design, with the choices made explicit):

1. **The branch** (series resistor R10, Rg, Rf): the weakest JFET of the family (VTO at
   its smallest magnitude, BETA at its minimum, at the hot end) must still start the
   oscillation with the margin the tolerances need; the ground leg without the JFET
   must give less gain than the network needs (so every JFET can bring the gain down);
   the operating channel resistance r_op then follows. Candidates are scored by a
   first-order THD estimate (the channel's residual harmonics through the series
   resistor and Rf), the best confirmed by the physics.
2. **The gate network**: two equal resistors (linearisation) of 100 kohm order, far
   above the channel and the series resistor.
3. **The detector**: the bleed resistor for about 10 uA of hold current, the hold
   capacitor for a release time constant R13 C5 of a tenth of the settling time (at
   least ten periods).
4. **The loop**: the envelope's gain sigma_v = d sigma / d V_C (from the loop), the
   detector gain dV_H / dA = 1, the PI integrator: natural frequency w_n from the
   settling time, damping 0.9: tau_i = R14 C6 = sigma_v A / w_n^2, tau_z = R15 C6 =
   2 zeta / w_n (the second-order PI loop, any control text, e.g. Franklin, Powell and
   Emami-Naeini, Feedback Control of Dynamic Systems, "PI control"); C7 puts a pole at
   six times the crossover, which takes the detector's ripple off the proportional path.
5. **The reference**: the divider R16 / R17 from the positive rail (a fixed supply) or
   from a voltage reference (a supply with a range), at the hold's mean for the target
   amplitude, the pair of standard values nearest the ratio.

Then the settled oscillation and the settling envelope are computed for the design; the
integrator is made faster (or slower, for THD) until both hold, in a few steps.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace

import numpy as np

from partpick.circuits.base import Conditions
from partpick.circuits.options import nearest
from partpick.physics.envelope import Settling
from partpick.physics.jfet import jfet_at
from partpick.physics.opamp import swing_limits

__all__ = ["Target", "AgcDesign", "design", "target_for", "weakest"]

MARGIN_FLOOR = 0.004         # gain excess beyond the worst tolerance corner (as the search keeps)
GATE_R = 220e3               # gate network, ohm: far above the channel and R10
HOLD_CURRENT = 10e-6         # detector bleed current, A
ZETA = 0.9                   # the integrator loop's damping
MIN_DAMPING = 0.3            # the least damping ratio a design keeps (at the settled point)
POLE_RATIO = 6.0             # C7's pole over the loop's crossover
# the rule designs for this share of the THD a design may take, so that the builds'
# spread (the search assumes 30 %, designed.THD_SPREAD) stays under the limit
# (partpick's choice, no published source)
THD_AIM = 0.8


@dataclass(frozen=True, slots=True)
class Target:
    """What the control must do: f_hz (Hz), amp_v (V peak at the oscillator output),
    thd_max (fraction), settle_max_s (s, None: no limit), temps_k (min, nominal, max),
    supply (kind, min V, max V), tol_loss: the gain the network and gain resistors may
    lose to tolerances and drift (fraction), amp_tol: the amplitude's tolerance
    (fraction)."""

    f_hz: float
    amp_v: float
    thd_max: float
    settle_max_s: float | None
    temps_k: tuple[float, float, float]
    supply: tuple[str, float, float]
    tol_loss: float = 0.02
    amp_tol: float = 0.05


@dataclass(frozen=True, slots=True)
class AgcDesign:
    """A design: values (role -> ohm, F), parts (role -> catalog record), families (role
    -> capacitor family id), and what the physics predicts at the nominal point (amp_v,
    thd, settle_s, overshoot, damping, margin: the nominal JFET's startup margin),
    or why none was found (why)."""

    values: dict = field(default_factory=dict)
    parts: dict = field(default_factory=dict)
    families: dict = field(default_factory=dict)
    amp_v: float = math.nan
    freq_hz: float = math.nan
    thd: float = math.nan
    settle_s: float = math.nan
    overshoot: float = math.nan
    damping: float = math.nan
    margin: float = math.nan
    why: str = ""

    @property
    def ok(self) -> bool:
        return not self.why


def weakest(jfet):
    """The weakest part of a JFET family's spread (the least channel conductance): VTO
    at its smallest magnitude, BETA at its minimum."""
    return jfet.with_parameters(jfet.vto_max_v, jfet.beta_min_a_per_v2)


def _corners(jfet, temps_k):
    """(weakest part, strongest part, the weakest's largest r_on over temperature):
    r_DS(on) = 1 / (2 BETA |VTO|)."""
    weak = weakest(jfet)
    strong = jfet.with_parameters(jfet.vto_min_v, jfet.beta_max_a_per_v2)
    r_weak = max(jfet_at(weak, t).r_on_ohm for t in temps_k)
    return weak, strong, r_weak


def _thd_estimate(p, r_ser: float, r_op: float, rf: float, amp_v: float, per_port: float, lin: bool) -> float:
    """First-order THD of the channel alone: its harmonic current at V_DS = the port's
    share across the channel, through the series resistor to the virtual ground and Rf
    to the output (see module docstring)."""
    vd = amp_v / per_port * r_op / (r_ser + r_op)
    g = 1.0 / r_op
    if lin:
        i_h = g * p.lam * vd * vd * 8 / (15 * math.pi)         # |V| V: third harmonic
    else:
        i_h = p.beta * vd * vd / 2                               # V^2: second harmonic
    return rf * i_h * r_op / (r_ser + r_op) / amp_v


def _branch_candidates(topo, tgt: Target, jfet, rvals, lin: bool):
    """(THD estimate, R10, Rg, Rf, r_op) for the gain network and series resistor, best
    estimate first (see module docstring, step 1)."""
    weak, strong, r_weak = _corners(jfet, tgt.temps_k)
    k_req = topo.reference_required_gain
    need = tgt.tol_loss + MARGIN_FLOOR
    per_port = topo.osc_per_port(topo.gain_values(10e3, 20e3), "ground")
    p_strong = jfet_at(strong, tgt.temps_k[0])
    out = []
    for rf in sorted({nearest(rvals, x) for x in (10e3, 22e3, 47e3)}):
        # ground-leg conductance (fixed part 1/Rg plus the branch) the network needs,
        # and what the weakest JFET at rest must give
        g_op = topo.port_conductance_needed(topo.gain_values(math.inf, rf), "ground")
        g_start = g_op * (1 + need * k_req / (k_req - 1))
        for rs in rvals:
            if not 5 * r_weak <= rs <= 1.0 / g_op:
                continue
            g_rg_min = g_start - 1.0 / (rs + r_weak)
            if g_rg_min <= 0:
                continue
            # the largest Rg that still starts the weakest part: the least margin, so the
            # channel works furthest from pinch-off
            below = [v for v in rvals if v <= 1.0 / g_rg_min]
            if not below:
                continue
            rg = below[-1]
            if 1.0 / rg >= g_op:
                continue
            r_op = 1.0 / (g_op - 1.0 / rg) - rs
            # the strongest part must stay well inside its triode region at r_op
            vgst = 1.0 / (2 * p_strong.beta * r_op)
            vd = tgt.amp_v / per_port * r_op / (rs + r_op)
            if vd > 0.5 * vgst * (2 if lin else 1):
                continue
            thd = _thd_estimate(p_strong, rs, r_op, rf, tgt.amp_v, per_port, lin)
            out.append((thd, rs, rg, rf, r_op))
    out.sort()
    return out


def _cap(cfams, want_f: float):
    """(value F, family) nearest want_f on a log scale among the allowed non-polarised
    families, the cheaper on near ties (10 % bins)."""
    best = None
    for fam in cfams:
        if "electrolytic" in fam.dielectric.lower():
            continue
        vals = fam.values()
        if not vals:
            continue
        v = nearest(vals, want_f)
        key = (round(abs(math.log(v / want_f)) / 0.1), fam.unit_price(v), v)
        if best is None or key < best[0]:
            best = (key, v, fam)
    return (best[1], best[2]) if best else (None, None)


def _divider(rvals, want_v: float, achieved, guess) -> tuple[float, float]:
    """(upper, lower) standard values whose divider gives the reference want_v (V):
    for each lower value between 1 and 22 kohm the two standard upper values around
    the one ``guess(lower)`` (the divider ratio) asks for, judged by
    ``achieved(upper, lower)`` (V). Two values of one series give ratios in steps of
    that series, so the reference lands within half a step."""
    best = None
    for lo in (v for v in rvals if 1e3 <= v <= 22e3):
        want_up = lo * (1 / guess(lo) - 1)
        above = [v for v in rvals if v >= want_up][:1]
        below = [v for v in rvals if v < want_up][-1:]
        for up in above + below:
            err = abs(achieved(up, lo) / want_v - 1)
            if best is None or err < best[0]:
                best = (err, up, lo)
    return best[1], best[2]


DIODE_TEMPCO = 2e-3     # V/K, a silicon junction's forward-voltage drift (handbook figure, order of magnitude)


def _compensate(tgt: Target) -> bool:
    """Whether the detector diode's drift over the temperature range would take more
    than a third of the amplitude tolerance: then a compensating diode pays."""
    dt = max(tgt.temps_k[2] - tgt.temps_k[1], tgt.temps_k[1] - tgt.temps_k[0])
    return DIODE_TEMPCO * dt / tgt.amp_v > tgt.amp_tol / 3


def _sigma_slope(loop, vcr, vc: float) -> float:
    """d sigma / d V_C (1/(V s)) of the envelope at control voltage vc (V)."""
    from partpick.physics.envelope import growth_rate
    from partpick.physics.jfet import JfetBranch, dc_point, small_signal

    def sig(x):
        vd, vg = dc_point(vcr, x)
        return growth_rate(loop, JfetBranch(vcr, small_signal(vcr, vd, vg)))

    h = 0.02
    return (sig(vc + h) - sig(vc - h)) / (2 * h)


class _Build:
    """The design being made: the topology, target, parts and the resistor and
    capacitor families, and its values (role -> ohm, F) and capacitor families."""

    def __init__(self, topo, tgt: Target, parts: dict, rvals, cfams, gv: dict) -> None:
        from partpick.circuits.jfet_agc import CONTROL

        self.topo, self.tgt, self.parts, self.rvals, self.cfams = topo, tgt, parts, rvals, cfams
        self.vals, self.fams = dict(gv), {}
        self.gv = gv
        self.control = CONTROL.name
        kind, s_min, s_max = tgt.supply
        self.cond = Conditions(0.5 * (s_min + s_max), tgt.temps_k[1], math.inf)

    def circuit(self, **extra):
        return self.topo.reference(self.tgt.f_hz, self.gv, self.parts["opamp"], self.control, self.parts,
                                   {**self.vals, **extra})

    def cap(self, role: str, want_f: float) -> bool:
        v, fam = _cap(self.cfams, want_f)
        if v is None:
            return False
        self.vals[role], self.fams[role] = v, fam.id
        return True

    def integrator(self, loop, vcr, vc_op: float, w_n: float) -> bool:
        """The PI integrator for the natural frequency w_n (rad/s) and damping ZETA
        around the operating control voltage vc_op (V): step 4 of the module
        docstring."""
        k = _sigma_slope(loop, vcr, vc_op) * self.tgt.amp_v
        tau_i, tau_z = k / w_n ** 2, 2 * ZETA / w_n
        if not self.cap("agc_ci", tau_i / 330e3):
            return False
        ci = self.vals["agc_ci"]
        self.vals.update(agc_ri=nearest(self.rvals, tau_i / ci), agc_rz=nearest(self.rvals, tau_z / ci))
        return self.cap("agc_cp", 1 / (POLE_RATIO * 2 * ZETA * w_n * self.vals["agc_rz"]))

    def reference(self, diode, reference) -> None:
        """The reference divider (and the compensating diode): step 5."""
        from partpick.circuits.jfet_agc import model, reference_source_v
        from partpick.physics.detector import hold_waveform

        tgt = self.tgt
        self.parts["clamp"] = diode
        if reference is not None:
            self.parts["vref"] = reference
            self.vals["agc_rrb"] = nearest(self.rvals, (tgt.supply[1] - reference.voltage_v)
                                           / (2 * reference.min_current_a))
        probe = self.circuit(agc_rr1=9e3, agc_rr2=1e3)
        det = model(probe, self.cond).hold_detector()
        self.src = reference_source_v(probe, self.cond)
        # the hold's mean for the target amplitude, the integrator's input at that mean
        mean = tgt.amp_v - 0.5
        for _ in range(3):
            det = replace(det, loads=det.loads[:-1] + ((1 / self.vals["agc_ri"], mean),))
            mean = hold_waveform(det, tgt.amp_v, tgt.f_hz).mean_v
        self.drop = 0.0
        self.parts.pop("comp", None)
        self.vals.pop("agc_rc", None)
        i_c = float(det.junction.current(np.array([tgt.amp_v - mean]))[0]) if _compensate(tgt) else 0.0
        if i_c > 0 and mean > 0:   # (an amplitude under the detector's drop leaves nothing to compensate)
            # D5 at the current that drops what the detector drops: they drift alike
            self.parts["comp"] = diode
            self.vals["agc_rc"] = nearest(self.rvals, mean / i_c)
            self.drop = tgt.amp_v - mean
        self.mean = mean
        self.aim(mean)

    def aim(self, want_v: float) -> None:
        """The divider pair that gives the reference want_v (V)."""
        from partpick.circuits.jfet_agc import v_plus

        i_rc = want_v / self.vals["agc_rc"] if "agc_rc" in self.vals else 0.0

        def achieved(up, lo):
            return v_plus(self.circuit(agc_rr1=up, agc_rr2=lo), self.cond)

        def guess(lo):
            return min((want_v + self.drop + i_rc * lo) / self.src, 0.95)

        self.vals["agc_rr1"], self.vals["agc_rr2"] = _divider(self.rvals, want_v, achieved, guess)


def design(topo, tgt: Target, jfet, diode, reference, rfam, cfams, opamp, *, linearise: bool = True,
           integrator: bool = True) -> AgcDesign:
    """A design for ``tgt`` (see module docstring) with the JFET ``jfet``, the detector
    and clamp diode ``diode``, the voltage reference ``reference`` (None: the divider
    hangs from the positive rail, which suits a fixed supply), resistors of ``rfam``,
    capacitors of ``cfams``, on ``topo``'s reference network with ``opamp``; the first
    candidate that meets THD and settling, else the best tried with ``why`` set."""
    if not integrator:
        return AgcDesign(why="the rule designs the control with an integrator only: without one the loop's gain "
                             "is sigma_v A, set by the pinch-off, too fast for a peak detector that samples once a "
                             "cycle unless the hold capacitor is large, and then the amplitude bounces (damping "
                             "near 0.1)")
    rvals = rfam.values()
    cands = _branch_candidates(topo, tgt, jfet, rvals, linearise)
    if not cands:
        return AgcDesign(why="no series resistor and Rg let the weakest JFET start and keep the strongest in its "
                             "triode region")
    tried = None
    # the estimate is first order: keep the candidates within a factor three of the limit
    for _, rs, rg, rf, r_op in [c_ for c_ in cands if c_[0] < 3 * tgt.thd_max][:3]:
        b = _Build(topo, tgt, {"opamp": opamp, "jfet": jfet, "detector": diode}, rvals, cfams,
                   topo.gain_values(rg, rf))
        got = _tune(b, rs, r_op, linearise, diode, reference)
        if got is None:
            continue
        if got.ok:
            return got
        tried = got
    if tried is None:
        return AgcDesign(why="no allowed capacitor family fits, or the physics found no settled oscillation")
    return tried


def _tune(b: _Build, rs: float, r_op: float, linearise: bool, diode, reference) -> AgcDesign | None:
    """Steps 2 to 5 for one branch, then the physics: the loop made faster while the
    settling is too slow, slower while the THD is too high (the ripple's share), a few
    times; the last try (with ``why``) when none holds, None when none could be built."""
    from partpick.circuits import build_loop, linear
    from partpick.circuits.jfet_agc import CONTROL, model, v_plus
    from partpick.physics.agc import settled

    tgt, rvals = b.tgt, b.rvals
    period = 1.0 / tgt.f_hz
    budget = tgt.settle_max_s or 200 * period
    b.vals.update(agc_rs=rs, agc_rlb=nearest(rvals, GATE_R))
    if linearise:
        b.vals["agc_rla"] = b.vals["agc_rlb"]
    b.vals["agc_rb"] = nearest(rvals, max(tgt.amp_v - 0.5, 0.2) / HOLD_CURRENT)
    if not b.cap("agc_ch", max(10 * period, budget / 10) / b.vals["agc_rb"]):
        return None
    loop = build_loop(b.circuit(), b.cond)
    vcr = model(b.circuit(), b.cond).vcr
    p = vcr.jfet
    vc_op = (1 / (p.beta * r_op) + 2 * p.vto_v) if linearise else (1 / (2 * p.beta * r_op) + p.vto_v)
    w_n = min(12 / (ZETA * budget), 2 * math.pi * tgt.f_hz / 30)
    kind = tgt.supply[0]
    lo_sw, hi_sw = swing_limits(b.parts["opamp"], b.cond.rails(kind))
    last, got = None, None

    def tried(settle_s: float, overshoot: float, damping: float, why: str) -> AgcDesign:
        """The design as it stands, with this try's settled oscillation (hb, lin)."""
        return AgcDesign(dict(b.vals), dict(b.parts), dict(b.fams), hb.osc_peak_v, hb.freq_hz, hb.osc_thd,
                         settle_s, overshoot, damping, lin.margin, why)

    for _ in range(4):
        if not b.integrator(loop, vcr, vc_op, w_n):
            return got
        b.reference(diode, reference)
        if b.mean <= 0:
            return AgcDesign(why=f"the amplitude, {tgt.amp_v * 1e3:.3g} mV peak at the oscillator, is under the "
                                 "detector diode's drop at its hold current: no reference voltage sets it")
        c = b.circuit()
        lin = linear(c, b.cond)
        hb, _ = settled(loop, model(c, b.cond), lin, b.cond.rails(kind))
        for _ in range(2):
            if hb is None or abs(hb.osc_peak_v / tgt.amp_v - 1) < 5e-4:
                break
            # the output's DC offset and the ripple move the detector a little: aim the
            # divider again with the amplitude the physics found (dA / dV+ = 1)
            b.aim(v_plus(c, b.cond) + tgt.amp_v - hb.osc_peak_v)
            c = b.circuit()
            hb, _ = settled(loop, model(c, b.cond), lin, b.cond.rails(kind))
        if hb is None or not hb.converged:
            return got
        if hb.regime != "limiter":
            # an op-amp out of its linear range (the integrator at its swing: the
            # control voltage the amplitude needs lies beyond it); the loop's speed does
            # not change that, and the envelope map would only run to its cycle limit
            return tried(math.inf, math.nan, math.nan, f"best tried: the op-amps leave their linear range "
                                                        f"({hb.regime}): the control does not hold the amplitude")
        clip = min(hi_sw, -lo_sw)
        if tgt.settle_max_s is None and (zeta := CONTROL.damping(c, b.cond, clip_v=clip)) is not None \
                and zeta < MIN_DAMPING:
            # no settling time asked, and a loop this lightly damped fails on its damping
            # whatever its envelope does: the run from power-on (up to 100,000 cycles of
            # the map, a minute at 67 kHz) is not made
            stl = Settling(math.nan, math.nan, math.nan, zeta, np.zeros(0), np.zeros(0))
        else:
            stl = CONTROL.settling(c, b.cond, loop, lin, hb, (0.98 * hb.osc_peak_v, 1.02 * hb.osc_peak_v),
                                   clip_v=clip)
        slow = tgt.settle_max_s is not None and not stl.settle_s <= tgt.settle_max_s
        ok = hb.osc_thd <= tgt.thd_max and not slow and stl.damping >= MIN_DAMPING
        settling = f"settling {stl.settle_s * 1e3:.3g} ms, " if not math.isnan(stl.settle_s) else ""
        why = "" if ok else f"best tried: THD {hb.osc_thd * 100:.3g} %, {settling}damping {stl.damping:.2g}"
        got = tried(stl.settle_s, stl.overshoot, stl.damping, why)
        if ok:
            return got
        if not slow and last is not None and hb.osc_thd > 0.8 * last:
            break       # a slower loop no longer helps: the channel itself distorts
        last = None if slow else hb.osc_thd
        w_n *= 1.6 if slow else 1 / 1.6
    return got


def target_for(spec, f_hz: float, amp_v: float, rfam, z: float, temps_k=None) -> Target:
    """The design target for ``spec`` at the oscillator amplitude amp_v (V peak) and
    f_hz (Hz): its THD limit (THD_AIM of the share a design may use at its nominal
    point, the spec's derating rule ``thd_share``), settling time, temperatures (temps_k: min,
    nominal, max in K; default the spec's) and supply; the tolerance loss of the network
    and gain resistors at the yield's quantile z (three ratios of two parts each,
    first-order) and their drift apart over the temperature range."""
    from partpick.circuits.options import sigma

    t = spec.temperature
    temps = tuple(temps_k) if temps_k is not None else (t.min_k, t.nominal_k, t.max_k)
    s = spec.supply
    loss = z * math.sqrt(3 * 2) * sigma(rfam) + 2 * rfam.tempco_per_k * max(temps[2] - temps[1], temps[1] - temps[0])
    return Target(f_hz, amp_v, spec.max_thd_frac * spec.derating.thd_share * THD_AIM, spec.settling_max_s, temps,
                  (s.kind, s.min_v, s.max_v), loss, spec.amplitude.tolerance_frac)
