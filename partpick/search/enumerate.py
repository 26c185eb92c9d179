"""The best design of every configuration, by exact enumeration over numpy arrays.

A configuration is what a buyer tells designs apart by: the op-amp, the limiter part,
the resistor family of the arms, the capacitor family, the resistor family of the gain
network, the output stage kind and its resistor family. Within one, the values are
chosen jointly: every arm set of the family pair in the frequency window (the
topology's table, nothing pruned), the gain network at each of the topology's
impedance levels (Rg the family's value nearest each of ``gain_levels``: a junction
limiter is not scale-free, so the level moves the amplitude and the THD), every
feedback resistor of the gain family that puts the gain excess where the loop can use
it, every series resistor Rd of a log grid of the family, and the stage pair whose
ratio is nearest the one that centres the amplitude over temperature.

The amplitude side (Rf, Rd, stage) depends on the arms only through their required gain
K, so it is scored once per (op-amp, limiter, gain family, level) on a fixed grid of K bins
(0.4 % wide); each bin's best choices are then matched with the cheapest arm set of that
bin whose frequency, with the op-amp's and the limiter's pull, lands within the frequency
resolution of the target (a range-minimum query over the arm sets sorted by frequency),
and evaluated again exactly at that arm set's own K, where a bound of its estimated yield
says it may be verified (Searcher._bounded). Scores are estimates
(:mod:`partpick.search.estimate`; the limiter's surface); verification decides.
"""

from __future__ import annotations

import math

import numpy as np

from partpick.circuits import periphery
from partpick.circuits.limiter_surface import Planner, prepare
from partpick.circuits.options import nearest, values_of
from partpick.derating import package_limit
from partpick.physics.opamp import linear_peak_v
from partpick.search.candidates import YIELD_STEP, Batch, Candidate
from partpick.search.drive import BUFFERED, within_drive
from partpick.search.estimate import amplitude_sd, below_share, frequency_share, phi, window_share
from partpick.search.kernels import best_rows, cheapest_of_groups, first_of_groups
from partpick.search.pool import hopeless
from partpick.search.prices import PriceBook
from partpick.search.problem import Problem, m_sigma, r_limits
from partpick.search.simulate import simulated
from partpick.search.tables import K_BIN, STAGE_RATIO, ArmIndex, StageTable, memo, memo_all

__all__ = ["Candidate", "Batch", "PriceBook", "Searcher", "STAGE_RATIO", "SIMPSON"]

M_GRID = np.geomspace(0.003, 0.2, 16)   # gain excesses (nepers) the feedback resistors are chosen for
RD_GRID = 24             # series resistor values per limiter, log-spaced from the family
M_RANGE = (0.002, 0.25)  # nepers of gain excess the amplitude side considers
SIMPSON = (1 / 6, 4 / 6, 1 / 6)   # the temperature is uniform over the range: weights of min, nominal, max
HOPELESS_PAIR = 0.05     # a family pair whose best frequency share is this far under the yield is left out
WINDOW_MARGIN = 0.01     # ln f: beyond the pulls and the tolerance, for the retuning with measured pulls
# ln f: the arm sets searched lie within this of the target (beyond the pulls) even when
# the tolerance is wider: the table grows with the window (a +/-49 % window of 0.1 %
# resistors is millions of arm sets, gigabytes), and an arm set further off than 5 % only
# wins where a capacitor value that far away is cheaper (the note says when it binds)
WINDOW_CAP = math.log(1.05)


class Searcher:
    """The enumeration for one problem: shared tables, then configurations group by
    group (an op-amp, a limiter, a gain family), each group's best design per
    configuration."""

    def __init__(self, problem: Problem, price: PriceBook, kinds: tuple[str, ...], cheapest: bool = False) -> None:
        self.problem = problem
        self.price = price
        self.kinds = kinds
        self.cheapest = cheapest   # (cost first: each configuration's cheapest row estimated to pass, too)
        # the least estimated yield a row needs to be any configuration's candidate: a tier
        # (two for rounding) under the least the pool verifies (pool.hopeless)
        self.least_y = hopeless(problem.y_min) - 2 * YIELD_STEP
        spec = problem.spec
        self.f_t = spec.frequency.target_hz
        # the load's admittance at the target: its magnitude sets the current, its phase the
        # power the load takes (as verification reads it)
        y_load = self.y_load = spec.load.admittance_s(self.f_t) if problem.drive_y is None else problem.drive_y
        self._amp, self._levels = {}, {}
        # THD counts at every output the topology has only when the spec loads them all (a
        # second output without a load_cosine is not used)
        self.all_outputs = spec.load_cosine is not None
        self._ch, self._stages = {}, {}
        self._sk = self._fc = self._dear = None
        # one table per value list (families of one series share it), and the load read only
        # by the kind whose gain it changes
        jobs = {(k, f.id): (("stage", k, values_of(f, problem.shelf), y_load if k == "attenuator" else None),
                            lambda k=k, f=f: StageTable(k, f, y_load, problem.shelf))
                for k in kinds if k in STAGE_RATIO for f in problem.r_families}
        self.stage_tables = {name: memo(*job) for name, job in jobs.items()}
        limits = {op.id: package_limit(op.opamp, spec)[0] for op in problem.ops}
        self._op_fields = {**_OP_FIELDS, "limit_w": lambda o: limits[o.id],
                           "r_min": lambda o: r_limits(o.opamp, spec.derating)[0],
                           "r_max": lambda o: r_limits(o.opamp, spec.derating)[1]}
        # the bins of K with the op-amp's loss that an arm set (within the topology's arm
        # ratio) and an op-amp reach
        shifts = np.unique([int(round(op.loss / K_BIN)) for op in problem.ops] or [0])
        k_lo, k_hi = problem.topology.required_gain_range
        arm_bins = np.arange(math.floor(math.log(k_lo) / K_BIN), math.ceil(math.log(k_hi) / K_BIN) + 1)
        self.ke_bins = np.unique(arm_bins[:, None] + shifts[None, :])
        self._pairs = None
        self.window_capped = False   # the arm sets' window is narrower than the tolerance (WINDOW_CAP)
        self.best_hold = None   # (resistor family, capacitor family, frequency share centred) of the best pair

    @property
    def pairs(self) -> list:
        """The arm family pairs that can hold the frequency yield, each with its table of
        arm sets in the frequency window the search needs (rfa, cfa, table, index,
        drift, best frequency share): the window spans every pull an op-amp and an
        amplitude-side row may put on the network, plus the tolerance (built on first
        use, after the amplitude side)."""
        if self._pairs is None:
            self._pairs = self._build_pairs()
        return self._pairs

    def _build_pairs(self) -> list:
        problem, price = self.problem, self.price
        for lim in problem.limiters:   # (a part's tables not yet cached: all made at once)
            prepare(problem.topology, lim, problem.control, self.f_t,
                    [r for gf in problem.r_families for r in self.levels(gf)])
        combos = [(lim, gf, r_gnd) for lim in problem.limiters for gf in problem.r_families for r_gnd in self.levels(gf)]
        memo_all(self._amp_job(*c) for c in combos)
        pulls = [a["pull"] for c in combos if (a := self._amp_side(*c)) is not None and a["pull"].size]
        op_pull = [op.pull for op in problem.ops] or [0.0]
        row_lo = min((float(np.nanmin(x)) for x in pulls), default=0.0)
        row_hi = max((float(np.nanmax(x)) for x in pulls), default=0.0)
        # (a shelf's table is small whatever the window, and may hold only values far off)
        half = problem.tol_f if problem.shelf is not None else min(problem.tol_f, WINDOW_CAP)
        self.window_capped = half < problem.tol_f
        ln_lo = problem.ln_f - max(op_pull) - row_hi - half - WINDOW_MARGIN
        ln_hi = problem.ln_f - min(op_pull) - row_lo + half + WINDOW_MARGIN
        kept, hopeless = [], []
        for rfa in problem.r_families:
            for cfa in problem.c_families:
                drift = problem.freq_drift(rfa, cfa)
                best = frequency_share(np.array([0.0]), problem.freq_sigma(rfa, cfa), drift, problem.tol_f)[0]

                def make(rfa=rfa, cfa=cfa):
                    table = problem.topology.network_table(rfa, cfa, ln_lo, ln_hi, shelf=problem.shelf)
                    return table, (ArmIndex(table, price) if len(table) else None)

                key = ("arms", problem.topology.name, rfa, cfa, ln_lo, ln_hi, problem.shelf, price.pricer.stock)
                # (a pair whose tolerances break the frequency yield even centred on the target is
                # not searched)
                (hopeless if best < problem.y_min - HOPELESS_PAIR else kept).append(
                    (rfa, cfa, drift, best, key, make, len(kept) + len(hopeless)))
        memo_all((key, make) for *_, key, make, _ in kept)
        pairs = []
        for rfa, cfa, drift, best, key, make, _ in kept:
            table, index = memo(key, make)
            if len(table):
                pairs.append((rfa, cfa, table, index, drift, best))
        # the best pair at holding the frequency, for a refusal: of the pairs with arm sets near
        # the target (a pair that holds it but cannot reach it is no answer), else of all; the
        # first of equals in the families' order
        order = {(x[0].id, x[1].id): x[6] for x in kept + hopeless}
        holds = [(x[0], x[1], x[5]) for x in pairs]
        every = [(x[0], x[1], x[3]) for x in kept + hopeless]
        if max((h[2] for h in every), default=0.0) > max((h[2] for h in holds), default=-1.0):
            memo_all((key, make) for *_, key, make, _ in hopeless)   # (only where the best is not searched)
            holds += [(x[0], x[1], x[3]) for x in hopeless if len(memo(x[4], x[5])[0])]
        self.best_hold = max(holds or every, key=lambda h: (h[2], -order[h[0].id, h[1].id]), default=None)
        return pairs

    def levels(self, gf) -> list[float]:
        """The gain network's fixed resistors (Rg, ohm) searched with gain family gf: the
        family's (shelf's) value nearest each of the topology's impedance levels (found once)."""
        if gf.id not in self._levels:
            v, p = np.array(values_of(gf, self.problem.shelf)), self.problem
            self._levels[gf.id] = sorted({nearest(v, lv) for lv in p.topology.gain_levels}) if v.size else []
        return list(self._levels[gf.id])

    def _amp_side(self, lim, gf, r_gnd: float):
        """The amplitude side of one limiter and gain family with the fixed resistor r_gnd (ohm) on the
        grid of required gains K_eff (op-amp loss included): for each bin, the feedback
        resistors nearest a log grid of gain excesses, each with every Rd of the
        planner. Arrays over the rows (bin, Rf, Rd) that can meet the THD limit with the
        loop starting, sorted by bin; shared by every op-amp."""
        key = (lim.id, gf.id, r_gnd)
        if key not in self._amp:
            self._amp[key] = memo(*self._amp_job(lim, gf, r_gnd))
        return self._amp[key]

    def _amp_job(self, lim, gf, r_gnd: float):
        """(memo key, maker) of _amp_side's rows."""
        p = self.problem
        # (keyed by the family's values, all the rows read of it: families of one series share them)
        return (("amp", p.topology.name, self.all_outputs, lim, values_of(gf, p.shelf), r_gnd, self.f_t, p.temps_k,
                 p.thd_aim, self.ke_bins.tobytes()), lambda: self._amp_rows(lim, gf, r_gnd))

    def _amp_rows(self, lim, gf, r_gnd: float):
        p = self.problem
        topo, ctl = p.topology, p.control
        gvals = np.array(values_of(gf, p.shelf))
        if gvals.size == 0:
            return None
        rd_pool = gvals[(gvals >= 0.003 * r_gnd) & (gvals <= 30 * r_gnd)]
        if rd_pool.size > RD_GRID:
            rd_pool = np.unique(rd_pool[np.round(np.linspace(0, rd_pool.size - 1, RD_GRID)).astype(int)])
        planner = Planner(topo, lim, ctl, rd_pool, p.temps_k, self.f_t, r_gnd)
        ke = np.exp(self.ke_bins * K_BIN)
        g_all = topo.gain(topo.gain_values(r_gnd, gvals))
        want = ke[:, None] * np.exp(M_GRID[None, :])                       # gains for the excess grid
        j = np.clip(np.searchsorted(g_all, want), 1, g_all.size - 1)
        j = np.where(np.abs(np.log(g_all[j - 1] / want)) <= np.abs(np.log(g_all[j] / want)), j - 1, j)
        # the distinct (bin, Rf) cells in (bin, Rf) order: one integer each (a row-wise unique sorts a record view)
        cells = np.unique(np.repeat(np.arange(ke.size), M_GRID.size) * g_all.size + j.ravel())
        kb, r_fb = cells // g_all.size, gvals[cells % g_all.size]
        gain = topo.gain(topo.gain_values(r_gnd, r_fb))
        m = np.log(gain / ke[kb])
        keep = (m >= M_RANGE[0]) & (m <= M_RANGE[1])
        kb, r_fb, gain, m = kb[keep], r_fb[keep], gain[keep], m[keep]
        gneed = topo.port_conductance(r_gnd, r_fb, ke[kb])
        t_scale = topo.thd_transfer(ke[kb], all_outputs=self.all_outputs)
        with np.errstate(invalid="ignore"):
            # a row whose nominal THD is over what the design may aim at (derating rule thd_share)
            cell, ird = np.nonzero(planner.thd(gneed, t_scale) <= p.thd_aim)   # sorted by cell, hence by bin
        k_c = ke[kb[cell]]
        ev = planner.evaluate(gneed[cell], topo.port_conductance_slope(r_gnd, r_fb[cell], k_c), topo.osc_per_port_k(k_c),
                              m[cell], ird, thd_scale=t_scale[cell])
        vo = np.stack([ev[f"vo{i}"] for i in range(3)])
        ok = np.flatnonzero(np.all(np.isfinite(vo), axis=0) & np.isfinite(ev["thd"]))
        cell, ird = cell[ok], ird[ok]
        amp = {"planner": planner, "r_gnd": r_gnd, "bin": self.ke_bins[kb[cell]], "r_fb": r_fb[cell], "gain": gain[cell],
               "m": m[cell], "ird": ird, "vo": vo[:, ok], "thd": ev["thd"][ok], "pull": ev["pull"][ok],
               "s_amp": ev["dln_vo"][ok], "s_thd": ev["dthd"][ok],
               "vf_rel": ctl.amplitude_spread_of(lim, p.temps_k[1])}
        amp["vo_lo"], amp["vo_hi"] = amp["vo"].min(axis=0), amp["vo"].max(axis=0)   # (over temperature)
        return amp

    def rd_choices(self, lim, gf, r_gnd: float) -> np.ndarray:
        """The series resistors (ohm, 0 first) a limiter, gain family and level's rows index."""
        return self._amp_side(lim, gf, r_gnd)["planner"].choices

    def _stage_of(self, lim, gf, r_gnd, kind, sf):
        """The stage (ratio, Ra, Rb) of every amplitude-side row of a limiter, gain family
        and level, with the row's amplitude margin to its tolerance at the worst temperature
        (ln; None without a stage of this kind and family), cached once per distinct rows and
        stage table (families of one series share both; this searcher holds them)."""
        amp = self._amp_side(lim, gf, r_gnd)
        share = amp["r_gnd"] if self.cheapest and sf.id == gf.id else None
        key = (id(amp), kind, id(self.stage_tables.get((kind, sf.id))), share)
        if key not in self._stages:
            res = self._stage(kind, sf, amp, share)
            if res is not None:
                # the amplitude's margin to its tolerance at the worst temperature (ln), the same for every
                # op-amp (its spread divides it), read at the amplitude's extremes (each step is monotone)
                with np.errstate(invalid="ignore", divide="ignore"):
                    dev = [np.abs(np.log(amp[v] * res[0] / self.problem.amp_v)) for v in ("vo_lo", "vo_hi")]
                    res = (*res, math.log1p(self.problem.tol_a) - np.maximum(*dev))
            self._stages[key] = res
        return self._stages[key]

    def _dearest(self) -> float:
        """The dearest unit and line price of any allowed resistor value (USD): the most a slot adds."""
        if self._dear is None:
            p = self.problem
            self._dear = max((float(np.max(self.price.units(f.id, v) + self.price.lines(f.id, v)))
                              for f in p.r_families if (v := np.array(values_of(f, p.shelf))).size), default=0.0)
        return self._dear

    def _typical_sk(self) -> float:
        """The arms' required-gain spread (ln) of a typical family pair (the median of each pair's least)."""
        if self._sk is None:
            self._sk = float(np.median([pr[2].sigma_lnk.min() for pr in self.pairs]))
        return self._sk

    def _choices(self, op, lim, gf, r_gnd):
        """The amplitude side's best rows per K bin for each stage kind and stage
        family, for one op-amp (made for every op-amp at once, and cached): (kind, stage
        family, rows, the arms' K bins, stage ratio, Ra, Rb)."""
        key = (op.id, lim.id, gf.id, r_gnd)
        if key not in self._ch:
            self._choose(lim, gf, r_gnd)
        return self._ch[key]

    def _choose(self, lim, gf, r_gnd) -> None:
        p, ops = self.problem, self.problem.ops
        amp = self._amp_side(lim, gf, r_gnd)
        out = {op.id: [] for op in ops}
        cheapest = min(p.r_families, key=lambda f: f.price_unit)
        stages = [] if amp is None or amp["m"].size == 0 else [
            (kind, sf, res) for kind in self.kinds
            for sf in ((gf,) if kind not in STAGE_RATIO else tuple({gf.id: gf, cheapest.id: cheapest}.values()))
            if (res := self._stage_of(lim, gf, r_gnd, kind, sf)) is not None]
        if stages:
            m = amp["m"]
            osc_max = np.array([min(op.swing_v, linear_peak_v(op.opamp, self.f_t)) for op in ops])[:, None]
            s_m = np.stack([m_sigma(p, gf, amp["gain"], self._typical_sk(), op.loss, op.opamp.gbw_spread_frac)
                            for op in ops])
            with np.errstate(invalid="ignore", divide="ignore"):
                s_a = amplitude_sd(amp["s_amp"], s_m, amp["vf_rel"], self.problem.amp_sigma)
                # margins in standard deviations: the search's proxy for each share of the yield
                z_core = np.minimum(m / s_m, (p.thd_max - amp["thd"]) / np.maximum(np.abs(amp["s_thd"]) * s_m, 1e-12))
                z_core = np.where(amp["vo_hi"] <= osc_max, z_core, -np.inf)
                z_amp = np.stack([np.broadcast_to(res[3], m.shape) for *_, res in stages])[None] / s_a[:, None]
                score = np.where(np.isfinite(z_amp), np.minimum(z_core[:, None], z_amp), -np.inf)
            # (every op-amp, stage kind and family at once: each a line of its own)
            chosen = best_rows(amp["bin"], score.reshape(-1, m.size))
            if self.cheapest:
                chosen |= best_rows(amp["bin"], np.where(amp["ird"] == 0, score.reshape(-1, m.size), -np.inf), keep=1)
            chosen = chosen.reshape(score.shape)
            full = [[np.broadcast_to(x, m.shape) for x in res[:3]] for *_, res in stages]   # (ratio, Ra, Rb)
            for op, picks in zip(ops, chosen):
                shift = int(round(op.loss / K_BIN))         # K_eff bins to the arms' K bins
                for (kind, sf, _), stage, pick in zip(stages, full, picks):
                    if (rows := np.flatnonzero(pick)).size:
                        out[op.id].append((kind, sf, rows, amp["bin"][rows] - shift, *(x[rows] for x in stage)))
        self._ch.update({(op.id, lim.id, gf.id, r_gnd): (amp, out[op.id]) for op in ops})

    def configurations(self, lim, gf, r_gnd: float) -> "Batch | None":
        """The best estimated design of every configuration with this limiter, gain
        family and the fixed resistor r_gnd (ohm): every op-amp, arm family pair, stage
        kind and stage family at once. Each amplitude-side choice is matched with the
        cheapest arm set of its K bin landing within the frequency resolution of target
        (or the nearest one) and evaluated again exactly at that arm set's K."""
        amp = self._amp_side(lim, gf, r_gnd)
        p = self.problem
        groups, parts = [], []
        for op in p.ops:
            for kind, sf, rows, bins, ratio_c, ra_c, rb_c in self._choices(op, lim, gf, r_gnd)[1]:
                parts.append((np.full(rows.size, len(groups)), rows, bins, ratio_c, ra_c, rb_c))
                groups.append((op, kind, sf))
        if not parts:
            return None
        grp, arow, kbin, ratio, ra, rb = (np.concatenate([x[i] for x in parts]) for i in range(6))
        op_pull = np.array([g[0].pull for g in groups])
        target = p.ln_f - op_pull[grp] - amp["pull"][arow]
        # the arm set depends only on the op-amp and the amplitude-side row, which the stage
        # kinds and families of one op-amp mostly share (3.6 rows to a distinct pair on two
        # requirements): looked up once per distinct pair
        op_i = _op_index(groups, grp)
        _, first, back = np.unique(op_i * amp["m"].size + arow, return_index=True, return_inverse=True)
        back = back.reshape(-1)
        q_bin, q_target = kbin[first], target[first]
        found = []   # (pair, the arm set of each distinct pair of op-amp and row)
        for pi, (rfa, cfa, table, index, drift, best_f) in enumerate(self.pairs):
            if self._centred()[pi] < self.least_y - 1e-5:
                continue   # (no row of the pair can reach least_y: _bounded)
            res = max(table.sigma_lnf, 2e-4)
            arm = index.cheapest(q_bin, q_target - res, q_target + res)
            miss = arm < 0
            if miss.any():
                arm[miss] = index.nearest(q_bin[miss], q_target[miss])
            found.append((pi, arm, np.flatnonzero(arm >= 0)))
        if not sum(x[2].size for x in found):
            return None
        # each distinct pair's yield bounded at each arm set (its rows share the op-amp, the
        # row and the arm set: the rows' bounds), and the rows of those kept, in pair order
        op = {name: np.array([f(g[0]) for g in groups]) for name, f in self._op_fields.items()}   # (per group)
        ln_k, sig_k = (np.concatenate([getattr(self.pairs[pi][2], attr)[a[q]] for pi, a, q in found])
                       for attr in ("ln_k", "sigma_lnk"))
        q_all = np.concatenate([q for *_, q in found])
        keep = self._bounded(gf, amp, grp[first[q_all]], arow[first[q_all]],
                             np.concatenate([np.full(q.size, pi) for pi, _, q in found]), ln_k, sig_k, op)
        ends, picked = np.cumsum([0] + [q.size for *_, q in found]), []
        for (pi, a, q), lo, hi in zip(found, ends[:-1], ends[1:]):
            kept = np.zeros(first.size, bool)
            kept[q[keep[lo:hi]]] = True
            if (sel := np.flatnonzero(kept[back])).size:
                picked.append((pi, sel, a[back[sel]]))
        if not picked:
            return None
        pair_i, row, arm = (np.concatenate([np.full(x[1].size, x[0]) for x in picked]),
                            np.concatenate([x[1] for x in picked]), np.concatenate([x[2] for x in picked]))
        g_row, a_row = grp[row], arow[row]
        part = [(self.pairs[pi][2], self.pairs[pi][3], a) for pi, _, a in picked]
        vals, ln_k, ln_f0, sig_k = (np.concatenate([getattr(t, attr)[a] for t, _, a in part])
                                    for attr in ("values", "ln_k", "ln_f0", "sigma_lnk"))
        arm_cost = np.concatenate([x.cost[x.rank[a]] for _, x, a in part])
        sig_f = np.array([pr[2].sigma_lnf for pr in self.pairs])[pair_i]
        drift = np.array([pr[4] for pr in self.pairs])[pair_i]
        kinds = np.array([periphery.STAGE_KINDS.index(g[1]) for g in groups])[g_row]
        return self._rows(lim, gf, amp, groups, g_row, kinds, a_row, ratio[row], ra[row], rb[row], pair_i, arm, vals,
                          ln_k, ln_f0, sig_k, sig_f, drift, arm_cost, {name: x[g_row] for name, x in op.items()})

    def _bounded(self, gf, amp, group, arow, pair_i, ln_k, sig_k, op) -> np.ndarray:
        """Whether each amplitude-side row (arow: its index; group: its group's; op: the
        op-amp figures per group) matched with an arm set (ln K and its spread) of pair
        pair_i may reach ``least_y``: its estimated yield bounded by the product of the
        startup share, the pair's frequency share and the amplitude share with the row's
        own spreads, both centred (a normal spread puts the most within a window centred
        on it), and the THD share at 1."""
        p, r_fb, loss, r_gnd = self.problem, amp["r_fb"][arow], op["loss"][group], amp["r_gnd"]
        topo, k = p.topology, np.exp(ln_k + loss)
        gain = topo.gain(topo.gain_values(r_gnd, r_fb))
        m = np.log(gain / k)
        s_m = m_sigma(p, gf, gain, sig_k, loss, op["gbw_spread"][group])
        with np.errstate(invalid="ignore", divide="ignore"):
            slope = amp["planner"].amplitude_slope(topo.port_conductance(r_gnd, r_fb, k),
                                                   topo.port_conductance_slope(r_gnd, r_fb, k), amp["ird"][arow])
            s_a = amplitude_sd(slope, s_m, amp["vf_rel"], p.amp_sigma)
            bound = phi(m / s_m) * self._centred()[pair_i] * window_share(0.0, s_a, math.log1p(p.tol_a))
        return bound >= self.least_y - 1e-5   # (phi's own error, 1.5e-7 a call, with room)

    def _centred(self) -> np.ndarray:
        """Each arm family pair's frequency share centred on the target (its most)."""
        if self._fc is None:
            self._fc = frequency_share(np.zeros(len(self.pairs)), np.array([pr[2].sigma_lnf for pr in self.pairs]),
                                       np.array([pr[4] for pr in self.pairs]), self.problem.tol_f)
        return self._fc

    def _rows(self, lim, gf, amp, groups, g_row, kinds, arow, ratio, ra, rb, pair_i, arm, vals, ln_k, ln_f0, sig_k,
              sig_f, drift, arm_cost, op) -> "Batch | None":
        """Estimated figures of the rows kept (_bounded), and the best row of each
        configuration (group x arm family pair) with its exact cost."""
        p = self.problem
        topo = p.topology
        r_gnd, planner, vf_rel = amp["r_gnd"], amp["planner"], amp["vf_rel"]
        r_fb, ird = amp["r_fb"][arow], amp["ird"][arow]
        k = np.exp(ln_k + op["loss"])
        gain = topo.gain(topo.gain_values(r_gnd, r_fb))
        m = np.log(gain / k)
        # the shares of the yield the stage does not enter (frequency, startup, THD) once per
        # distinct (amplitude row, arm set, op-amp), and the limiter's figures once per distinct
        # (amplitude row, arm set, op-amp loss), found among those (an op-amp has one loss: a sort
        # of the few, not of every row): the stage kinds and families of one op-amp mostly pick
        # the same rows (each row's loss an index among the groups' few)
        loss_i = np.unique(np.array([g[0].loss for g in groups]), return_inverse=True)[1].reshape(-1)[g_row]
        key = (arow.astype(np.int64) * len(self.pairs) + pair_i) * (int(arm.max()) + 1) + arm
        op_i = _op_index(groups, g_row)
        _, u2, back2 = np.unique(key * (int(op_i.max()) + 1) + op_i, return_index=True, return_inverse=True)
        back2 = back2.reshape(-1)
        _, first, back = np.unique(key[u2] * (int(loss_i.max()) + 1) + loss_i[u2], return_index=True,
                                   return_inverse=True)
        u, back = u2[first], back.reshape(-1)[back2]
        ev = planner.evaluate(topo.port_conductance(r_gnd, r_fb[u], k[u]),
                              topo.port_conductance_slope(r_gnd, r_fb[u], k[u]), topo.osc_per_port_k(k[u]), m[u],
                              ird[u], thd_scale=topo.thd_transfer(k[u], vals[u], all_outputs=self.all_outputs))
        ev = {name: x[back] for name, x in ev.items()}
        vo = np.stack([ev[f"vo{i}"] for i in range(3)])
        err = ln_f0 + op["pull"] + ev["pull"] - p.ln_f
        load = vo * ratio
        s_m = m_sigma(p, gf, gain[u2], sig_k[u2], op["loss"][u2], op["gbw_spread"][u2])[back2]
        rr = vals[:, [0, 2]]
        with np.errstate(invalid="ignore", divide="ignore"):
            ok = ((m > 0) & (ev["thd"] <= p.thd_aim) & (rr.max(axis=1) <= op["r_max"])
                  & (rr.min(axis=1) >= op["r_min"]) & (vo.max(axis=0) <= op["swing"]))
            # the yield estimate of the rows within those limits (the others are not kept)
            s = np.flatnonzero(ok)
            s_a = amplitude_sd(ev["dln_vo"][s], s_m[s], vf_rel, p.amp_sigma)
            y = np.zeros(m.shape)
            core = (frequency_share(err[u2], sig_f[u2], drift[u2], p.tol_f) * phi(m[u2] / s_m[u2])
                    * below_share(ev["thd"][u2], np.abs(ev["dthd"][u2]) * s_m[u2], p.thd_max))
            y[s] = core[back2[s]] * sum(w * window_share(np.log(load[i, s] / p.amp_v), s_a, math.log1p(p.tol_a))
                                        for i, w in enumerate(SIMPSON))
            ok &= np.isfinite(y) & (y > 0)
        # a row under least_y is never a configuration's candidate (a row that is has a tier
        # above it, or the pool leaves its configuration out): what it drives is not worked out
        s = np.flatnonzero(ok & (y >= self.least_y))
        ok[:] = False
        if s.size == 0:
            return None
        ok[s] = within_drive(self.f_t, vals[s], r_fb[s], r_gnd, kinds[s], ra[s], rb[s], vo[:, s], load[:, s],
                             self.y_load, {name: x[s] for name, x in op.items()}, p.current_share,
                             p.spec.supply.span_max_v)
        idx = np.flatnonzero(ok)
        if idx.size == 0:
            return None
        # a configuration is what a buyer tells designs apart by: the stage's resistor
        # family is a choice inside it, like its values
        same = {}
        cfg_of = np.array([same.setdefault((g[0].id, g[1]), len(same)) for g in groups])
        config = cfg_of[g_row[idx]] * len(self.pairs) + pair_i[idx]
        tier = np.floor((1.0 - y[idx]) / YIELD_STEP)
        keys = (tier, arm_cost[idx], np.abs(err[idx]))

        # the slots' family codes and op-amp figures per group and per arm family pair,
        # indexed by row below (not looked up row by row)
        pair_codes = np.array([[self.price.code(f) for f in pr[2].families] for pr in self.pairs])
        g_ratio = np.array([g[1] in STAGE_RATIO for g in groups], bool)
        g_sf = np.array([self.price.code(g[2].id) for g in groups])
        g_op = np.array([g[0].id for g in groups])
        g_chans = np.array([g[0].opamp.channels for g in groups])

        def slots(rows):
            """(columns, op-amp per row, packages per row) of the passive slots (see
            PriceBook.row_costs) for rows."""
            gr = g_row[rows]
            ratio_stage = g_ratio[gr]
            gvals = topo.gain_values(r_gnd, r_fb[rows])
            columns = [(pair_codes[pair_i[rows], j], vals[rows, j]) for j in range(vals.shape[1])]
            columns += [(self.price.code(gf.id), np.broadcast_to(v, rows.shape)) for v in gvals.values()]
            columns.append((self.price.code(gf.id), planner.choices[ird[rows]]))
            sf_code = g_sf[gr]
            columns += [(sf_code, np.where(ratio_stage, ra[rows], 0.0)), (sf_code, np.where(ratio_stage, rb[rows], 0.0))]
            return columns, g_op[gr], -(-(topo.channels + np.isin(kinds[rows], BUFFERED).astype(int)) // g_chans[gr])

        if p.shelf is None:
            i = idx[first_of_groups(config, keys)]      # the best row of each configuration
            # ranked by cost first: beside it, its cheapest row estimated to pass (the best
            # may be a yield tier up at dearer arms, and a cheaper row of the tier below pass)
            # (by its whole cost: the arm sets' cost bounds it, within what the other slots add)
            if self.cheapest and (promising := y[idx] >= p.y_min).any():
                rows = idx[promising]
                slack = (len(slots(rows[:1])[0]) - vals.shape[1]) * self._dearest()
                i = np.union1d(i, rows[cheapest_of_groups(config[promising], keys[1][promising], slack,
                                                          lambda at: self.price.row_costs(*slots(rows[at]), lim.id),
                                                          keys[2][promising])])
        else:
            # building from the shelf alone: a row must find every part in the quantity
            # its boards need (a value in three slots needs three a board): the rows in
            # order, the first that fits of each configuration
            order = idx[np.lexsort(keys[::-1] + (config,))]
            order = order[self.price.fits(*slots(order), lim.id, p.shelf, p.spec.builds)]
            if order.size == 0:
                return None
            cfg = cfg_of[g_row[order]] * len(self.pairs) + pair_i[order]
            i = order[np.r_[True, cfg[1:] != cfg[:-1]]]
        cost = self.price.row_costs(*slots(i), lim.id)
        return Batch(self, lim, gf, r_gnd, groups, g_row[i], pair_i[i], vals[i], r_fb[i], ird[i], ra[i], rb[i], err[i],
                     load[:, i], vo[1, i], ev["thd"][i], m[i], y[i], ev["dln_vo"][i], ev["dthd"][i], ev["pull"][i],
                     cost)

    def simulate(self, c: Candidate, samples: int = 4000) -> Candidate:
        """The candidate placed by the Monte Carlo model of its yield (:func:`simulated`)."""
        return simulated(self.problem, self.f_t, c, samples)

    # -- refinement with what exact physics measured --------------------------------------------
    def _pair(self, rfa_id: str, cfa_id: str):
        for pair in self.pairs:
            if pair[0].id == rfa_id and pair[1].id == cfa_id:
                return pair
        return None

    def retune_network(self, c: Candidate, pull: float) -> dict | None:
        """Values of the frequency network that land closer on target once the pull
        (ln of the built over the textbook frequency, as exact physics measured it) is
        known: the cheapest arm set of the same required-gain bin within the frequency
        resolution, else the nearest one; None when none does better than the present."""
        p = self.problem
        pair = self._pair(c.signature[2], c.signature[3])
        if pair is None:
            return None
        _, _, table, index, _, _ = pair
        roles = table.roles
        vals = {r: c.values[r] for r in roles}
        ln_f0 = float(np.log(p.topology.f0_hz(vals)))
        b = np.array([int(round(math.log(float(p.topology.required_gain(vals))) / K_BIN))])
        target = np.array([p.ln_f - pull])
        res = max(table.sigma_lnf, 2e-4)
        arm = index.cheapest(b, target - res, target + res)
        if arm[0] < 0:
            arm = index.nearest(b, target)
        if arm[0] < 0:
            return None
        new_err = abs(table.ln_f0[arm[0]] - target[0])
        if new_err >= abs(ln_f0 - target[0]) or (abs(ln_f0 - target[0]) <= res and new_err <= res):
            return None   # no closer, or both within resolution: keep the one the search priced
        return dict(zip(roles, (float(v) for v in table.values[arm[0]])))

    def restage(self, c: Candidate, load_peak_v: float) -> tuple[float, float] | None:
        """The stage pair whose ratio brings the measured load amplitude (V peak) to the
        target, chosen as the search chose it (StageTable.choose: for a cost-first ranking a
        pair reusing Rg's value where one is as good); None when that is the present pair."""
        table = self.stage_tables.get((c.stage, c.signature[6]))
        if table is None or len(table) == 0 or load_peak_v <= 0:
            return None
        ra, rb = c.values["stage_ra"], c.values["stage_rb"]
        now = table.gains[np.flatnonzero((table.ra == ra) & (table.rb == rb))]
        if now.size == 0:
            return None
        # (amp_v is the target before any coupling capacitor: the measured load's over its loss)
        share = c.r_gnd if self.cheapest and c.r_gnd > 0 and c.signature[4] == c.signature[6] else None
        j = int(table.choose(np.array([math.log(now[0] * self.problem.amp_v * self.problem.load_gain / load_peak_v)]),
                             share)[0])
        if (table.ra[j], table.rb[j]) == (ra, rb):
            return None
        return float(table.ra[j]), float(table.rb[j])

    def _stage(self, kind, sf, amp, share=None):
        """The stage ratio (and resistors) per amplitude-side choice: 1 without a pair,
        else the family pair (_StageTable.pick) for the gain that centres the load
        amplitude over temperature (the geometric mean of the ends; the wanted gains in
        ascending order once per amplitude side, for every table it is matched with)."""
        if kind not in STAGE_RATIO:
            return np.asarray(1.0), np.asarray(0.0), np.asarray(0.0)
        table = self.stage_tables.get((kind, sf.id))
        if table is None or len(table) == 0:
            return None
        if (id(amp), "want") not in self._stages:
            with np.errstate(invalid="ignore", divide="ignore"):
                want = np.log(self.problem.amp_v / np.sqrt(amp["vo"][0] * amp["vo"][2]))
            self._stages[id(amp), "want"] = (want, np.argsort(np.where(np.isfinite(want), want, 0.0), kind="stable"))
        want, order = self._stages[id(amp), "want"]
        pick = table.choose(want, share, order)
        return table.gains[pick], table.ra[pick], table.rb[pick]


def _op_index(groups, g_row: np.ndarray) -> np.ndarray:
    """Each row's op-amp as a small integer (g_row: each row's group)."""
    return np.unique(np.array([id(g[0]) for g in groups]), return_inverse=True)[1].reshape(-1)[g_row]


# per-row op-amp figures for the vectorised scoring
_OP_FIELDS = {
    "pull": lambda o: o.pull, "loss": lambda o: o.loss, "swing": lambda o: o.swing_v,
    "current": lambda o: o.opamp.output_current_a, "gbw_spread": lambda o: o.opamp.gbw_spread_frac,
    "iq": lambda o: o.opamp.quiescent_current_a, "channels": lambda o: o.opamp.channels,
}
