"""A supply corner's small-signal loop is the nominal point's where neither plug-in reads
the supply (``reads_supply``): verification then shares it (circuits.small_signal). The
declarations are checked here by building the loop at three supplies and comparing every
coefficient, and the shared analysis against one made afresh."""

from __future__ import annotations

import math

import numpy as np
import pytest

from partpick.circuits import CONTROLS, TOPOLOGIES, Conditions, build_loop, linear, small_signal
from partpick.circuits.quadrature import circuit as quadrature_circuit
from partpick.circuits.wien import circuit as wien_circuit

P = 1j * np.geomspace(0.05, 20.0, 41)   # scaled frequencies the coefficients are compared at


def _circuits(cat):
    """(name, circuit, a condition less its supply) over both topologies, both supply
    kinds, every output stage and a capacitive load."""
    op, lim = cat.find("opamps", "oa-audio-10m"), cat.find("limiters", "d-si-signal")
    arms = (10e3, 15e-9, 10e3, 15e-9, 10e3)
    out = []
    for stage, ra, rb in (("none", 0, 0), ("follower", 0, 0), ("gain", 10e3, 4.7e3), ("attenuator", 1e3, 470.0),
                          ("buffered-attenuator", 10e3, 2.2e3)):
        out.append((f"wien dual {stage}", wien_circuit(*arms, 20.5e3, op, lim, rd_ohm=4.7e3, stage=stage,
                                                       stage_ra_ohm=ra, stage_rb_ohm=rb), (600.0, 1e-9)))
    out.append(("wien single", wien_circuit(*arms, 20.5e3, op, lim, rd_ohm=4.7e3, supply_kind="single",
                                            bias_r_ohm=47e3, bias_c_f=10e-6, coupling_c_f=22e-6), (2e3, 0.0)))
    out.append(("wien no control", wien_circuit(*arms, 20.2e3, op), (math.inf, 0.0)))
    out.append(("quadrature", quadrature_circuit(9.1e3, 4.7e-9, 9.1e3, 4.7e-9, 10e3, 10.5e3, op, lim, rd_ohm=20e3),
                (2e3, 1e-9)))
    return out


def _loop_figures(loop) -> list[np.ndarray]:
    figs = [r(P) for r in (loop.alpha, loop.gamma, loop.d0, loop.d1)]
    figs += [x(P) for _, cv, ci in loop.probes for x in (cv, ci)]
    return figs + ([loop.inject(P)] if loop.inject is not None else [])


def test_every_plug_in_says_whether_it_reads_the_supply():
    # (an undeclared plug-in would count as reading it: declared, so the rule is seen)
    for plug in (*TOPOLOGIES.values(), *CONTROLS.values()):
        assert isinstance(plug.reads_supply, bool), plug.name
    assert CONTROLS["jfet-agc"].reads_supply   # its gate bias follows the supply


@pytest.mark.parametrize("temp_k", [253.15, 298.15, 358.15])
def test_a_loop_that_reads_no_supply_is_the_same_on_every_supply(demo_catalog, temp_k):
    for name, c, (r_load, c_load) in _circuits(demo_catalog):
        assert not (c.topology.reads_supply or c.control.reads_supply), name
        loops = [build_loop(c, Conditions(v, temp_k, r_load, c_load, 2e3, 0.0)) for v in (4.5, 12.0, 16.5)]
        first = _loop_figures(loops[0])
        for other in loops[1:]:
            assert [a.name for a in other.amps] == [a.name for a in loops[0].amps]
            for a, b in zip(first, _loop_figures(other), strict=True):
                assert np.array_equal(a, b), name


def test_the_shared_analysis_is_the_one_made_afresh(demo_catalog):
    # small_signal at a supply corner after the nominal point: the nominal's objects,
    # and equal to building and analysing the corner itself
    for name, c, (r_load, c_load) in _circuits(demo_catalog):
        nominal = Conditions(12.0, 298.15, r_load, c_load, 2e3, 0.0)
        corner = Conditions(10.8, 298.15, r_load, c_load, 2e3, 0.0)
        shared = small_signal(c, nominal)
        got = small_signal(c, corner)
        assert got[0] is shared[0] and got[1] is shared[1], name
        fresh = linear(c, corner, build_loop(c, corner))
        assert repr(fresh) == repr(got[1]), name   # (repr: a NaN field equals itself)
