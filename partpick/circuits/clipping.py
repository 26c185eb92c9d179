"""No amplitude control: the op-amp's swing sets the amplitude by clipping (THD well
over 10 %). Kept so a BOM without a limiter can be checked and simulated; the search
never proposes it."""

from __future__ import annotations

import math

import numpy as np

from partpick.circuits.base import Circuit
from partpick.physics.envelope import START_V, Settling
from partpick.physics.loop import Branch

__all__ = ["Clipping", "CONTROL"]


class Clipping:
    """The 'none' amplitude control: no branch at the port."""

    name = "none"
    slots = ()
    port = "feedback"
    slow = False
    reads_supply = False

    def branch(self, c: Circuit, temp_k: float, cond=None) -> Branch:
        return Branch(None)

    def balance(self, c: Circuit, cond, loop, lin, *, kmax: int = 21, start=None):
        """No control sets the amplitude: the op-amp's swing does (transient only)."""
        return None

    def netlist(self, c: Circuit, a: str, b: str, nodes: dict | None = None) -> list:
        return []

    def settling(self, c: Circuit, cond, loop, lin, hb, band: tuple[float, float], start_v: float = START_V,
                 clip_v: float = math.inf):
        """The envelope grows at the small-signal rate until the op-amp clips at clip_v
        (V), where it stays: startup and settling are that build-up time."""
        if not lin.starts or not math.isfinite(clip_v):
            return None
        t_up = math.log(clip_v / start_v) / lin.growth_per_s
        t = np.array([0.0, t_up])
        return Settling(t_up, t_up if band[0] <= clip_v <= band[1] else math.inf, 0.0, 1.0, t,
                        np.array([start_v, clip_v]))

    def amplitude_spread(self, c: Circuit, temp_k: float, cond=None) -> float:
        return 0.0

    def draw(self, sheet, a, b, up: float, out=None) -> None:
        """Nothing to draw: no branch at the port."""


CONTROL = Clipping()
