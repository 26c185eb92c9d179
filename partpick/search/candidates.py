"""What the search proposes: a Candidate (one design with its estimated figures) and
a Batch (the best row of every configuration of one limiter and gain family, as
arrays, made into Candidates one at a time as they come up)."""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from partpick.circuits import periphery
from partpick.search.tables import STAGE_RATIO

__all__ = ["Candidate", "Batch", "YIELD_STEP", "on_shelf"]

YIELD_STEP = 0.002       # estimated yields this close are ties for the search's own choices


@dataclass(frozen=True, slots=True)
class Candidate:
    """One design proposed by the search, with its estimated figures: values (role ->
    ohm, F), families (role -> family id), parts (role -> part id), stage kind;
    err (ln of predicted over target frequency), load_v (predicted load peak at the
    minimum, nominal and maximum temperature, V), osc_v (oscillator peak, V), thd,
    m (gain excess, nepers), yield_est, cost (currency per board), signature."""

    signature: tuple
    values: dict = field(hash=False, compare=False)
    families: dict = field(hash=False, compare=False)
    parts: dict = field(hash=False, compare=False)
    stage: str = "none"
    err: float = 0.0
    load_v: tuple = ()
    osc_v: float = 0.0
    thd: float = 0.0
    m: float = 0.0
    yield_est: float = 0.0
    cost: float = 0.0
    s_amp: float = 0.0          # d ln(load amplitude) / d m
    s_thd: float = 0.0          # d THD / d m
    pull: float = 0.0           # the control's own frequency pull (ln)
    simulated: bool = False     # yield_est comes from the Monte Carlo model, not the closed form
    control: str = ""           # the amplitude control's registry name ("": the problem's limiter control)
    freq_sigma: float = 0.0     # relative spread of the frequency from the arm families (0: not known)
    r_gnd: float = 0.0          # the gain network's fixed resistor, ohm (0: not one of the search's levels)

    def key(self) -> tuple:
        """The search's own order: estimated yield to YIELD_STEP, then cost."""
        return (math.floor((1.0 - self.yield_est) / YIELD_STEP), self.cost, abs(self.err))

    def kind(self) -> tuple:
        """What the search's estimates err alike on: the op-amp, the amplitude control
        and its part, and the output stage (:class:`partpick.search.pool.Pool` demotes a
        kind its verifications keep failing)."""
        return self.stage, self.control, tuple(sorted(self.parts.items()))


@dataclass(frozen=True, eq=False)
class Batch:
    """The best row of every configuration of one limiter and gain family, as arrays
    (see Candidate for the figures); ``candidate(i)`` makes row i a Candidate."""

    searcher: object   # the Searcher whose tables the rows index
    lim: object
    gf: object
    r_gnd: float          # the gain network's fixed resistor, ohm
    groups: list
    group: np.ndarray
    pair: np.ndarray
    vals: np.ndarray
    r_fb: np.ndarray
    ird: np.ndarray
    ra: np.ndarray
    rb: np.ndarray
    err: np.ndarray
    load: np.ndarray
    osc: np.ndarray
    thd: np.ndarray
    m: np.ndarray
    y: np.ndarray
    s_amp: np.ndarray
    s_thd: np.ndarray
    pull: np.ndarray
    cost: np.ndarray

    def __len__(self) -> int:
        return self.y.size

    def keys(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """The search's order (Candidate.key) of every row: yield tier, cost, |error|."""
        return np.floor((1.0 - self.y) / YIELD_STEP), self.cost, np.abs(self.err)

    def kinds(self) -> list[tuple]:
        """Candidate.kind of every row, without making the candidates."""
        of_group = [(g[1], "", (("limiter", self.lim.id), ("opamp", g[0].id))) for g in self.groups]
        return [of_group[g] for g in self.group]

    def candidate(self, i: int) -> Candidate:
        s = self.searcher
        topo = s.problem.topology
        op_info, kind, sf = self.groups[self.group[i]]
        rfa, cfa, table = s.pairs[self.pair[i]][:3]
        values = dict(zip(table.roles, (float(v) for v in self.vals[i])))
        families = dict(zip(table.roles, table.families))
        for role, v in topo.gain_values(self.r_gnd, float(self.r_fb[i])).items():
            values[role], families[role] = float(v), self.gf.id
        r_ser = float(s.rd_choices(self.lim, self.gf, self.r_gnd)[self.ird[i]])
        if r_ser > 0:
            role = s.problem.control.series_role
            values[role], families[role] = r_ser, self.gf.id
        if kind in STAGE_RATIO:
            for role, v in zip(periphery.STAGE_ROLES, (self.ra[i], self.rb[i])):
                values[role], families[role] = float(v), sf.id
        parts = {"opamp": op_info.id, "limiter": self.lim.id}
        signature = (op_info.id, self.lim.id, rfa.id, cfa.id, self.gf.id, kind, sf.id if kind in STAGE_RATIO else "")
        return Candidate(signature, values, families, parts, kind, float(self.err[i]),
                         tuple(float(x) for x in self.load[:, i]), float(self.osc[i]), float(self.thd[i]),
                         float(self.m[i]), float(self.y[i]), float(self.cost[i]), float(self.s_amp[i]),
                         float(self.s_thd[i]), float(self.pull[i]), freq_sigma=s.problem.freq_sigma(rfa, cfa),
                         r_gnd=self.r_gnd)


def on_shelf(c: Candidate, shelf, builds: int) -> bool:
    """Whether the shelf holds every part of ``c`` for ``builds`` boards."""
    uses: dict = {}
    for role, v in c.values.items():
        uses[(c.families[role], v)] = uses.get((c.families[role], v), 0) + 1
    for part in c.parts.values():
        uses[(part, None)] = uses.get((part, None), 0) + 1
    return all((shelf.quantity(f) if v is None else shelf.quantity(f, v)) >= n * builds for (f, v), n in uses.items())
