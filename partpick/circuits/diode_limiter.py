"""The diode limiter: an anti-parallel junction pair (silicon, Schottky, LED) or two
opposed Zeners, optionally behind a series resistor Rd, at the topology's 'feedback'
port. Its conductance grows with the amplitude and brings the loop gain down to one.

The pair's i(v) is the Shockley junction with series resistance and the SPICE
temperature law (:mod:`partpick.physics.junction`); its junction charge (SPICE's
depletion and diffusion charge, so a capacitance that grows as the pair conducts)
sits across the pair, behind Rd. THD rises with the small-signal gain excess the pair must
remove; the amplitude drifts with the forward voltage.
"""

from __future__ import annotations

import functools
import math

import numpy as np

from partpick.circuits.base import Circuit, Slot
from partpick.physics.envelope import START_V, limiter_settling
from partpick.physics.harmonic import harmonic_balance
from partpick.physics.junction import forward_voltage, limiter_table
from partpick.physics.loop import Branch
from partpick.physics.netlist import LimiterX, Resistor

__all__ = ["DiodeLimiter", "CONTROL", "SLOTS"]

SLOTS = (
    Slot("rd", "resistors", "R5", "resistor in series with the limiter", optional=True),
    Slot("limiter", "limiters", "D1,D2", "limiter pair"),
)

# The limiter works near its forward voltage at tens of microamps (its knee).
KNEE_A = 20e-6


class DiodeLimiter:
    """The diode-limiter amplitude control (see module docstring)."""

    name = "diode-limiter"
    slots = SLOTS
    port = "feedback"
    series_role = "rd"      # the resistor in series with the pair (the search's Rd)
    slow = False            # sets the amplitude within a few cycles of reaching it
    reads_supply = False    # the pair at rest is the same on any supply

    def branch(self, c: Circuit, temp_k: float, cond=None) -> Branch:
        """The pair (tabulated i(v) and charge q(v) at temp_k, K), behind Rd."""
        lim = c.part("limiter")
        rd = c.value("rd")
        table = limiter_table(lim, 0.0, temp_k)
        g0 = float(table.conductance([0.0])[0])
        return Branch(table, rd, 0.0, g0, limiter_table(lim, rd, temp_k))

    def balance(self, c: Circuit, cond, loop, lin, *, kmax: int = 21, start=None):
        """The settled oscillation by harmonic balance with the pair's i(v)
        (:func:`partpick.physics.harmonic.harmonic_balance`)."""
        return harmonic_balance(loop, self.branch(c, cond.temp_k), lin, cond.rails(c.supply_kind), kmax=kmax,
                                start=start)

    def netlist(self, c: Circuit, a: str, b: str, nodes: dict | None = None) -> list:
        """Rd (R5) from a, then the pair (D1) to b; the pair straight across without Rd."""
        els: list = []
        if c.value("rd") > 0:
            els.append(Resistor("R5", a, "dl", c.value("rd")))
            a = "dl"
        lim = c.part("limiter")
        els.append(LimiterX("D1", a, b, lim))
        return els

    def settling(self, c: Circuit, cond, loop, lin, hb, band: tuple[float, float], start_v: float = START_V,
                 clip_v: float = math.inf):
        """The envelope from start_v to the settled amplitude (V at the output; band in
        V there): :func:`partpick.physics.envelope.limiter_settling` with the pair's
        describing function; None when there is no settled oscillation."""
        if hb is None:
            return None
        p = np.array([2j * math.pi * hb.freq_hz / loop.w_ref])
        per = complex(loop.probe("osc", p, np.ones(1), np.full(1, lin.marginal_g_s))[0])
        return limiter_settling(loop, self.branch(c, cond.temp_k), hb.osc_peak_v, per, band, start_v, clip_v)

    def amplitude_spread(self, c: Circuit, temp_k: float, cond=None) -> float:
        """The forward-voltage spread (3 sigma) relative to the forward voltage at the
        knee current, where the limiter works."""
        return self.amplitude_spread_of(c.part("limiter"), temp_k)

    @staticmethod
    @functools.lru_cache(maxsize=256)
    def amplitude_spread_of(lim, temp_k: float) -> float:
        """The same for a limiter part, relative (3 sigma). (Kept per part and
        temperature: the search reads it for every amplitude side and candidate, and each
        is a junction solve.)"""
        if lim.vf_spread_v <= 0:
            return 0.0
        return lim.vf_spread_v / max(forward_voltage(lim, KNEE_A, temp_k), 1e-3)

    # -- drawing --------------------------------------------------------------------------------
    def draw(self, sheet, a, b, up: float, out=None) -> None:
        """Draw the branch on ``sheet`` beside the port's two ends (a: the netlist's
        first port node, b: the second; ``up``: the clear side; ``out``, the oscillator
        output, is not needed): Rd (R5) from a, then the pair to b, as in :meth:`netlist`. Diodes and LEDs are drawn anti-parallel, D1
        conducting from Rd's side to b and D2 back; a Zener pair as two opposed Zeners
        in series, their anodes joined."""
        y1 = a[1] + 2.0 * up
        sheet.wire(a, (a[0], y1))
        dl = (a[0], y1)
        if sheet.has("rd"):
            dl = (a[0] - 2.6, y1)
            sheet.resistor("rd", (a[0], y1), dl)
        bl = (b[0], y1)
        sheet.wire(bl, b)
        lim = sheet.family("limiter")
        d1, d2 = (sheet.ref("limiter").split(",") + ["D2"])[:2]
        fam = sheet.value("limiter")
        if lim.kind == "zener-pair":
            mid = ((dl[0] + bl[0]) / 2, y1)
            sheet.part(d1, sheet.elm.Zener(), mid, dl, f"{d1}\n{fam}", polar=True)
            sheet.part(d2, sheet.elm.Zener(), mid, bl, d2, polar=True)
            return
        y2 = y1 + 1.3 * up
        sheet.part(d1, sheet.elm.Diode(), dl, bl, f"{d1} {fam}", loc="bottom", polar=True)
        sheet.part(d2, sheet.elm.Diode(), (bl[0], y2), (dl[0], y2), f"{d2} {fam}", polar=True)
        sheet.wire(bl, (bl[0], y2))
        sheet.wire(dl, (dl[0], y2))


CONTROL = DiodeLimiter()
