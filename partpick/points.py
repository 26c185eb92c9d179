"""A circuit's predictions at a spec's operating points, with the transient runs they
need taken from a command's budget all at once.

Each point is analysed first (the small-signal loop and the harmonic balance, milliseconds
each); only then is it known how many of them need a transient run (an op-amp out of
its linear range, where harmonic balance does not hold: :func:`needs_run`), each taking
one to a few seconds. A candidate whose runs the budget cannot afford spends none: a
candidate that ran out half way used to spend the runs it had and be skipped all the
same (1.5 to 1.9 s of three coverage requirements' 3.5 to 4.6 s, measured on this
project's 2-core machine), leaving none for a candidate whose runs would have been
enough."""

from __future__ import annotations

import math
from dataclasses import dataclass

from partpick.circuits import Circuit, settled
from partpick.physics.harmonic import NeedsTransient
from partpick.spec import Spec
from partpick.verify import OperatingPoint, operating_conditions, predict

__all__ = ["Runs", "needs_run", "predict_points", "points"]


@dataclass
class Runs:
    """The transient runs a command's verifications may still make (shared by the runs
    of one command, so that the bound holds for the command, not per run), and the
    candidates skipped since the runs left could not verify them."""

    left: int
    skipped: int = 0

    def take(self, k: int) -> bool:
        """Whether k more runs are allowed (then counted)."""
        if k > self.left:
            return False
        self.left -= k
        return True


def needs_run(analysed: tuple) -> bool:
    """Whether a point's (loop, linear result, balance) leaves its oscillation to a
    transient run: it starts, and no converged harmonic balance in the limiter's regime
    holds there (``BalanceResult.holds``, as :func:`partpick.verify.predict` decides)."""
    _, lin, hb = analysed
    return lin.starts and not (hb is not None and hb.holds)


def predict_points(c: Circuit, conds: dict, runs: "bool | Runs" = True) -> dict[str, OperatingPoint]:
    """The predictions of ``c`` at ``conds`` (name -> Conditions, 'nominal' among them),
    each corner's harmonic balance started from the nominal point's where that holds (the
    answer is the same, only sooner); ``runs``: True (any transient run), False (none) or
    a :class:`Runs` budget, from which the points' runs are all taken before the first;
    NeedsTransient where they are not allowed, with none spent."""
    left = runs.left if isinstance(runs, Runs) else math.inf if runs else 0
    nominal = settled(c, conds["nominal"])
    start = None if needs_run(nominal) or not nominal[1].starts else nominal[2]
    analysed, need = {}, 0
    for name, cond in conds.items():   # (nominal first: the corners start from it)
        analysed[name] = a = nominal if name == "nominal" else settled(c, cond, start)
        need += needs_run(a)
        if need > left:   # (known as soon as one more is needed than are left: a JFET's balance is dear)
            raise NeedsTransient
    if need and isinstance(runs, Runs):
        runs.take(need)
    return {name: predict(c, conds[name], analysed=a) for name, a in analysed.items()}


_POINTS: dict = {}   # predictions by (circuit, operating points): the why-not's runs judge one BOM often


def points(c: Circuit, spec: Spec, runs: "bool | Runs" = True) -> dict[str, OperatingPoint]:
    """:func:`predict_points` at the spec's operating points, kept per process (specs
    that differ only in their limits share them: the physics does not read the limits)."""
    conds = operating_conditions(spec)
    key = (c, tuple(conds.items()))
    if key not in _POINTS:
        if len(_POINTS) > 256:
            _POINTS.clear()
        _POINTS[key] = predict_points(c, conds, runs)
    return dict(_POINTS[key])
