"""No amplitude control: the op-amp's swing sets the amplitude by clipping (THD well
over 10 %). Kept so a BOM without a limiter can be checked and simulated; the search
never proposes it."""

from __future__ import annotations

from partpick.circuits.base import Circuit
from partpick.physics.loop import Branch

__all__ = ["Clipping", "CONTROL"]


class Clipping:
    """The 'none' amplitude control: no branch at the port."""

    name = "none"
    slots = ()
    port = "feedback"

    def branch(self, c: Circuit, temp_k: float) -> Branch:
        return Branch(None)

    def balance(self, c: Circuit, cond, loop, lin, *, kmax: int = 21, start=None):
        """No control sets the amplitude: the op-amp's swing does (transient only)."""
        return None

    def netlist(self, c: Circuit, a: str, b: str) -> list:
        return []

    def amplitude_spread(self, c: Circuit, temp_k: float) -> float:
        return 0.0

    def draw(self, sheet, a, b, up: float) -> None:
        """Nothing to draw: no branch at the port."""


CONTROL = Clipping()
