"""The Wien-bridge oscillator: slots, equations, loop, netlist, search hooks, drawing.

Series arm Rs + Cs from the op-amp output to the non-inverting input, shunt arm
Rp || Cp from there to the reference (ground, or the mid-rail bias on a single
supply). Non-inverting gain 1 + Rf/Rg. Two control ports: 'feedback', across Rf (a
limiter there brings the gain down as it conducts), and 'ground', across Rg, from the
inverting input to the reference (a variable resistor there, such as a JFET channel,
raises the gain as its conductance grows).

Network (any circuits text, e.g. Sedra and Smith, Microelectronic Circuits, chapter
on sinusoidal oscillators): beta(s) = Zp / (Zs + Zp), f0 = 1 / (2 pi sqrt(Rs Rp Cs Cp)),
and the amplifier gain needed at f0 is 1 + Rs/Rp + Cp/Cs (3 for equal arms).
"""

from __future__ import annotations

import math
from collections.abc import Mapping

import numpy as np

from partpick.circuits import periphery
from partpick.circuits.base import Circuit, Conditions, Core, Slot, Values
from partpick.circuits.options import NetOption, cap_tempco, dt_of, merge_lines, nearest, sigma, values_of, z_of
from partpick.physics.loop import AmpProbe, Loop
from partpick.physics.netlist import Capacitor, OpAmpX, Resistor
from partpick.physics.opamp import open_loop_gain, output_resistance
from partpick.physics.rational import const, parallel

__all__ = ["WienBridge", "TOPOLOGY", "SLOTS", "ARM_ROLES", "GAIN_ROLES", "circuit"]

SLOTS = (
    Slot("rs", "resistors", "R1", "series arm resistor"),
    Slot("cs", "capacitors", "C1", "series arm capacitor"),
    Slot("rp", "resistors", "R2", "shunt arm resistor"),
    Slot("cp", "capacitors", "C2", "shunt arm capacitor"),
    Slot("rg", "resistors", "R3", "gain network, to the reference"),
    Slot("rf", "resistors", "R4", "gain network, feedback"),
)
ARM_ROLES = ("rs", "cs", "rp", "cp")      # the frequency-setting arms
GAIN_ROLES = ("rg", "rf")                 # the amplifier's gain network


class WienBridge:
    """The Wien-bridge topology (see module docstring)."""

    name = "wien-bridge"
    title = "Wien-bridge oscillator"
    network_name = "Wien network"
    slots = SLOTS
    channels = 1
    ports = ("feedback", "ground")
    network_roles = ARM_ROLES   # the frequency-setting slots

    # -- equations, vectorised over builds (role -> array of values) ------------------------
    def f0_hz(self, v: Mapping[str, np.ndarray]) -> np.ndarray:
        """Textbook frequency 1 / (2 pi sqrt(Rs Rp Cs Cp)), Hz (ideal amplifier)."""
        return 1.0 / (2 * np.pi * np.sqrt(v["rs"] * v["rp"] * v["cs"] * v["cp"]))

    def required_gain(self, v: Mapping[str, np.ndarray]) -> np.ndarray:
        """Amplifier gain at f0 for loop gain 1: 1 + Rs/Rp + Cp/Cs (3 for equal arms)."""
        return 1.0 + v["rs"] / v["rp"] + v["cp"] / v["cs"]

    def gain(self, v: Mapping[str, np.ndarray]) -> np.ndarray:
        """Small-signal non-inverting gain 1 + Rf/Rg (amplitude control at rest)."""
        return 1.0 + v["rf"] / v["rg"]

    def port_gain(self, v: Mapping[str, np.ndarray], port: str, g_s) -> np.ndarray:
        """The gain with a conductance g_s (S) at ``port``: across Rf (its resistance
        falls) or across Rg (its conductance adds to Rg's)."""
        if port == "ground":
            return 1.0 + v["rf"] * (1.0 / v["rg"] + g_s)
        return 1.0 + 1.0 / (1.0 / v["rf"] + g_s) / v["rg"]

    # -- the loop at the control port ------------------------------------------------------------
    def loop(self, c: Circuit, cond: Conditions, w_ref: float | None = None) -> Loop:
        """The small-signal equations at the control's port (see :meth:`_feedback_loop`
        and :meth:`_ground_loop`)."""
        w = w_ref or 2 * math.pi * c.f0_hz
        beta, yx = self._network(c, w)
        y_out = periphery.output_admittance(c, cond, w)
        if y_out is not None:
            yx = yx + y_out
        make = self._ground_loop if c.control.port == "ground" else self._feedback_loop
        return make(c, cond, w, beta, yx)

    def _feedback_loop(self, c: Circuit, cond: Conditions, w: float, beta, yx) -> Loop:
        """The small-signal equations at the 'feedback' port (a branch across Rf): the
        op-amp's A0, GBW, optional second pole and output resistance, the load, the
        output stage's input and, on a single supply, the coupling capacitor. The bias
        node is taken as AC ground.

        With the branch voltage Vf (across Rf) and current I, the current through Rg is
        If = yf Vf + I, the output Vo = Vf + Rg If, the output current
        Iout = Yx Vo + If (Yx: the Wien network and what the output stage loads the
        output with), the op-amp's internal voltage X = Vo + Ro Iout, and
        X = A (beta Vo - Rg If). Hence alpha Vf + gamma I = 0 with
        alpha = Q0 (1 + Rg yf) + (Ro + A Rg) yf, gamma = Q0 Rg + Ro + A Rg,
        Q0 = 1 + Ro Yx - A beta; the loop gain broken at the non-inverting input is
        L = beta A (1 + Rg y) / ((1 + Rg y)(1 + Ro Yx) + (Ro + A Rg) y), y = yf + Y.
        """
        rg = c.value("rg")
        yf = const(1.0 / c.value("rf"))
        a = open_loop_gain(c.opamp, w)
        ro = output_resistance(c.opamp)
        one = const(1.0)
        q0 = one + yx.scale(ro) - a * beta
        k = const(ro) + a.scale(rg)
        g1 = one + yf.scale(rg)                      # Vo per Vf at I = 0
        alpha = q0 * g1 + k * yf
        gamma = q0.scale(rg) + k
        d0 = g1 * (one + yx.scale(ro)) + k * yf
        d1 = (one + yx.scale(ro)).scale(rg) + k
        cv_i = yx * g1 + yf                          # output current per Vf
        ci_i = yx.scale(rg) + one                    # ... per I
        tl = periphery.to_load(c, cond, w)
        probes = (
            ("osc", g1, const(rg)),
            ("load", tl * g1, tl.scale(rg)),
            ("U1A.iout", cv_i, ci_i),
            ("U1A.x", g1 + cv_i.scale(ro), const(rg) + ci_i.scale(ro)),
        )
        return Loop(w, alpha, gamma, d0, d1, probes, (AmpProbe("U1A", c.opamp, "U1A.x", "U1A.iout"),))

    def _ground_loop(self, c: Circuit, cond: Conditions, w: float, beta, yx) -> Loop:
        """The small-signal equations at the 'ground' port (a branch across Rg, from the
        inverting input to the reference; its current raises the gain).

        With the branch voltage Vn (the inverting input) and current I, the current
        through Rf is yg Vn + I (yg = 1/Rg), so Vo = g1 Vn + Rf I with g1 = 1 + Rf yg;
        the output current Iout = Yx Vo + yg Vn + I, X = Vo + Ro Iout and
        X = A (beta Vo - Vn). Hence alpha Vn + gamma I = 0 with
        alpha = Q0 g1 + Ro yg + A, gamma = Q0 Rf + Ro, Q0 = 1 + Ro Yx - A beta; the
        loop gain broken at the non-inverting input is L = A beta G / D with
        G = g1 + Rf Y and D = G (1 + Ro Yx) + Ro (yg + Y) + A, so
        d0 = g1 (1 + Ro Yx) + Ro yg + A and d1 = Rf (1 + Ro Yx) + Ro; a drawn current J
        adds Ro J to the constraint (inject = Ro).
        """
        rf = c.value("rf")
        yg = 1.0 / c.value("rg")
        a = open_loop_gain(c.opamp, w)
        ro = output_resistance(c.opamp)
        one = const(1.0)
        q0 = one + yx.scale(ro) - a * beta
        g1 = 1.0 + rf * yg                           # Vo per Vn at I = 0
        ryx = one + yx.scale(ro)
        alpha = q0.scale(g1) + const(ro * yg) + a
        gamma = q0.scale(rf) + const(ro)
        d0 = ryx.scale(g1) + const(ro * yg) + a
        d1 = ryx.scale(rf) + const(ro)
        # a current J drawn from the output adds Ro J to X = Vo + Ro Iout: eta = Ro
        cv_i = yx.scale(g1) + const(yg)              # output current per Vn
        ci_i = yx.scale(rf) + one                    # ... per I
        tl = periphery.to_load(c, cond, w)
        probes = (
            ("osc", const(g1), const(rf)),
            ("load", tl.scale(g1), tl.scale(rf)),
            ("U1A.iout", cv_i, ci_i),
            ("U1A.x", const(g1) + cv_i.scale(ro), const(rf) + ci_i.scale(ro)),
        )
        return Loop(w, alpha, gamma, d0, d1, probes, (AmpProbe("U1A", c.opamp, "U1A.x", "U1A.iout"),), const(ro))

    def _network(self, c: Circuit, w: float):
        """(beta = Zp / (Zs + Zp), the network's input admittance 1 / (Zs + Zp)) in p = s / w."""
        zs = const(c.value("rs")) + periphery.impedance_c(c.value("cs"), w)
        zp = parallel(const(c.value("rp")), periphery.impedance_c(c.value("cp"), w))
        return zp / (zs + zp), (zs + zp).inv()

    def beta(self, c: Circuit, w_ref: float):
        """The Wien network's transfer Zp / (Zs + Zp) as a rational function of p = s / w_ref."""
        return self._network(c, w_ref)[0]

    # -- netlist ------------------------------------------------------------------------------------
    def netlist(self, c: Circuit, ref: str, neg: str) -> Core:
        """The arms, the gain network and the op-amp (channel U1A) between the output
        'out', the inputs 'np' / 'nn' and the reference node ``ref``."""
        v = c.value
        els = (
            Resistor("R1", "out", "sa", v("rs")),
            Capacitor("C1", "sa", "np", v("cs")),
            Resistor("R2", "np", ref, v("rp")),
            Capacitor("C2", "np", ref, v("cp")),
            Resistor("R3", "nn", ref, v("rg")),
            Resistor("R4", "out", "nn", v("rf")),
            OpAmpX("U1A", "np", "nn", "out", "vcc", neg, c.opamp),
        )
        return Core(els, "out", {"feedback": ("out", "nn"), "ground": ("nn", ref)}, "np", v("cp"))

    # -- what verification asks of the topology -----------------------------------------------
    def input_swing_v(self, c: Circuit, osc_peak_v: float) -> float:
        """Peak swing of the op-amp inputs around the reference, V: beta = 1/K at f0."""
        return osc_peak_v / c.required_gain

    def dissipation(self, c: Circuit, freq_hz: float, osc_peak_v: float) -> dict[str, float]:
        """Average power in each resistor of the topology from the fundamental at
        freq_hz (Hz) and the output peak osc_peak_v (V), W."""
        w = 2 * math.pi * freq_hz
        vo = osc_peak_v
        zs = complex(c.value("rs"), -1 / (w * c.value("cs")))
        # beta = Zp / (Zs + Zp) with Zp = Rp / (1 + j w Rp Cp)
        beta = 1.0 / (1.0 + zs * complex(1.0, w * c.value("rp") * c.value("cp")) / c.value("rp"))
        vp = abs(beta) * vo
        # The series arm carries the voltage difference Vo (1 - beta) across |Zs|.
        zs_i = vo * abs(1 - beta) / abs(zs)
        vn = vo / c.gain
        return {
            "rs": 0.5 * zs_i ** 2 * c.value("rs"),
            "rp": 0.5 * vp ** 2 / c.value("rp"),
            "rg": 0.5 * vn ** 2 / c.value("rg"),
            "rf": 0.5 * (vo - vn) ** 2 / c.value("rf"),
        }

    def nudge_gain(self, c: Circuit, rel: float) -> Circuit:
        """The circuit with its gain-setting resistor Rf raised by the fraction rel."""
        return c.with_values(rf=c.value("rf") * (1 + rel))

    # -- search hooks ----------------------------------------------------------------------------
    arm_r = (1e3, 470e3)        # arm resistances, ohm: above op-amp loading, below bias/stray trouble
    arm_c_min = 100e-12         # arm capacitors, F: well above stray capacitance
    max_options = 90            # arm sets handed to the solver per family pair

    def network_options(self, spec, rf, cf, ln_lo: float, ln_hi: float, price, r_bounds=None,
                        centres: np.ndarray | None = None, half_width: float = 0.0, shelf=None) -> list[NetOption]:
        """Arm sets of one family pair with ln f0 in [ln_lo, ln_hi]: a sorted
        meet-in-the-middle over ln(Rs Rp) and ln(Cs Cp), ratios kept near 1 so the
        required gain stays near 3."""
        r_bounds = r_bounds or self.arm_r
        r = np.array([v for v in values_of(rf, shelf)
                      if max(self.arm_r[0], r_bounds[0]) <= v <= min(self.arm_r[1], r_bounds[1])])
        c = np.array([v for v in values_of(cf, shelf) if v >= self.arm_c_min])
        if r.size == 0 or c.size == 0:
            return []
        ri, rj = np.meshgrid(np.arange(r.size), np.arange(r.size), indexing="ij")
        rat = r[ri] / r[rj]
        keep = (rat >= 0.8) & (rat <= 1.25)
        rs_i, rp_i = ri[keep], rj[keep]
        ci, cj = np.meshgrid(np.arange(c.size), np.arange(c.size), indexing="ij")
        crat = c[cj] / c[ci]
        keep = (crat >= 0.8) & (crat <= 1.25)
        cs_i, cp_i = ci[keep], cj[keep]
        lr = np.log(r[rs_i]) + np.log(r[rp_i])
        lc = np.log(c[cs_i]) + np.log(c[cp_i])
        order = np.argsort(lc)
        lc_sorted = lc[order]
        # ln f0 = -ln(2 pi) - (lr + lc)/2  in [ln_lo, ln_hi]  <=>  lc in [a - lr, b - lr]
        a_ = -2 * (ln_hi + math.log(2 * math.pi))
        b_ = -2 * (ln_lo + math.log(2 * math.pi))
        lo = np.searchsorted(lc_sorted, a_ - lr, side="left")
        hi = np.searchsorted(lc_sorted, b_ - lr, side="right")
        counts = hi - lo
        if counts.sum() == 0:
            return []
        ki = np.repeat(np.arange(lr.size), counts)
        offs = np.arange(counts.sum()) - np.repeat(np.cumsum(counts) - counts, counts)
        ci_ = order[np.repeat(lo, counts) + offs]
        rs, rp = r[rs_i[ki]], r[rp_i[ki]]
        cs, cp = c[cs_i[ci_]], c[cp_i[ci_]]
        ln_f0 = -math.log(2 * math.pi) - 0.5 * (lr[ki] + lc[ci_])
        if centres is not None:
            # only arm sets that some gain network and op-amp pull onto the target
            near = np.min(np.abs(ln_f0[:, None] - centres[None, :]), axis=1) <= half_width
            ki, ci_, ln_f0 = ki[near], ci_[near], ln_f0[near]
            if ki.size == 0:
                return []
            rs, rp = r[rs_i[ki]], r[rp_i[ki]]
            cs, cp = c[cs_i[ci_]], c[cp_i[ci_]]
        cost = 2 * rf.price_unit + np.array([cf.unit_price(x) for x in cs]) + np.array([cf.unit_price(x) for x in cp]) \
            if rs.size < 5000 else 2 * rf.price_unit + 2 * np.interp(np.log(cs * cp) / 2, np.log(c),
                                                                     [cf.unit_price(x) for x in c])
        # Keep the cheapest few in each narrow frequency bin, so the whole reachable band
        # stays covered for every pull the solver may pair with it; equal values (one BOM
        # line) win ties.
        distinct = (rs != rp).astype(int) + (cs != cp).astype(int)
        width = max(half_width / 4, 1e-6) if centres is not None else (ln_hi - ln_lo) / max(self.max_options // 9, 1)
        b = np.floor((ln_f0 - ln_lo) / width).astype(int)
        # ... and in each third of a decade of impedance, since op-amps bound it differently
        b = b * 100 + np.floor(np.log10(np.maximum(rs, rp)) * 3).astype(int)
        pick = np.lexsort((distinct, cost, b))
        rank = np.zeros(pick.size, dtype=int)
        sb = b[pick]
        for i in range(1, pick.size):
            rank[i] = rank[i - 1] + 1 if sb[i] == sb[i - 1] else 0
        keep = pick[rank < 1]
        if keep.size > self.max_options and centres is not None:
            # too many: keep the ones the pulls land closest to the target
            dist = np.min(np.abs(ln_f0[keep][:, None] - centres[None, :]), axis=1)
            keep = keep[np.argsort(dist, kind="stable")[:self.max_options]]
        dt = dt_of(spec)
        # f0 ~ (Rs Rp Cs Cp)^(-1/2): each pair of parts drifts by its tempco bound over dt
        c_tc = (cap_tempco(cf) + abs(cf.tempco_per_k)) if not cf.has_band else cap_tempco(cf)
        drift = (rf.tempco_per_k + c_tc) * dt
        u_r, u_c = sigma(rf), sigma(cf)
        z = z_of(spec)
        # f0 ~ (Rs Rp Cs Cp)^(-1/2): first-order propagation (JCGM 100, the GUM)
        f_spread = z * 0.5 * math.sqrt(2 * u_r ** 2 + 2 * u_c ** 2)
        out: list[NetOption] = []
        for j in keep:
            rs_, rp_, cs_, cp_ = float(rs[j]), float(rp[j]), float(cs[j]), float(cp[j])
            kk = 1 + rs_ / rp_ + cp_ / cs_
            # margin the arms can lose: the tolerance spread at the yield's z (the Monte Carlo
            # confirms), plus the two parts of each ratio drifting apart over temperature
            sigma_k = math.sqrt((rs_ / rp_) ** 2 * 2 * u_r ** 2 + (cp_ / cs_) ** 2 * 2 * u_c ** 2) / kk
            loss = z * sigma_k + (rs_ / rp_ * 2 * rf.tempco_per_k * dt + cp_ / cs_ * 2 * cap_tempco(cf) * dt) / kk
            lines = merge_lines([(rf.id, rs_, 1), (rf.id, rp_, 1), (cf.id, cs_, 1), (cf.id, cp_, 1)])
            out.append(NetOption(Values({"rs": rs_, "cs": cs_, "rp": rp_, "cp": cp_}), rf.id, cf.id, float(ln_f0[j]),
                                 math.log(kk), loss, max(rs_, rp_), min(rs_, rp_), lines, drift, f_spread, sigma_k))
        return out

    def retune(self, spec, catalog, net: NetOption, pull: float, r_bounds: tuple[float, float],
               price) -> NetOption | None:
        """Arm values of the same families that land closest on target once the pull
        measured by verification (``pull``: ln of verified over textbook frequency) is
        known, keeping the required gain within 0.2 % (so margin and amplitude stay put);
        the cheapest among the closest. None when no arm set does better."""
        rf = catalog.find("resistors", net.r_family)
        cf = catalog.find("capacitors", net.c_family)
        target = math.log(spec.frequency.target_hz) - pull
        found = self.network_options(spec, rf, cf, target - 0.01, target + 0.01, price, r_bounds,
                                     np.array([target]), 0.001)
        found = [a for a in found if abs(a.ln_k - net.ln_k) <= 0.002]
        if not found:
            return None

        def score(a: NetOption):
            return (round(abs(a.ln_f0 - target) / 1e-4), sum(price(f, v) * q for f, v, q in a.lines))

        best = min(found, key=score)
        return best if abs(best.ln_f0 - target) < abs(net.ln_f0 - target) else None

    def gain_ratios(self, values, rg: float, m_floor: float, shelf=None) -> list[float]:
        """Feedback resistors for a ladder of gain excesses over equal arms (gain 3):
        Rf near 2 Rg (1 + m) for m = 1, 2, 4, 8 times m_floor; from the shelf, every
        stocked Rf in that range."""
        ladder = (m_floor, 2 * m_floor, 4 * m_floor, 8 * m_floor)
        if shelf is None:
            return sorted({nearest(values, rg * 2 * (1 + m)) for m in ladder})
        return sorted({v for v in values if 2 * (1 + m_floor / 2) <= v / rg <= 2 * (1 + 10 * m_floor)})

    reference_required_gain = 3.0   # what the equal-arm reference network needs

    def opamp_reference(self, f_hz: float, gain_excess: float, opamp) -> Circuit:
        """The reference on which an op-amp's pull and margin cost are measured: equal
        arms at f_hz (Hz) with R = Rg = 10 kohm, gain 3 (1 + gain_excess)."""
        rg = 10e3
        return self.reference(f_hz, self.gain_values(rg, 2 * rg * (1 + gain_excess)), opamp)

    def hand_design(self, spec, catalog, opamp_id: str, limiter_id: str = "d-si-signal") -> Circuit:
        """The common hand method, the baseline partpick is measured against: pick a round
        capacitor (1, 10, 100 ... of a unit) that puts R nearest 10 kohm, compute
        R = 1 / (2 pi f C) and round it to the resistor series, set the gain with
        Rf = 2.2 Rg and put the diodes straight across Rf (common practice, no published
        source)."""
        from partpick import series

        f = spec.frequency.target_hz
        rfam = next(r for r in catalog.resistors if spec.parts.resistors is None or r.id in spec.parts.resistors)
        c = 10.0 ** round(math.log10(1 / (2 * math.pi * f * 10e3)))
        r = series.nearest(rfam.series, 1 / (2 * math.pi * f * c))
        kw = {}
        if spec.supply.kind == "single":
            kw = dict(supply_kind="single", bias_r_ohm=47e3, bias_c_f=10e-6, coupling_c_f=22e-6)
        return circuit(r, c, r, c, 10e3, 22e3, catalog.find("opamps", opamp_id), catalog.find("limiters", limiter_id),
                       **kw)

    def gain_values(self, rg: float, rf: float) -> dict[str, float]:
        """The gain network's values by role."""
        return {"rg": rg, "rf": rf}

    def port_conductance_needed(self, gv: dict, port: str = "feedback") -> float:
        """Conductance the control branch must add at ``port`` for a loop gain of one on
        equal arms (gain 3), S: across Rf 1/(2 Rg) - 1/Rf; across Rg 2/Rf - 1/Rg."""
        if port == "ground":
            return 2 / gv["rf"] - 1 / gv["rg"]
        return 1 / (gv["rg"] * 2) - 1 / gv["rf"]

    def osc_per_port(self, gv: dict, port: str = "feedback") -> float:
        """Output amplitude per amplitude across the port on equal arms at gain 3:
        Vo = 1.5 Vf across Rf, Vo = 3 Vn across Rg."""
        return 3.0 if port == "ground" else 1.5

    def reference(self, f_hz: float, gv: dict, opamp, control: str = "none", parts: dict | None = None,
                  control_values: dict | None = None) -> Circuit:
        """An equal-arm reference circuit at f_hz (Hz) with R = Rg, for surrogates: the
        gain network gv, the op-amp, and the control with its parts and values."""
        from partpick.circuits import make_circuit

        r = gv["rg"]
        c = 1 / (2 * math.pi * f_hz * r)
        values = {"rs": r, "cs": c, "rp": r, "cp": c, **gv, **(control_values or {})}
        return make_circuit(self.name, control, values, {"opamp": opamp, **(parts or {})})

    # -- drawing ------------------------------------------------------------------------------------
    def draw(self, d, elm, label, stage: str, supply_kind: str) -> None:
        """Draw the oscillator core on schemdraw drawing ``d`` (``elm``: schemdraw's
        elements module; ``label(role)``: the designator and value text of a slot): the
        Wien arms, the gain network, the control branch across Rf and the op-amp, with a
        note of the output stage and, on a single supply, the bias network. Ground
        symbols stand for the signal reference (mid-rail on a single supply)."""
        op = d.add(elm.Opamp(leads=True).label(label("opamp"), loc="center", ofst=(0, -1.2)))
        d.add(elm.Line().at(op.out).right(1.0))
        out = d.here
        d.add(elm.Dot())
        # gain network: Rf over the top, Rg down to the reference
        d.add(elm.Line().at(op.in1).left(1.0))
        d.add(elm.Dot())
        d.add(elm.Line().up(1.6))
        top = d.here
        d.add(elm.Resistor().right().tox(out).label(label("rf")))
        d.add(elm.Line().down().toy(out))
        # Rg leaves the junction to the left, clear of the Wien network below
        d.add(elm.Resistor().at(top).left(2.6).label(label("rg")))
        d.add(elm.Ground())
        # a control at the ground port: R10 and the JFET's channel beside Rg, the rest
        # of the control as a note
        if label("jfet"):
            d.add(elm.Line().at(top).up(1.6))
            if label("agc_rs"):
                d.add(elm.Resistor().left(2.6).label(label("agc_rs"), loc="bottom"))
            else:
                d.add(elm.Line().left(2.6))
            q = d.add(elm.JFetN().right().anchor("drain").reverse().label(label("jfet"), loc="left"))
            d.add(elm.Ground().at(q.source))
            d.add(elm.Line().at(q.gate).up(1.4))
            d.add(elm.Dot(open=True).label("gate: " + ", ".join(filter(None, (label("agc_rla"), label("agc_rlb"))))
                                           + " from the control node", loc="right"))
        # control branch across Rf
        if label("limiter"):
            d.add(elm.Line().at(top).up(1.6))
            if label("rd"):
                d.add(elm.Resistor().right(2.4).label(label("rd")))
            d.add(elm.Diode().right(2.4).label(label("limiter") + " (pair)"))
            d.add(elm.Line().right().tox(out))
            d.add(elm.Line().down().toy(top))
        # shunt arm Rp || Cp at the non-inverting input
        d.add(elm.Line().at(op.in2).left(1.0))
        plus = d.here
        d.add(elm.Dot())
        d.add(elm.Resistor().down(2.4).label(label("rp"), loc="bottom"))
        d.add(elm.Ground())
        d.add(elm.Line().at(plus).left(1.6))
        d.add(elm.Capacitor().down(2.4).label(label("cp"), loc="bottom"))
        d.add(elm.Ground())
        # series arm Rs + Cs from the output back to the non-inverting input
        d.add(elm.Line().at(out).down(4.2))
        d.add(elm.Resistor().left(3.0).label(label("rs"), loc="bottom"))
        d.add(elm.Capacitor().left(3.0).label(label("cs"), loc="bottom"))
        d.add(elm.Line().left().tox(plus.x - 3.4))
        d.add(elm.Line().up().toy(plus))
        d.add(elm.Line().right().tox(plus.x - 1.6))
        # output stage and supply notes
        note = {"none": "load", "follower": "follower, load",
                "gain": f"gain stage {label('stage_ra')}, {label('stage_rb')}, load",
                "attenuator": f"attenuator {label('stage_ra')}, {label('stage_rb')}, load"}[stage]
        d.add(elm.Line().at(out).right(1.2))
        d.add(elm.Dot(open=True).label(note, loc="bottom"))
        d.add(elm.Gap().right(3.5))  # room for the note inside the drawing's bounds
        if label("jfet"):
            parts = [label(r) for r in ("detector", "agc_ch", "agc_rb", "agc_ri", "agc_ci", "agc_rz", "agc_cp", "clamp",
                                        "agc_rr1", "agc_rr2", "vref", "agc_rrb", "comp", "agc_rc") if label(r)]
            rows = [", ".join(parts[k:k + 5]) for k in range(0, len(parts), 5)]
            d.add(elm.Label().at((plus.x - 3.4, plus.y - 7.2)).label(
                "amplitude control (detector, integrator, reference):\n" + "\n".join(rows), loc="right"))
        if supply_kind == "single":
            d.add(elm.Label().at((plus.x - 3.4, plus.y - 6.0)).label(
                f"single supply: reference = mid-rail from {label('bias_top')} / {label('bias_bottom')}, "
                f"{label('bias_c')}; output through {label('coupling_c')}", loc="right"))


TOPOLOGY = WienBridge()


def circuit(rs_ohm: float, cs_f: float, rp_ohm: float, cp_f: float, rg_ohm: float, rf_ohm: float, opamp,
            limiter=None, *, rd_ohm: float = 0.0, stage: str = "none", stage_ra_ohm: float = 0.0,
            stage_rb_ohm: float = 0.0, supply_kind: str = "dual", bias_r_ohm: float = 0.0, bias_c_f: float = 0.0,
            coupling_c_f: float = 0.0) -> Circuit:
    """A Wien-bridge circuit from values in ohm and F, with a diode limiter (the
    catalog record ``limiter``, behind rd_ohm) or none; for tests, benchmarks and the
    hand method."""
    from partpick.circuits import make_circuit

    values = {"rs": rs_ohm, "cs": cs_f, "rp": rp_ohm, "cp": cp_f, "rg": rg_ohm, "rf": rf_ohm, "rd": rd_ohm,
              "stage_ra": stage_ra_ohm, "stage_rb": stage_rb_ohm, "bias_top": bias_r_ohm,
              "bias_bottom": bias_r_ohm, "bias_c": bias_c_f, "coupling_c": coupling_c_f}
    return make_circuit("wien-bridge", "diode-limiter" if limiter is not None else "none", values,
                        {"opamp": opamp, "limiter": limiter}, stage=stage, supply_kind=supply_kind)
