"""A candidate placed by the Monte Carlo model of its yield: verification's model run on the
search's own figures (the pool orders the candidates it verifies by it)."""

from __future__ import annotations

import math
from dataclasses import replace

from partpick.search.candidates import Candidate
from partpick.search.problem import Problem

__all__ = ["simulated"]


def simulated(problem: Problem, f_t: float, c: Candidate, samples: int = 4000) -> Candidate:
    """The candidate with its yield estimated by the Monte Carlo model of
    verification (:func:`partpick.tolerance.monte_carlo`) run on the search's own
    figures: the same distributions and checks, only the physics estimated."""
    from partpick.tolerance import Model, monte_carlo, variation

    if c.simulated:
        return c      # placed with its own control's figures (search/designed.py)

    p = problem
    topo = p.topology
    op = next(o for o in p.ops if o.id == c.parts["opamp"])
    limiter = next(lim for lim in p.limiters if lim.id == c.parts["limiter"])
    values, tol, normal, tempco, band = variation(c.values, c.families, p.catalog)
    m_ideal = float(topo.gain(values) / topo.required_gain(values)) - 1
    m_lin = math.expm1(math.log1p(m_ideal) - op.loss)
    temps = p.temps_k
    dln = tuple(math.log(max(v, 1e-12) / max(c.load_v[1], 1e-12)) for v in c.load_v)
    ln_load = math.log(max(c.load_v[1] * p.load_gain, 1e-12))   # (at the load: the search's is before coupling)
    second = None
    if topo.outputs:
        # a second output: its amplitude and match from the topology's ideal ratio and what the
        # op-amp does to the outputs on the topology's reference (their ratio, the phase error)
        factor, phase = topo.reference_outputs(op.opamp, f_t)
        ratio = float(topo.output_ratio(values)) * factor
        second = (ratio, ratio, phase, c.thd, c.s_thd, ratio / factor)
    model = Model(topo, values, tol, normal, tempco, band, m_lin, m_ideal, op.loss, c.pull, op.pull, 0.0, ln_load,
                  c.s_amp, c.thd, c.s_thd, temps, dln, (0.0, 0.0, 0.0), c.osc_v / max(c.load_v[1] * p.load_gain, 1e-12),
                  (op.opamp.headroom_high_v, op.opamp.headroom_low_v), op.opamp.gbw_spread_frac,
                  p.control.amplitude_spread_of(limiter, temps[1]), second=second)
    y = monte_carlo(model, p.spec, samples=samples, seed=1, stats=False).yield_frac
    return replace(c, yield_est=y, simulated=True)
