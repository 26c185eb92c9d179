"""The quadrature (two-integrator) oscillator: slots, equations, loop, netlist, search
hooks, drawing. Two outputs 90 degrees apart: the sine at integrator 1, the cosine at
integrator 2.

Three op-amp channels: integrator 1 (U1A, R1 into C1) integrates the inverter's
output; integrator 2 (U1B, R2 into C2) integrates the sine; the inverter (U1C,
R10, R11) closes the loop. With ideal op-amps the loop gain is a / (s^2 tau1 tau2)
(tau = R C, a = R11 / R10), so f0 = sqrt(a) / (2 pi sqrt(R1 C1 R2 C2)), and with
R10 = R11 the familiar 1 / (2 pi sqrt(R1 C1 R2 C2)) (the state-variable or
two-integrator loop: any active-filter text, e.g. Sedra and Smith, Microelectronic
Circuits, chapter on filters and tuned amplifiers).

A pure two-integrator loop has its poles on the imaginary axis: something must push
them out and something pull them back. Here the regeneration resistor R3 feeds the
inverter's output (-a x2) into integrator 2's summing node (a negative conductance
a/R3 across C2) and the damping resistor R4 sits across C2 (a positive conductance
1/R4); the loop starts when a/R3 > 1/R4 and the diode limiter, across R4 at the
'feedback' port, supplies the difference a/R3 - 1/R4 at its working amplitude. Why the
limiter sits across integrator 2's capacitor: its conductance there acts on the loop's
damping alone (across the inverter it would move the frequency), it is the same branch
the Wien bridge's limiter is (across a feedback resistor, between an op-amp output and
its virtual ground), and its harmonic currents are integrated once into the cosine
(harmonic n divided by about (n - 1/n) times the capacitor's admittance) and twice into
the sine (a further 1/n): the sine is the cleaner output, the cosine carries about
three times its THD.

In the same gain language as the Wien bridge: the gain network is (Rq = R3, Rf = R4),
its gain 1 + R4 / R3; the network needs 1 + R10 / R11 (2 with a unity inverter) for a
loop gain of one; the gain excess ln(gain / required gain) is the startup margin. The
op-amps' finite gain and gain-bandwidth (each integrator and the inverter lag) push
the poles outwards (Q enhancement of two-integrator loops, ibid.): the loop in
:meth:`Quadrature.loop` carries all three op-amps exactly, and the search counts their
share like the Wien's op-amp loss (here usually a gain).

The amplitude of the two outputs matches when R1 C1 R10 = R2 C2 R11 (their ratio is
sqrt(R1 C1 R10 / (R2 C2 R11))); the phase differs from 90 degrees only through the
op-amps (each integrator's excess lag, about f / GBW radians). Both outputs drive
their loads straight (no output stage: a stage on one output alone would break the
match); dual supply only.
"""

from __future__ import annotations

import functools
import math
from collections.abc import Mapping

import numpy as np

from partpick.circuits import periphery
from partpick.circuits.base import Circuit, Conditions, Core, Slot
from partpick.circuits.limiter_surface import REF_RG
from partpick.circuits.options import NetTable, sigma, values_of
from partpick.physics.loop import AmpProbe, Loop
from partpick.physics.netlist import Capacitor, OpAmpX, Resistor
from partpick.physics.opamp import open_loop_gain, output_resistance
from partpick.physics.polymatrix import poly_add, poly_det
from partpick.physics.rational import Rational, const, poly_sum2

__all__ = ["Quadrature", "TOPOLOGY", "SLOTS", "NETWORK_ROLES", "GAIN_ROLES", "circuit"]

SLOTS = (
    Slot("ri1", "resistors", "R1", "integrator 1 (sine output) input resistor"),
    Slot("ci1", "capacitors", "C1", "integrator 1 (sine output) capacitor"),
    Slot("ri2", "resistors", "R2", "integrator 2 (cosine output) input resistor"),
    Slot("ci2", "capacitors", "C2", "integrator 2 (cosine output) capacitor"),
    Slot("rq", "resistors", "R3", "regeneration resistor, inverter output to integrator 2's input"),
    Slot("rdamp", "resistors", "R4", "damping resistor across C2 (the limiter across it)"),
    Slot("rn1", "resistors", "R10", "inverter input resistor"),
    Slot("rn2", "resistors", "R11", "inverter feedback resistor"),
)
NETWORK_ROLES = ("ri1", "ci1", "ri2", "ci2", "rn1", "rn2")   # frequency-setting: integrators and inverter
GAIN_ROLES = ("rq", "rdamp")                                # regeneration and damping
_ONE = np.array([1.0])


class Quadrature:
    """The quadrature topology (see module docstring)."""

    name = "quadrature"
    title = "quadrature oscillator"
    network_name = "integrators, inverter"
    input_note = "inputs at virtual grounds: the reference +/- Vpk f/GBW"
    input_cap_role = None          # (a capacitance at a virtual ground carries almost no signal)
    reads_supply = False           # the loop: the integrators, the op-amps' small-signal model, the loads
    slots = SLOTS
    channels = 3
    ports = ("feedback",)
    network_roles = NETWORK_ROLES
    stages = ("none",)             # both outputs drive their loads straight
    supplies = ("dual",)
    outputs = ("load2",)           # the cosine output, at its own load
    output_labels = {"load2": "cosine"}
    output_phase_rad = {"load2": math.pi / 2}   # the cosine leads the sine

    # -- equations, vectorised over builds (role -> array of values) ------------------------
    def f0_hz(self, v: Mapping[str, np.ndarray]) -> np.ndarray:
        """Textbook frequency sqrt(R11 / R10) / (2 pi sqrt(R1 C1 R2 C2)), Hz (ideal op-amps)."""
        return np.sqrt(v["rn2"] / v["rn1"]) / (2 * np.pi * np.sqrt(v["ri1"] * v["ci1"] * v["ri2"] * v["ci2"]))

    def required_gain(self, v: Mapping[str, np.ndarray]) -> np.ndarray:
        """What the gain network's 1 + R4/R3 must equal for a loop gain of one: 1 + R10/R11
        (2 with a unity inverter): then a/R3 = 1/R4, the regeneration cancels the damping."""
        return 1.0 + v["rn1"] / v["rn2"]

    def gain(self, v: Mapping[str, np.ndarray]) -> np.ndarray:
        """The gain network's 1 + R4/R3 (damping over regeneration resistor, plus one)."""
        return 1.0 + v["rdamp"] / v["rq"]

    def output_ratio(self, v: Mapping[str, np.ndarray]) -> np.ndarray:
        """Amplitude of the cosine over that of the sine with ideal op-amps:
        sqrt(R1 C1 R10 / (R2 C2 R11)) (x1 = a x2 / (s tau1) at w0^2 = a / (tau1 tau2))."""
        return np.sqrt(v["ri1"] * v["ci1"] * v["rn1"] / (v["ri2"] * v["ci2"] * v["rn2"]))

    # -- the loop at the control port ------------------------------------------------------------
    def _matrix(self, c: Circuit, cond: Conditions, w: float):
        """The small-signal equations M z + bV V + bI I = 0 over the unknowns
        z = (u, xs, xw, na, nc) -- integrator 2's summing node, the sine, the inverter's
        output, integrator 1's summing node, the inverter's summing node -- given the
        port voltage V (cosine minus u) and the branch current I (cosine to u). Rows:
        KCL at u; U1B's output; KCL at the inverter's input; U1C's output; KCL at
        integrator 1's input; U1A's output. Each op-amp: X = -A(s) v-, out = X - Ro
        Iout; rows with A or a load are multiplied by their denominators, so every entry
        is a polynomial in p = s / w."""
        v = c.value
        g1, g2, gq, gf = 1 / v("ri1"), 1 / v("ri2"), 1 / v("rq"), 1 / v("rdamp")
        g10, g11 = 1 / v("rn1"), 1 / v("rn2")
        c1, c2 = np.array([0.0, w * v("ci1")]), np.array([0.0, w * v("ci2")])
        a = open_loop_gain(c.opamp, w)
        na_, da = a.num, a.den
        ro = output_resistance(c.opamp)
        y1 = periphery.output_admittance(c, cond, w) or const(0.0)
        y2 = const(0.0 if math.isinf(cond.load2_r_ohm) else 1 / cond.load2_r_ohm)
        if cond.load2_c_f > 0:
            y2 = y2 + periphery.admittance_c(cond.load2_c_f, w)
        m = np.convolve
        d2, d1 = m(da, y2.den), m(da, y1.den)
        rows = [
            # u, xs, xw, na, nc | V, I
            [np.array([-(g2 + gq)]), np.array([g2]), np.array([gq]), None, None,
             poly_add(c2, np.array([gf])), _ONE],
            [poly_add(d2, m(na_, y2.den), ro * m(da, y2.num), ro * g10 * d2), None, None, None, -ro * g10 * d2,
             poly_add(d2, ro * m(d2, poly_add(c2, np.array([gf + g10]))), ro * m(da, y2.num)), ro * d2],
            [np.array([g10]), None, np.array([g11]), None, np.array([-(g10 + g11)]), np.array([g10]), None],
            [-ro * gq * da, None, da * (1 + ro * (g11 + g1 + gq)), -ro * g1 * da, poly_add(na_, -ro * g11 * da),
             None, None],
            [None, c1, np.array([g1]), -poly_add(np.array([g1]), c1), None, None, None],
            [-ro * g2 * d1, poly_add(d1, ro * m(d1, poly_add(c1, np.array([g2]))), ro * m(da, y1.num)), None,
             m(poly_add(na_, -ro * m(c1, da)), y1.den), None, None, None],
        ]
        return rows, (g1, g2, gq, gf, g10, g11, c1, c2, ro, y1, y2)

    def loop(self, c: Circuit, cond: Conditions, w_ref: float | None = None) -> Loop:
        """The small-signal equations at the 'feedback' port (a branch across R4, from
        the cosine output to integrator 2's summing node): all three op-amps with A0,
        GBW, optional second pole and output resistance, the load at the sine output
        and the second load at the cosine output.

        alpha and gamma are the determinants of the six equations of :meth:`_matrix`
        with the V and the I column (the network admits a solution only when
        alpha V + gamma I = 0); every probe is Cramer's rule on the five equations
        after the first. The loop gain is normalised as the Wien bridge's is:
        1 - L = (alpha / gamma + Y) / ((1 + a)(1/R4 + Y)), which with ideal op-amps
        is the port's total admittance over (1 + a) times R4's and the branch's, so
        at the oscillation frequency L = (1 + R4'/R3) / (1 + R10/R11) = gain /
        required gain (R4' = R4 with the branch across it)."""
        w = w_ref or 2 * math.pi * c.f0_hz
        rows, (g1, g2, gq, gf, g10, g11, c1, c2, ro, y1, y2) = self._matrix(c, cond, w)
        # the V or I column first: every determinant shares its minors over the rest
        memo: dict = {}
        alpha = poly_det([[r[5]] + r[:5] for r in rows], memo, "V")
        gamma = poly_det([[r[6]] + r[:5] for r in rows], memo, "I")
        sub = rows[1:]
        d5 = poly_det([r[:5] for r in sub])
        num = {}
        for k, name in enumerate(("u", "xs", "xw", "na", "nc")):
            # Cramer: the node's column replaced by the V (I) column, moved to the front
            sign = -1.0 if k % 2 else 1.0
            rest = [r[:k] + r[k + 1:5] for r in sub]
            memo_k: dict = {}
            num[name] = (-sign * poly_det([[r[5]] + x for r, x in zip(sub, rest)], memo_k, "V"),
                         -sign * poly_det([[r[6]] + x for r, x in zip(sub, rest)], memo_k, "I"))
        num["xc"] = (poly_add(num["u"][0], d5), num["u"][1])

        def lin(*terms, extra=(None, None)):
            """(cv, ci) of sum coefficient x node voltage (+ extra): a polynomial
            coefficient (array) keeps the common denominator d5; a rational one (a load
            admittance) is added as a Rational."""
            cv, ci = np.zeros(1), np.zeros(1)
            rest_v, rest_i = [], []
            for k, name in terms:
                if isinstance(k, Rational) and np.any(k.den[1:]):
                    rest_v.append(k * Rational(num[name][0], d5))
                    rest_i.append(k * Rational(num[name][1], d5))
                    continue
                kp = k.num / k.den[0] if isinstance(k, Rational) else k
                cv, ci = poly_sum2(cv, np.convolve(kp, num[name][0])), poly_sum2(ci, np.convolve(kp, num[name][1]))
            ev, ei = extra
            out_v = Rational(cv if ev is None else poly_sum2(cv, np.convolve(ev, d5)), d5)
            out_i = Rational(ci if ei is None else poly_sum2(ci, np.convolve(ei, d5)), d5)
            for r in rest_v:
                out_v = out_v + r
            for r in rest_i:
                out_i = out_i + r
            return out_v, out_i

        one = np.array([1.0])
        xs, xc, xw = lin((one, "xs")), lin((one, "xc")), lin((one, "xw"))
        i_a = lin((poly_sum2(c1, np.array([g2])), "xs"), (y1, "xs"), (-c1, "na"), (np.array([-g2]), "u"))
        i_b = lin((np.array([g10]), "xc"), (y2, "xc"), (np.array([-g10]), "nc"),
                  extra=(poly_sum2(c2, np.array([gf])), one))
        i_c = lin((np.array([g11 + g1 + gq]), "xw"), (np.array([-g11]), "nc"), (np.array([-g1]), "na"),
                  (np.array([-gq]), "u"))
        node = {"xs": xs, "xc": xc, "xw": xw}
        tl = periphery.to_load(c, cond, w)
        probes = [("osc", *xs), ("load", tl * xs[0], tl * xs[1]), ("load2", *xc)]
        amps = []
        for ch, out, cur in (("U1A", "xs", i_a), ("U1B", "xc", i_b), ("U1C", "xw", i_c)):
            probes += [(f"{ch}.iout", *cur), (f"{ch}.x", node[out][0] + cur[0].scale(ro),
                                                node[out][1] + cur[1].scale(ro))]
            amps.append(AmpProbe(ch, c.opamp, f"{ch}.x", f"{ch}.iout"))
        one_a = 1 + c.value("rn2") / c.value("rn1")
        d1 = Rational(gamma, _ONE).scale(one_a)
        return Loop(w, Rational(alpha, _ONE), Rational(gamma, _ONE), d1.scale(gf), d1, tuple(probes), tuple(amps), None,
                    self.outputs)

    # -- netlist ------------------------------------------------------------------------------------
    def netlist(self, c: Circuit, ref: str, neg: str) -> Core:
        """Integrator 1 (U1A: R1 from the inverter output 'xw' into 'na', C1 to the sine
        'xs'), integrator 2 (U1B: R2 from the sine into 'nb', C2 and R4 to the cosine
        'xc', R3 from 'xw' into 'nb'), the inverter (U1C: R10 from the cosine into 'nc',
        R11 to 'xw'); the cosine is the second output."""
        v = c.value
        els = (
            Resistor("R1", "xw", "na", v("ri1")),
            Capacitor("C1", "na", "xs", v("ci1")),
            OpAmpX("U1A", ref, "na", "xs", "vcc", neg, c.opamp),
            Resistor("R2", "xs", "nb", v("ri2")),
            Capacitor("C2", "nb", "xc", v("ci2")),
            Resistor("R4", "nb", "xc", v("rdamp")),
            Resistor("R3", "xw", "nb", v("rq")),
            OpAmpX("U1B", ref, "nb", "xc", "vcc", neg, c.opamp),
            Resistor("R10", "xc", "nc", v("rn1")),
            Resistor("R11", "nc", "xw", v("rn2")),
            OpAmpX("U1C", ref, "nc", "xw", "vcc", neg, c.opamp),
        )
        return Core(els, "xs", {"feedback": ("xc", "nb")}, "nb", v("ci2"), {"load2": "xc"})

    # -- what verification asks of the topology -----------------------------------------------
    def input_swing_v(self, c: Circuit, osc_peak_v: float) -> float:
        """Peak swing of the op-amp inputs around the reference, V: every channel is
        inverting, its inputs at the reference but for the output over |A| at f0."""
        op = c.opamp
        return osc_peak_v * max(1 / op.a0, c.f0_hz / op.gbw_hz)

    def dissipation(self, c: Circuit, freq_hz: float, osc_peak_v: float) -> dict[str, float]:
        """Average power in each resistor from the fundamental (sine peak osc_peak_v, V),
        W: the cosine is the sine times output_ratio, the inverter's output a times the
        cosine; the summing nodes sit at the reference."""
        v = c.value
        xs = osc_peak_v
        xc = xs * float(self.output_ratio(c.values))
        xw = xc * v("rn2") / v("rn1")
        return {"ri1": 0.5 * xw ** 2 / v("ri1"), "ri2": 0.5 * xs ** 2 / v("ri2"), "rq": 0.5 * xw ** 2 / v("rq"),
                "rdamp": 0.5 * xc ** 2 / v("rdamp"), "rn1": 0.5 * xc ** 2 / v("rn1"),
                "rn2": 0.5 * xw ** 2 / v("rn2")}

    def nudge_gain(self, c: Circuit, rel: float) -> Circuit:
        """The circuit with its damping resistor R4 raised by the fraction rel."""
        return c.with_values(rdamp=c.value("rdamp") * (1 + rel))

    # -- search hooks ----------------------------------------------------------------------------
    # Integrator resistors near the gain network's level (the search's 10 kohm Rq): the
    # limiter's strength relative to the integrator (its conductance over C2's
    # admittance 1/R2) then stays within a factor 2.2 of the reference the limiter's
    # surface is tabulated on, which thd_transfer carries; a wider window would add
    # little frequency resolution (matched outputs put f0 at 1/(2 pi R2 C2)).
    arm_r = (4.7e3, 22e3)
    arm_c_min = 100e-12          # integrator capacitors, F: well above stray capacitance
    tau_match = 0.004            # |ln(R1 C1 / (R2 C2))| at most: the outputs' amplitudes within 0.2 %
    required_gain_range = (2.0, 2.0)   # the unity inverter every table row has: 1 + R10/R11, V/V

    def _integrators(self, rf, cf, ln_lo: float, ln_hi: float, shift: float, width: float, r_bounds=None,
                     shelf=None):
        """Every pair of integrators (R1, C1), (R2, C2) of one family pair with the
        textbook ln f0 of a unity inverter in [ln_lo, ln_hi] (ln Hz) and
        ln(R1 C1 / (R2 C2)) within shift +/- width, resistors within arm_r and r_bounds,
        capacitors from arm_c_min: (R1, C1, R2, C2, ln f0, capacitor values and the
        indices of C1 and C2 in them), sorted by ln f0 -- a sorted search over the
        time constants' logarithms, nothing pruned."""
        lo_r, hi_r = r_bounds or self.arm_r
        r = np.array([v for v in values_of(rf, shelf) if max(self.arm_r[0], lo_r) <= v <= min(self.arm_r[1], hi_r)])
        c = np.array([v for v in values_of(cf, shelf) if v >= self.arm_c_min])
        if r.size == 0 or c.size == 0:
            return None
        ri, ci = (a.ravel() for a in np.meshgrid(np.arange(r.size), np.arange(c.size), indexing="ij"))
        lt = np.log(r[ri]) + np.log(c[ci])
        order = np.argsort(lt, kind="stable")
        lt_s = lt[order]
        # ln f0 = -ln(2 pi) - (lt1 + lt2)/2 in [ln_lo, ln_hi], lt1 - lt2 in shift +/- width
        a_ = -2 * (ln_hi + math.log(2 * math.pi))
        b_ = -2 * (ln_lo + math.log(2 * math.pi))
        lo = np.searchsorted(lt_s, np.maximum(lt - shift - width, a_ - lt) - 1e-12, side="left")
        hi = np.searchsorted(lt_s, np.minimum(lt - shift + width, b_ - lt) + 1e-12, side="right")
        counts = np.maximum(hi - lo, 0)
        if counts.sum() == 0:
            return None
        first = np.repeat(np.arange(lt.size), counts)
        offs = np.arange(counts.sum()) - np.repeat(np.cumsum(counts) - counts, counts)
        second = order[np.repeat(lo, counts) + offs]
        ln_f0 = -math.log(2 * math.pi) - 0.5 * (lt[first] + lt[second])
        keep = ((ln_f0 >= ln_lo - 1e-12) & (ln_f0 <= ln_hi + 1e-12)
                & (np.abs(lt[first] - lt[second] - shift) <= width + 1e-12))
        first, second, ln_f0 = first[keep], second[keep], ln_f0[keep]
        srt = np.argsort(ln_f0, kind="stable")
        first, second, ln_f0 = first[srt], second[srt], ln_f0[srt]
        return r[ri[first]], c[ci[first]], r[ri[second]], c[ci[second]], ln_f0, c, ci[first], ci[second]

    def network_table(self, rf, cf, ln_lo: float, ln_hi: float, r_bounds=None, shelf=None) -> NetTable:
        """Every network (R1, C1, R2, C2, R10, R11) of one family pair with ln f0 in
        [ln_lo, ln_hi] (ln Hz), integrator time constants within tau_match of each other
        (amplitude match), resistors within arm_r and r_bounds, capacitors from
        arm_c_min, and the unity inverter R10 = R11 = R1 (one more use of R1's value)."""
        roles = NETWORK_ROLES
        fams = (rf.id, cf.id, rf.id, cf.id, rf.id, rf.id)
        found = self._integrators(rf, cf, ln_lo, ln_hi, 0.0, self.tau_match, r_bounds, shelf)
        if found is None:
            return NetTable(roles, fams, np.zeros((0, 6)), *(np.zeros(0) for _ in range(4)), 0.0)
        r1, c1, r2, c2, ln_f0, c, i1, i2 = found
        vals = np.column_stack([r1, c1, r2, c2, r1, r1])
        u_r, u_c = sigma(rf), sigma(cf)
        n = ln_f0.size
        price_c = np.array([cf.unit_price(x) for x in c])
        cost = 4 * rf.price_unit + price_c[i1] + price_c[i2]
        # ln K = ln(1 + R10/R11): d ln K / d ln R10 = 1/2 at R10 = R11; f0 ~ (R11/R10)^1/2 (R1 C1 R2 C2)^-1/2
        return NetTable(roles, fams, vals, ln_f0, np.full(n, math.log(2.0)), np.full(n, 0.5 * math.sqrt(2) * u_r),
                        cost, 0.5 * math.sqrt(4 * u_r ** 2 + 2 * u_c ** 2))

    def retune_outputs(self, values: dict, families: dict, catalog, ln_target: float, pull: float, ratio: float,
                       shelf=None) -> dict | None:
        """Integrators re-chosen for what exact physics measured on ``values``: the
        frequency's pull (ln of the built over the textbook frequency) and the outputs'
        amplitude ratio (second over first fundamental; the limiter's junction
        capacitance across C2 and the op-amps move it off the ideal output_ratio). The
        new pair keeps the textbook frequency at ln_target - pull (ln Hz) within the
        families' resolution and makes the ideal ratio the inverse of the measured
        factor, R1 C1 / (R2 C2) = (output_ratio / ratio)^2 (unity inverter); the cheapest
        of the closest. None when no pair does better than the present one."""
        rf, cf = catalog.find("resistors", families["ri1"]), catalog.find("capacitors", families["ci1"])
        if families.get("ri2") != rf.id or families.get("ci2") != cf.id or not ratio > 0:
            return None
        ideal = float(self.output_ratio(values))
        shift = 2 * math.log(ideal / ratio)       # the ln(tau1 / tau2) wanted with a unity inverter
        res = max(0.5 * math.sqrt(4 * sigma(rf) ** 2 + 2 * sigma(cf) ** 2), 2e-4)
        want_f = ln_target - pull
        found = self._integrators(rf, cf, want_f - res, want_f + res, shift, 4 * res, shelf=shelf)
        now = abs(math.log(ratio))
        if found is None:
            return None
        r1, c1, r2, c2, ln_f0, c, i1, i2 = found
        # near the present integrator 2 (the pull and the ratio's factor were measured there:
        # the limiter's capacitance acts against C2, the op-amps against R2's level)
        near = (np.abs(np.log(c2 / values["ci2"])) <= 0.2) & (np.abs(np.log(r2 / values["ri2"])) <= 0.2)
        if near.any():
            r1, c1, r2, c2, ln_f0, i1, i2 = (x[near] for x in (r1, c1, r2, c2, ln_f0, i1, i2))
        miss = np.abs(np.log(r1 * c1 / (r2 * c2)) - shift) / 2        # the ratio each pair leaves, ln
        price_c = np.array([cf.unit_price(x) for x in c])
        cost = price_c[i1] + price_c[i2] + np.where(r1 == r2, 0.0, rf.price_line) + np.where(c1 == c2, 0.0, cf.price_line)
        best = np.lexsort((cost, np.round(np.abs(ln_f0 - want_f) / 1e-4), np.round(miss / 2e-4)))[0]
        if miss[best] >= now - 2e-4:
            return None
        return {"ri1": float(r1[best]), "ci1": float(c1[best]), "ri2": float(r2[best]), "ci2": float(c2[best]),
                "rn1": float(r1[best]), "rn2": float(r1[best])}

    @functools.lru_cache(maxsize=64)
    def reference_outputs(self, opamp, f_hz: float) -> tuple[float, float]:
        """What an op-amp type does to the outputs on the reference at f_hz (Hz), no
        loads, the loop just oscillating (the branch at the conductance that holds
        it): the cosine's amplitude over the sine's, and its phase error (rad, by how
        much more than 90 degrees it leads), from the loop's probes -- for the search,
        which sees no second output of its own."""
        from partpick.circuits import linear

        c = self.opamp_reference(f_hz, 0.02, opamp)
        cond = Conditions(15.0, 298.15, math.inf)
        lin = linear(c, cond)
        if not math.isfinite(lin.marginal_hz):
            return 1.0, math.pi
        loop = self.loop(c, cond)
        p = np.array([1j * 2 * math.pi * lin.marginal_hz / loop.w_ref])
        rel = complex(loop.probe("load2", p, 1.0, lin.marginal_g_s)[0] / loop.probe("load", p, 1.0,
                                                                                  lin.marginal_g_s)[0])
        return abs(rel), math.remainder(float(np.angle(rel)) - math.pi / 2, 2 * math.pi)

    def reach_hz(self, rf, cf, shelf=None) -> tuple[float, float]:
        """The lowest and highest textbook frequency equal integrators of the two
        families make within arm_r and from arm_c_min, Hz (for a refusal)."""
        r = [v for v in values_of(rf, shelf) if self.arm_r[0] <= v <= self.arm_r[1]]
        c = [v for v in values_of(cf, shelf) if v >= self.arm_c_min]
        if not r or not c:
            return math.nan, math.nan
        return 1 / (2 * math.pi * max(r) * max(c)), 1 / (2 * math.pi * min(r) * min(c))

    def port_conductance(self, rg: np.ndarray, rf: np.ndarray, k_eff: np.ndarray) -> np.ndarray:
        """Conductance the branch across R4 (= rf) must supply for a loop gain of one
        when the network needs gain k_eff, with Rq = rg, S: a/Rq - 1/R4 with
        a = 1/(K - 1), i.e. 1/(Rq (K - 1)) - 1/R4."""
        return 1.0 / (rg * (k_eff - 1.0)) - 1.0 / rf

    def gain_sensitivity(self, gain: np.ndarray) -> np.ndarray:
        """d ln G / d ln R of R4 and R3 (opposite signs): (G - 1) / G."""
        return (gain - 1) / gain

    def port_conductance_slope(self, rg: np.ndarray, rf: np.ndarray, k_eff: np.ndarray) -> np.ndarray:
        """d g / d m, S per neper, at a fixed gain G = 1 + R4/Rq: K = G e^-m, so
        d g / d m = K / (Rq (K - 1)^2)."""
        return k_eff / (rg * (k_eff - 1) ** 2)

    def thd_transfer(self, k_eff: np.ndarray, arms: np.ndarray | None = None, all_outputs: bool = True) -> np.ndarray:
        """How much more of the branch's harmonic current reaches the worse output (the
        cosine) as distortion than reaches the sine on the reference (R = 10 kohm),
        for the same drive of the branch; third harmonic, ideal op-amps. A current I_n
        injected at integrator 2's summing node gives the cosine
        x2_n = -I_n / (j w0 C2 (n - 1/n) - g) and the sine x1_n = a x2_n / (j n w0 tau1)
        (checked against the netlist's nodal equations with sympy in
        tests/test_quadrature.py); with g << (n - 1/n) w0 C2 (the branch's conductance
        is a few % of C2's admittance) the cosine's THD is n (w0 C2)^-1 / R_ref times
        the reference sine's. arms: rows (R1, C1, R2, C2, R10, R11); None: the largest
        integrator resistance the table allows (arm_r), so a screen without arms errs
        on the safe side."""
        k = np.asarray(k_eff, float)
        if arms is None:
            r_eff = np.full(k.shape, self.arm_r[1])
        else:
            arms = np.asarray(arms, float)
            a = arms[:, 5] / arms[:, 4]
            r_eff = np.sqrt(arms[:, 0] * arms[:, 1] * arms[:, 2] / (a * arms[:, 3]))    # 1 / (w0 C2)
        # the sine alone (a spec that loads no cosine): the cosine's THD over n, r_eff / R_ref
        return (3.0 if all_outputs else 1.0) * r_eff / REF_RG

    def osc_per_port_k(self, k_eff: np.ndarray) -> np.ndarray:
        """Sine amplitude per amplitude across the port (the cosine): 1 with matched
        integrators (the table keeps them within 0.2 %)."""
        return np.ones_like(np.asarray(k_eff, float))

    reference_required_gain = 2.0   # what the reference (equal integrators, unity inverter) needs
    gain_levels = (REF_RG,)         # Rg, ohm: thd_transfer is referred to the reference's own Rq

    def reference_conductance(self, m: np.ndarray, rg: float) -> np.ndarray:
        """Conductance the branch supplies on the reference (gain 2) at gain excess m
        (nepers) with Rq = rg, S: 1/Rq - 1/R4 with 1 + R4/Rq = 2 e^m."""
        return (1.0 - 1.0 / (2.0 * np.exp(m) - 1.0)) / rg

    def opamp_reference(self, f_hz: float, gain_excess: float, opamp) -> Circuit:
        """The reference on which an op-amp's pull and loss are measured: equal
        integrators at f_hz (Hz) with R = Rq = 10 kohm, gain 2 (1 + gain_excess)."""
        rg = REF_RG
        return self.reference(f_hz, self.gain_values(rg, rg * (2 * (1 + gain_excess) - 1)), opamp)

    def reference_gain_values(self, rg: float, g_s: float) -> dict[str, float]:
        """The gain network of the reference (gain 2 needed) whose branch must supply
        g_s (S) for a loop gain of one: 1/R4 = 1/Rq - g_s."""
        return {"rq": rg, "rdamp": 1.0 / (1.0 / rg - g_s)}

    def gain_values(self, rg: float, rf: float) -> dict[str, float]:
        """The gain network's values by role: Rq = rg (regeneration), R4 = rf (damping)."""
        return {"rq": rg, "rdamp": rf}

    def port_conductance_needed(self, gv: dict) -> float:
        """Conductance the branch must add across R4 on the reference (gain 2), S."""
        return 1 / gv["rq"] - 1 / gv["rdamp"]

    def osc_per_port(self, gv: dict) -> float:
        """Sine amplitude per port amplitude on the reference: 1."""
        return 1.0

    def reference(self, f_hz: float, gv: dict, opamp, control: str = "none", parts: dict | None = None,
                  control_values: dict | None = None) -> Circuit:
        """A reference circuit at f_hz (Hz): equal integrators and a unity inverter with
        every resistor R = Rq, C = 1 / (2 pi f R); the gain network gv, the op-amp, and
        the control with its parts and values."""
        from partpick.circuits import make_circuit

        r = gv["rq"]
        c = 1 / (2 * math.pi * f_hz * r)
        values = {"ri1": r, "ci1": c, "ri2": r, "ci2": c, "rn1": r, "rn2": r, **gv, **(control_values or {})}
        return make_circuit(self.name, control, values, {"opamp": opamp, **(parts or {})})

    def hand_design(self, spec, catalog, opamp_id: str, limiter_id: str = "d-si-signal") -> Circuit:
        """The common hand method, the baseline partpick is measured against: a round
        capacitor (1, 10, 100 ... of a unit) putting R nearest 10 kohm, R = 1 / (2 pi f C)
        rounded to the series for both integrators, a 10 kohm unity inverter, Rq = R and
        R4 = 1.1 R (about 5 % regeneration), the diodes straight across R4 (common
        practice, no published source)."""
        from partpick import series

        f = spec.frequency.target_hz
        rfam = next(r for r in catalog.resistors if spec.parts.resistors is None or r.id in spec.parts.resistors)
        cap = 10.0 ** round(math.log10(1 / (2 * math.pi * f * 10e3)))
        r = series.nearest(rfam.series, 1 / (2 * math.pi * f * cap))
        return circuit(r, cap, r, cap, r, series.nearest(rfam.series, 1.1 * r), catalog.find("opamps", opamp_id),
                       catalog.find("limiters", limiter_id))

    # -- drawing ------------------------------------------------------------------------------------
    def draw(self, sheet) -> dict:
        """Draw the core on ``sheet`` (:class:`partpick.export.schematic.Sheet`), as in
        :meth:`netlist`: integrator 1 (U1A) with C1 over it, R2 from the sine to
        integrator 2 (U1B) with C2 and R4 over it, R10 from the cosine to the inverter
        (U1C) with R11 over it, and the inverter's output back along the top to R1
        (integrator 1's input) and R3 (integrator 2's); the cosine goes to its
        connector OUT2 (the second load). Returns where the others attach: 'out' (the
        sine, for the output stage) and the 'feedback' port = (cosine end, summing-node
        end, clear side up), the netlist's ('xc', 'nb')."""
        op = sheet.value("opamp")
        pa = sheet.opamp("U1A", f"U1A\n{op}", (0.0, 0.0))
        pb = sheet.opamp("U1B", f"U1B\n{op}", (9.6, -0.625))
        pc = sheet.opamp("U1C", f"U1C\n{op}", (17.4, -1.25))
        for pins in (pa, pb, pc):   # every + input to the reference
            x, y = pins["in2"]
            sheet.wire(pins["in2"], (x - 0.6, y), (x - 0.6, y - 0.6))
            sheet.reference((x - 0.6, y - 0.6))
        y_bus = 9.0
        # integrator 1: C1 from its -input over to the sine xs
        na, xs = (-0.6, pa["in1"][1]), (4.4, pa["out"][1])
        sheet.wire(pa["in1"], na, (na[0], 3.4))
        sheet.capacitor("ci1", (na[0], 3.4), (xs[0], 3.4))
        sheet.wire(pa["out"], xs, (xs[0], 3.4))
        out = (xs[0], -2.8)
        sheet.wire(xs, out)
        # R1 from the bus down to integrator 1's input
        sheet.wire((-3.2, y_bus), (-3.2, 4.2))
        sheet.resistor("ri1", (-3.2, 4.2), (-3.2, 1.25 + 0.0))
        sheet.wire((-3.2, 1.25), na)
        # integrator 2: R2 from the sine, R3 from the bus, C2 and R4 (the port) over U1B
        nb = (8.8, pb["in1"][1])
        sheet.resistor("ri2", (5.0, xs[1]), (7.0, xs[1]))
        sheet.wire(xs, (5.0, xs[1]))
        sheet.wire((7.0, xs[1]), nb, pb["in1"])
        sheet.wire((7.6, y_bus), (7.6, 4.4))
        sheet.resistor("rq", (7.6, 4.4), (7.6, 1.9), loc="bottom")
        sheet.wire((7.6, 1.9), (7.6, nb[1]))
        xc = (13.8, pb["out"][1])
        sheet.wire(nb, (nb[0], 2.6), (nb[0], 4.4))
        sheet.capacitor("ci2", (nb[0], 2.6), (xc[0], 2.6))
        sheet.resistor("rdamp", (nb[0], 4.4), (xc[0], 4.4))
        sheet.wire(pb["out"], xc, (xc[0], 2.6), (xc[0], 4.4))
        # the cosine: to the inverter's R10 and down to its connector
        nc = (16.8, pc["in1"][1])
        sheet.wire(xc, (14.6, xc[1]))
        sheet.resistor("rn1", (14.6, xc[1]), (nc[0], nc[1]))
        sheet.wire(nc, pc["in1"])
        sheet.wire((14.6, xc[1]), (14.6, -3.4))
        sheet.connector("OUT2", (14.6, -3.4), "OUT2: cosine, to the second load")
        # the inverter: R11 over U1C, its output xw up to the bus
        xw = (21.4, pc["out"][1])
        sheet.wire(nc, (nc[0], 2.2))
        sheet.resistor("rn2", (nc[0], 2.2), (xw[0], 2.2))
        sheet.wire(pc["out"], xw, (xw[0], 2.2), (xw[0], y_bus), (7.6, y_bus), (-3.2, y_bus))
        return {"out": out, "ports": {"feedback": ((xc[0], 4.4), (nb[0], 4.4), 1.0)}}


TOPOLOGY = Quadrature()


def circuit(ri1_ohm: float, ci1_f: float, ri2_ohm: float, ci2_f: float, rq_ohm: float, rdamp_ohm: float, opamp,
            limiter=None, *, rd_ohm: float = 0.0, rn1_ohm: float = 10e3, rn2_ohm: float | None = None) -> Circuit:
    """A quadrature circuit from values in ohm and F, with a diode limiter (the catalog
    record ``limiter``, behind rd_ohm) or none; the inverter R10 = rn1_ohm, R11 = rn2_ohm
    (default R10); for tests, benchmarks and the hand method."""
    from partpick.circuits import make_circuit

    values = {"ri1": ri1_ohm, "ci1": ci1_f, "ri2": ri2_ohm, "ci2": ci2_f, "rq": rq_ohm, "rdamp": rdamp_ohm,
              "rn1": rn1_ohm, "rn2": rn2_ohm if rn2_ohm is not None else rn1_ohm, "rd": rd_ohm}
    return make_circuit("quadrature", "diode-limiter" if limiter is not None else "none", values,
                        {"opamp": opamp, "limiter": limiter})
