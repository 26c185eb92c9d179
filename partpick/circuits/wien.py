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
from partpick.circuits.base import STAGES, SUPPLY_KINDS, Circuit, Conditions, Core, Slot
from partpick.circuits.limiter_surface import LEVELS
from partpick.circuits.options import (NetTable, sigma, values_of)
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
    stages = STAGES             # every output stage, on either supply
    supplies = SUPPLY_KINDS
    outputs = ()                # one output
    output_labels: dict = {}
    output_phase_rad: dict = {}
    input_note = "inputs at the reference +/- Vpk/3"
    input_cap_role = "cp"       # the non-inverting input's node: Rp || Cp to the reference
    reads_supply = False        # the loop: the network, the op-amp's small-signal model, the loads

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
        net = self._network(c, w)    # (read again for the load's transfer: made once)
        beta, yx = net
        y_out = periphery.output_admittance(c, cond, w)
        if y_out is not None:
            yx = yx + y_out
        make = self._ground_loop if c.control.port == "ground" else self._feedback_loop
        return make(c, cond, w, beta, yx, net)

    def _feedback_loop(self, c: Circuit, cond: Conditions, w: float, beta, yx, net) -> Loop:
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
        tl = self._to_load(c, cond, w, net)
        probes = (
            ("osc", g1, const(rg)),
            ("load", tl * g1, tl.scale(rg)),
            ("U1A.iout", cv_i, ci_i),
            ("U1A.x", g1 + cv_i.scale(ro), const(rg) + ci_i.scale(ro)),
        )
        return Loop(w, alpha, gamma, d0, d1, probes, (AmpProbe("U1A", c.opamp, "U1A.x", "U1A.iout"),))

    def _ground_loop(self, c: Circuit, cond: Conditions, w: float, beta, yx, net) -> Loop:
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
        tl = self._to_load(c, cond, w, net)
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
        total = zs + zp
        return zp / total, total.inv()

    def _to_load(self, c: Circuit, cond: Conditions, w: float, net=None):
        """Transfer from the output to the load, V/V: the output stage's and what the
        reference carries there (periphery.reference_ripple), from the network's current
        into it (1 / (Zs + Zp)) and the gain network's (Vn / Rg, with Vn = beta Vo)."""
        beta, y_in = net if net is not None else self._network(c, w)
        y_net = y_in + beta.scale(1.0 / c.value("rg"))
        return periphery.to_load(c, cond, w) + periphery.reference_ripple(c, cond, w, y_net)

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
    # arm resistances, ohm: above op-amp loading; up to the 1 Mohm at which each op-amp's own
    # bias-current limit (derating rule bias_drop, which check judges) is capped
    arm_r = (1e3, 1e6)
    arm_c_min = 100e-12         # arm capacitors, F: well above stray capacitance
    arm_ratio = 1.25            # Rs/Rp and Cp/Cs within 1/1.25..1.25: required gain near 3
    required_gain_range = (1 + 2 / 1.25, 1 + 2 * 1.25)   # what those arms need, V/V

    def network_table(self, rf, cf, ln_lo: float, ln_hi: float, r_bounds=None, shelf=None) -> NetTable:
        """Every arm set (Rs, Cs, Rp, Cp) of one family pair with ln f0 in [ln_lo, ln_hi]
        (ln Hz), Rs/Rp and Cp/Cs within 1/arm_ratio..arm_ratio, resistors within arm_r
        and r_bounds, capacitors from arm_c_min: a sorted meet-in-the-middle over
        ln(Rs Rp) and ln(Cs Cp), nothing pruned."""
        lo_r, hi_r = r_bounds or self.arm_r
        r = np.array([v for v in values_of(rf, shelf) if max(self.arm_r[0], lo_r) <= v <= min(self.arm_r[1], hi_r)])
        c = np.array([v for v in values_of(cf, shelf) if v >= self.arm_c_min])
        roles = ("rs", "cs", "rp", "cp")
        empty = NetTable(roles, (rf.id, cf.id, rf.id, cf.id), np.zeros((0, 4)), *(np.zeros(0) for _ in range(4)),
                         0.0)
        if r.size == 0 or c.size == 0:
            return empty
        q = self.arm_ratio * (1 + 1e-9)
        ri, rj = np.meshgrid(np.arange(r.size), np.arange(r.size), indexing="ij")
        keep = (r[ri] / r[rj] >= 1 / q) & (r[ri] / r[rj] <= q)
        rs_i, rp_i = ri[keep], rj[keep]
        ci, cj = np.meshgrid(np.arange(c.size), np.arange(c.size), indexing="ij")
        keep = (c[cj] / c[ci] >= 1 / q) & (c[cj] / c[ci] <= q)
        cs_i, cp_i = ci[keep], cj[keep]
        lr = np.log(r[rs_i]) + np.log(r[rp_i])
        lc = np.log(c[cs_i]) + np.log(c[cp_i])
        order = np.argsort(lc, kind="stable")
        lc_sorted = lc[order]
        # ln f0 = -ln(2 pi) - (lr + lc)/2  in [ln_lo, ln_hi]  <=>  lc in [a - lr, b - lr]
        a_ = -2 * (ln_hi + math.log(2 * math.pi))
        b_ = -2 * (ln_lo + math.log(2 * math.pi))
        lo = np.searchsorted(lc_sorted, a_ - lr, side="left")
        hi = np.searchsorted(lc_sorted, b_ - lr, side="right")
        counts = hi - lo
        if counts.sum() == 0:
            return empty
        ki = np.repeat(np.arange(lr.size), counts)
        offs = np.arange(counts.sum()) - np.repeat(np.cumsum(counts) - counts, counts)
        ci_ = order[np.repeat(lo, counts) + offs]
        index = np.column_stack([rs_i[ki], cs_i[ci_], rp_i[ki], cp_i[ci_]])
        ln_f0 = -math.log(2 * math.pi) - 0.5 * (lr[ki] + lc[ci_])
        srt = np.argsort(ln_f0, kind="stable")
        index, ln_f0 = index[srt], ln_f0[srt]
        vals = np.column_stack([r[index[:, 0]], c[index[:, 1]], r[index[:, 2]], c[index[:, 3]]])
        rs, cs, rp, cp = vals.T
        k = 1 + rs / rp + cp / cs
        u_r, u_c = sigma(rf), sigma(cf)
        sigma_lnk = np.sqrt((rs / rp) ** 2 * 2 * u_r ** 2 + (cp / cs) ** 2 * 2 * u_c ** 2) / k
        price_c = np.interp(np.log(c), np.log(c), [cf.unit_price(x) for x in c])
        cost = 2 * rf.price_unit + np.interp(np.log(cs), np.log(c), price_c) + np.interp(np.log(cp), np.log(c), price_c)
        return NetTable(roles, (rf.id, cf.id, rf.id, cf.id), vals, ln_f0, np.log(k), sigma_lnk, cost,
                        0.5 * math.sqrt(2 * u_r ** 2 + 2 * u_c ** 2), (r, c, r, c),
                        index.astype(np.int32))

    def reach_hz(self, rf, cf, shelf=None) -> tuple[float, float]:
        """The lowest and highest textbook frequency equal arms of the two families
        make within arm_r and from arm_c_min, Hz (for a refusal)."""
        r = [v for v in values_of(rf, shelf) if self.arm_r[0] <= v <= self.arm_r[1]]
        c = [v for v in values_of(cf, shelf) if v >= self.arm_c_min]
        if not r or not c:
            return math.nan, math.nan
        return 1 / (2 * math.pi * max(r) * max(c)), 1 / (2 * math.pi * min(r) * min(c))

    def port_conductance(self, rg: np.ndarray, rf: np.ndarray, k_eff: np.ndarray) -> np.ndarray:
        """Conductance the control branch across Rf must supply for a loop gain of one
        when the network needs gain k_eff, S: 1/(Rg (K - 1)) - 1/Rf."""
        return 1.0 / (rg * (k_eff - 1.0)) - 1.0 / rf

    def gain_sensitivity(self, gain: np.ndarray) -> np.ndarray:
        """d ln G / d ln R of each gain resistor (opposite signs): (G - 1) / G."""
        return (gain - 1) / gain

    def port_conductance_slope(self, rg: np.ndarray, rf: np.ndarray, k_eff: np.ndarray) -> np.ndarray:
        """d g / d m, S per neper: how the conductance the branch must supply
        (port_conductance) grows with the gain excess m = ln(G / K), G = 1 + Rf/Rg fixed:
        K = G e^-m, so d g / d m = K / (Rg (K - 1)^2)."""
        return k_eff / (rg * (k_eff - 1) ** 2)

    def thd_transfer(self, k_eff: np.ndarray, arms: np.ndarray | None = None, all_outputs: bool = True) -> np.ndarray:
        """How much more of the control branch's harmonic current reaches the output as
        distortion than on the equal-arm reference (gain 3), for the same drive of the
        branch; third harmonic, ideal op-amp. A current I injected across Rf gives
        Vo = -I Rf' / (1 - K beta) with Rf' = Rg (K - 1) at balance, and the branch's
        fundamental is g Vo (1 - 1/K); beta at n times the oscillation frequency is
        1 / (K + j p (n - 1/n)) with p = sqrt(Rs Cp / (Rp Cs)) (the Wien network's
        transfer Zp / (Zs + Zp), written out for unequal arms; checked against sympy in
        tests/test_conformance.py). arms: rows (Rs, Cs, Rp, Cp), or None for arms of
        equal ratios (Rs/Rp = Cp/Cs = (K - 1)/2); all_outputs: moot (one output)."""
        k = np.asarray(k_eff, float)
        if arms is None:
            p = (k - 1) / 2
        else:
            arms = np.asarray(arms, float)
            p = np.sqrt(arms[:, 0] * arms[:, 3] / (arms[:, 2] * arms[:, 1]))
        s = 3 - 1 / 3

        def t(k, p):
            return (k - 1) ** 2 / k * np.sqrt(k ** 2 + (p * s) ** 2) / (p * s)

        return t(k, p) / t(3.0, 1.0)

    def osc_per_port_k(self, k_eff: np.ndarray) -> np.ndarray:
        """Output amplitude per amplitude across Rf at required gain k_eff: Vo = Vf K/(K-1)."""
        return k_eff / (k_eff - 1.0)

    reference_required_gain = 3.0   # what the equal-arm reference network needs
    gain_levels = LEVELS            # Rg, ohm: the limiter's tables hold each (limiter_surface)

    def reference_conductance(self, m: np.ndarray, rg: float) -> np.ndarray:
        """Conductance the branch supplies on the equal-arm reference (gain 3) at gain
        excess m (nepers) with Rg = rg, S: 1/(2 Rg) - 1/Rf with 1 + Rf/Rg = 3 e^m."""
        return (0.5 - 1.0 / (3.0 * np.exp(m) - 1.0)) / rg

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

    def reference_gain_values(self, rg: float, g_s: float) -> dict[str, float]:
        """The gain network of the equal-arm reference (gain 3 needed) whose control
        branch must supply g_s (S) for a loop gain of one: 1/Rf = 1/(2 Rg) - g_s."""
        return {"rg": rg, "rf": 1.0 / (1.0 / (2 * rg) - g_s)}

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
    def draw(self, sheet) -> dict:
        """Draw the core on ``sheet`` (:class:`partpick.export.schematic.Sheet`): op-amp
        channel U1A, the gain network Rg (to the reference) and Rf over the top, the
        shunt arm Rp || Cp at the +input and the series arm Rs + Cs from the output back
        to it. Returns where the others attach: 'out' (the oscillator output, for the
        output stage) and each port's (end at the output side, end at the -input side,
        which way is clear: +1 up) for the amplitude control, as the netlist's ports:
        'feedback' = ('out', 'nn') across Rf, 'ground' = ('nn', reference) across Rg."""
        pins = sheet.opamp("U1A", f"U1A\n{sheet.value('opamp')}", (0.0, -0.625))
        x_fb, x_out, y_rf, y_arm = 4.6, 5.4, 3.0, -5.6
        out = (x_out, pins["out"][1])
        sheet.wire(pins["out"], (x_fb, out[1]), out)
        # gain network: -input up to Rg (left, to the reference) and Rf (right, to the output)
        sheet.wire(pins["in1"], (-1.0, pins["in1"][1]), (-1.0, y_rf), (-0.3, y_rf))
        sheet.resistor("rg", (-1.0, y_rf), (-3.5, y_rf))
        sheet.reference((-3.5, y_rf))
        sheet.resistor("rf", (-0.3, y_rf), (x_fb, y_rf))
        sheet.wire((x_fb, y_rf), (x_fb, out[1]))
        # shunt arm Rp || Cp from the +input to the reference
        plus = pins["in2"]
        sheet.wire(plus, (-1.0, plus[1]), (-2.6, plus[1]), (-4.2, plus[1]), (-4.2, y_arm))
        sheet.resistor("rp", (-1.0, plus[1]), (-1.0, -3.4), loc="bottom")
        sheet.reference((-1.0, -3.4))
        sheet.capacitor("cp", (-2.6, plus[1]), (-2.6, -3.4))
        sheet.reference((-2.6, -3.4))
        # series arm Rs + Cs from the output back to the +input
        sheet.capacitor("cs", (-4.2, y_arm), (0.2, y_arm), loc="bottom")
        sheet.resistor("rs", (0.2, y_arm), (x_out, y_arm), loc="bottom")
        sheet.wire((x_out, y_arm), out)
        return {"out": out, "ports": {"feedback": ((x_fb, y_rf), (-0.3, y_rf), 1.0),
                                      "ground": ((-1.0, y_rf), (-3.5, y_rf), 1.0)}}


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
