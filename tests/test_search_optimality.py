"""The solver's answer is the optimum: on reduced joint spaces small enough to enumerate
every complete BOM, partpick's best candidates equal the exhaustive optimum of the same
objective exactly, after exact float re-evaluation (both sides score each choice with
:func:`partpick.search.space.evaluate`), and the top-N lists are equal.
"""

from __future__ import annotations

import dataclasses

import pytest

from partpick.search.solver import solve
from partpick.search.space import build_space, enumerate_best, rank_weights
from partpick.spec import Spec
from tests.conftest import SPECS


def _reduced(space, arms_every, gains_keep, stages_keep, ops_keep):
    """A sub-space: every k-th arm set and the first gain networks, stages and op-amps,
    plus the items of the full space's best few choices (as the solver finds them; the
    comparison below is on the reduced space only), so the reduced space is sure to
    hold good BOMs and plenty of bad ones."""
    def keep(items, extra, count):
        out = list(items[:count])
        for x in extra:
            if x not in out:
                out.append(x)
        return tuple(out)

    best = solve(space, 6)
    return dataclasses.replace(
        space,
        nets=keep(space.nets[::arms_every], [p.net for p in best], 50),
        ctls=keep(space.ctls, [p.ctl for p in best], gains_keep),
        stages=keep(space.stages, [p.stage for p in best], stages_keep),
        ops=keep(space.ops, [p.op for p in best], ops_keep),
    )


CASES = [
    # (demo spec, rank_by override or None, arms every, gains, stages, ops)
    ("seismic-cal-20hz.yaml", None, 3, 8, 4, 2),
    ("seismic-cal-20hz.yaml", ("cost", "parts"), 2, 10, 3, 2),
    ("carrier-50khz.yaml", None, 4, 8, 6, 2),
    ("carrier-50khz.yaml", ("parts", "cost", "frequency_error"), 3, 6, 6, 3),
    ("lvdt-exciter.yaml", None, 4, 10, 5, 2),
    ("lvdt-exciter.yaml", ("amplitude_error", "cost"), 5, 12, 8, 2),
    ("test-tone-5v.yaml", None, 6, 10, 6, 2),
]


@pytest.fixture(scope="module")
def spaces(demo_catalog):
    cache = {}
    for name in {c[0] for c in CASES}:
        cache[name] = build_space(Spec.from_yaml(SPECS / name), demo_catalog)
    return cache


@pytest.mark.parametrize("name,rank_by,every,ng,ns,no", CASES,
                         ids=[f"{c[0].split('.')[0]}-{'-'.join(c[1] or ('spec',))}" for c in CASES])
def test_solver_top_n_equals_exhaustive(spaces, name, rank_by, every, ng, ns, no):
    space = _reduced(spaces[name], every, ng, ns, no)
    if rank_by:
        space = dataclasses.replace(space, weights=rank_weights(rank_by))
    n = 5
    exhaustive = enumerate_best(space, n)
    assert exhaustive, "the reduced space must hold feasible choices for the test to mean anything"
    ours = solve(space, n)
    assert [p.objective for p in ours] == [p.objective for p in exhaustive]
    # the same choices (where objectives tie, the order may differ)
    assert {p.key() for p in ours} == {p.key() for p in exhaustive}
    assert ours[0].key() == exhaustive[0].key() or ours[0].objective == exhaustive[0].objective


def test_spaces_are_large_enough_to_matter(spaces):
    """Each reduced space still holds thousands of complete BOMs."""
    for name, rank_by, every, ng, ns, no in CASES:
        s = _reduced(spaces[name], every, ng, ns, no)
        assert len(s.nets) * len(s.ctls) * len(s.stages) * len(s.ops) >= 1000
