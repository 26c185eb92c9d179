"""The JFET control's amplitude bound: before the search hook spends seconds per design,
the detector diode's part-to-part spread alone caps the share of builds whose amplitude
can hold the spec's tolerance (partpick/circuits/jfet_search.py amplitude_share_bound);
a spec asking more yield than that cap gets no JFET design, and none is made."""

from __future__ import annotations

import dataclasses

import pytest

from partpick.bom import load_bom
from partpick.circuits import CONTROLS
from partpick.circuits.jfet_search import STAGE_ALLOWANCE
from partpick.pipeline import _searcher, evaluate_bom
from partpick.search.designed import designed_batch
from partpick.search.problem import build_problem
from partpick.spec import Spec
from tests.conftest import ROOT

SPEC = ROOT / "specs" / "clean-tone-1k.yaml"     # 1 Vrms, detector dd-si-signal (20 mV spread, 3 sigma)
BOM = ROOT / "specs" / "boms" / "clean-tone-1k-jfet.yaml"


def _with_tolerance(spec: Spec, tol: float, y_min: float | None = None) -> Spec:
    s = dataclasses.replace(spec, amplitude=dataclasses.replace(spec.amplitude, tolerance_frac=tol))
    return s if y_min is None else dataclasses.replace(s, yield_min_frac=y_min)


def test_the_bound_by_hand(demo_catalog):
    """0.1 % of 1 Vrms: h = 1.05 x 0.001 x 1.41421 V = 1.48492 mV; sigma = 20 mV / 3 =
    6.66667 mV; h / (sigma sqrt 2) = 0.157500; erf by its series (Abramowitz and Stegun
    7.1.5, three terms): 1.128379 x (0.1575 - 0.0013023 + 0.0000097) = 0.176262."""
    assert STAGE_ALLOWANCE == 1.05
    spec = _with_tolerance(Spec.from_yaml(SPEC), 0.001)
    bound = CONTROLS["jfet-agc"].amplitude_share_bound(spec, demo_catalog)
    assert bound == pytest.approx(0.176262, rel=1e-5)
    # the spec as written (2 %): the spread takes nothing worth counting
    assert CONTROLS["jfet-agc"].amplitude_share_bound(Spec.from_yaml(SPEC), demo_catalog) > 0.9999


@pytest.mark.parametrize("tol", [0.001, 0.002, 0.003, 0.005])
def test_no_build_beats_the_bound(demo_catalog, tol):
    """The demo JFET design verified with its Monte Carlo (4000 builds, so 3 sigma of the
    share is at most 0.024) at tightened tolerances: its amplitude share never exceeds
    the bound by more than the Monte Carlo's noise."""
    spec = _with_tolerance(Spec.from_yaml(SPEC), tol)
    bound = CONTROLS["jfet-agc"].amplitude_share_bound(spec, demo_catalog)
    r = evaluate_bom(load_bom(BOM, demo_catalog), spec, demo_catalog, samples=4000, seed=1)
    assert r.mc.share["amplitude"] <= bound + 0.024, (r.mc.share["amplitude"], bound)


def test_a_yield_over_the_bound_makes_no_design(demo_catalog, monkeypatch):
    """0.1 % at a 50 % yield: over the bound (0.176), so the search asks the hook for
    nothing (a design costs seconds); at a 10 % yield the hook is asked."""
    from partpick.circuits import jfet_search

    asked = []

    def hook(*args, **kw):
        asked.append(1)
        return ()

    monkeypatch.setattr(jfet_search, "search_designs", hook)
    for y_min, calls in ((0.5, 0), (0.1, 1)):
        spec = _with_tolerance(Spec.from_yaml(SPEC), 0.001, y_min)
        problem = build_problem(spec, demo_catalog)
        searcher, fixed = _searcher(spec, demo_catalog, None, problem)
        asked.clear()
        assert designed_batch(searcher, CONTROLS["jfet-agc"], lambda c: 0.0) is None
        assert len(asked) == calls
