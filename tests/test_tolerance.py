"""Tolerance, temperature and supply: the Monte Carlo and worst case against published
methods and facts of the trade."""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest

from partpick.bom import Bom, BomLine
from partpick.spec import Spec
from partpick.tolerance import model_for, monte_carlo, samples_needed, worst_case
from partpick.bom import DESIGNATORS
from partpick.verify import verify

SPEC = """\
name: tolerance-test
frequency: {{target: {f} Hz, tolerance: 2 %}}
amplitude: {{target: {a} Vpk, tolerance: 30 %}}
supply: {{kind: dual, min: 12 V, max: 12 V}}
load: {{resistance: 10 kohm}}
temperature: {{min: {tmin} degC, max: {tmax} degC, nominal: 25 degC}}
distortion: {{max_thd: 20 %}}
yield: {{min: 90 %}}
"""


def _bom(r_fam, c_fam, rf, rd=0.0, r=10e3, c=10e-9, lim="d-si-signal", op="oa-jfet-4m"):
    d = DESIGNATORS
    lines = [BomLine(d["rs"], "rs", r_fam, r), BomLine(d["cs"], "cs", c_fam, c), BomLine(d["rp"], "rp", r_fam, r),
             BomLine(d["cp"], "cp", c_fam, c), BomLine(d["rg"], "rg", r_fam, 10e3), BomLine(d["rf"], "rf", r_fam, rf)]
    if rd:
        lines.append(BomLine(d["rd"], "rd", r_fam, rd))
    lines += [BomLine(d["limiter"], "limiter", lim, 0.0), BomLine(d["opamp"], "opamp", op, 0.0)]
    return Bom(tuple(lines), "dual", "none")


def _model(cat, bom, spec):
    c = bom.to_circuit(cat)
    from partpick.bom import part_data

    tol, tc, rating = part_data(bom, cat)
    v = verify(c, spec, tolerances=tol, tempcos=tc, ratings=rating)
    return model_for(c, bom, cat, spec, v), v


def _spec(f=1591.55, a=0.6, tmin=25, tmax=25):
    return Spec.from_text(SPEC.format(f=f, a=a, tmin=tmin, tmax=tmax), "tolerance-test.yaml")


@pytest.mark.parametrize("r_fam,c_fam", [("mf-1", "c0g-1"), ("tk-1", "c0g-5")])
def test_f0_spread_matches_first_order_propagation(demo_catalog, r_fam, c_fam):
    # JCGM 100:2008 (GUM), law of propagation of uncertainty for f0 = 1/(2 pi sqrt(Rs Rp Cs Cp)):
    # sigma_f / f = 0.5 sqrt(u_Rs^2 + u_Rp^2 + u_Cs^2 + u_Cp^2), u = tolerance/sqrt(3) for a
    # uniform distribution, tolerance/3 for a normal one with the tolerance at 3 sigma.
    spec = _spec()
    model, _ = _model(demo_catalog, _bom(r_fam, c_fam, 22e3), spec)
    # the op-amp's and limiter's spread set aside: the check is of the passive network alone
    model = dataclasses.replace(model, gbw_spread=0.0, s_pull=0.0, vf_spread_rel=0.0)
    mc = monte_carlo(model, spec, samples=200_000, seed=7)
    u = []
    for fam_id in (r_fam, r_fam, c_fam, c_fam):
        kind = "resistors" if fam_id == r_fam else "capacitors"
        fam = demo_catalog.find(kind, fam_id)
        u.append(fam.tolerance_frac / (3 if fam.distribution == "normal" else math.sqrt(3)))
    gum = 0.5 * math.sqrt(sum(x * x for x in u))
    st = mc.stats["frequency_hz"]
    # the normal draws are truncated at 3 sigma, which trims sigma by 1.4 %
    assert st["std"] / st["mean"] == pytest.approx(gum, rel=0.03)


def test_sample_size_for_two_digit_yield():
    # JCGM 101:2008 practice: enough builds for a stable two-digit yield; binomial
    # standard error, 95 % interval +/- 0.5 %: N = (1.96/0.005)^2 p (1 - p).
    assert samples_needed(0.99) == math.ceil((1.96 / 0.005) ** 2 * 0.99 * 0.01)
    assert samples_needed(0.5) == math.ceil((1.96 / 0.005) ** 2 * 0.25)


def test_reported_sample_size_gives_stable_two_digits(demo_catalog):
    spec = _spec()
    model, _ = _model(demo_catalog, _bom("tk-5", "x7r-10", 22e3), spec)
    first = monte_carlo(model, spec, samples=5000, seed=1)
    n = max(first.needed, 5000)
    a = monte_carlo(model, spec, samples=n, seed=2).yield_frac
    b = monte_carlo(model, spec, samples=n, seed=3).yield_frac
    assert abs(a - b) < 0.015  # two seeds agree to the second digit (2 x the 95 % half-width)


def test_seeded_runs_repeat(demo_catalog):
    spec = _spec()
    model, _ = _model(demo_catalog, _bom("mf-1", "c0g-1", 22e3), spec)
    a, b = monte_carlo(model, spec, seed=5), monte_carlo(model, spec, seed=5)
    assert a.yield_frac == b.yield_frac and np.array_equal(a.freq_hz, b.freq_hz)


def test_replayed_draws_are_the_generators(demo_catalog):
    # the builds' random draws are kept per process and replayed (tolerance._raw_draws):
    # what a replay gives, and the state it leaves the generator in, must be what the
    # seeded generator itself draws (numpy.random.Generator: one seed, one stream)
    from partpick import tolerance

    spec = _spec(tmin=-20, tmax=70)
    banded, _ = _model(demo_catalog, _bom("tk-5", "x7r-10", 22e3), spec)     # a class-2 band: one draw more
    plain, _ = _model(demo_catalog, _bom("mf-1", "c0g-1", 22e3), spec)
    tolerance._RAW.clear()
    fresh = []
    for model in (banded, plain):
        rng = np.random.default_rng(11)
        fresh.append((tolerance.draw_builds(model, spec, 3000, rng), rng.random()))
    assert len(tolerance._RAW) == 2
    for model, (b, after) in zip((banded, plain), fresh):
        rng = np.random.default_rng(11)
        again = tolerance.draw_builds(model, spec, 3000, rng)
        assert rng.random() == after
        assert all(np.array_equal(again[k], b[k]) for k in ("t", "vs", "gbw"))
        assert all(np.array_equal(again["v"][r], b["v"][r]) for r in b["v"])
    # the two models' parts are drawn from one stream in turn: a band's draw moves the rest
    assert not np.array_equal(fresh[0][0]["gbw"], fresh[1][0]["gbw"])
    assert len(tolerance._RAW) == 2


def test_gain_2_2_is_too_close_to_threshold_and_3_3_with_diodes_is_safe(demo_catalog):
    # Bench fact of the trade (common practice, no published source): Rf/Rg = 2.2 on
    # equal arms (6.7 % above the threshold) is too close for 2-5 % parts; Rf/Rg = 3.3
    # with a diode limiter is the safe choice. 5 % resistors (tk-5), 10 % capacitors
    # (x7r-10), 25 degC.
    spec = _spec()
    near, _ = _model(demo_catalog, _bom("tk-5", "x7r-10", 22e3), spec)
    safe, _ = _model(demo_catalog, _bom("tk-5", "x7r-10", 33e3), spec)
    mc_near = monte_carlo(near, spec, samples=20_000, seed=1)
    mc_safe = monte_carlo(safe, spec, samples=20_000, seed=1)
    assert mc_near.share["startup"] < 0.97          # clearly below 100 %
    assert mc_safe.share["startup"] > 0.999         # near 100 %
    # ... and the same tolerances move THD and frequency: the safe gain pays in distortion
    assert mc_safe.stats["thd"]["mean"] > 2 * mc_near.stats["thd"]["mean"]
    assert mc_safe.stats["frequency_hz"]["mean"] < mc_near.stats["frequency_hz"]["mean"]  # harder limiting pulls down
    assert mc_near.stats["thd"]["std"] > 0 and mc_near.stats["frequency_hz"]["std"] > 0


def test_c0g_holds_frequency_over_temperature_far_better_than_class_2(demo_catalog):
    # Catalog tempcos: C0G 0 +/- 30 ppm/K with 25 ppm/K thin film, against X7R's +/-15 %
    # band with 200 ppm/K thick film, over -40..85 degC at nominal values (tolerances set
    # aside, so the spread is the temperature's alone).
    spec = _spec(tmin=-40, tmax=85)
    stable, _ = _model(demo_catalog, _bom("tn-0.1", "c0g-1", 22e3), spec)
    drifty, _ = _model(demo_catalog, _bom("tk-5", "x7r-10", 22e3), spec)
    # (the limiter's own change of harmonic pull with temperature set aside too)
    no_tol = lambda m: dataclasses.replace(m, tol={k: 0.0 for k in m.tol}, gbw_spread=0.0, vf_spread_rel=0.0,  # noqa: E731
                                           dpull_t=tuple(0.0 for _ in m.dpull_t))
    a = monte_carlo(no_tol(stable), spec, samples=20_000, seed=1).stats["frequency_hz"]
    b = monte_carlo(no_tol(drifty), spec, samples=20_000, seed=1).stats["frequency_hz"]
    span_a = (a["q999"] - a["q001"]) / a["mean"]
    span_b = (b["q999"] - b["q001"]) / b["mean"]
    # magnitude from the catalog: f0 ~ (Rs Rp Cs Cp)^-1/2, each part within its bound over
    # 65 K from 25 degC: at most 0.5 * (2 * 25 + 2 * 30) ppm/K * 65 K each way
    bound = 0.5 * (2 * 25e-6 + 2 * 30e-6) * 65 * 2
    assert span_a <= bound * 1.01
    assert span_a > 0.3 * bound  # the tempcos do act
    assert span_b > 10 * span_a
    assert span_b > 0.05  # X7R: several percent


def test_worst_case_brackets_the_monte_carlo(demo_catalog):
    spec = _spec(tmin=0, tmax=50)
    model, _ = _model(demo_catalog, _bom("mf-1", "c0g-1", 22e3, rd=10e3), spec)
    wc = worst_case(model, spec)
    mc = monte_carlo(model, spec, samples=20_000, seed=1)
    f = mc.stats["frequency_hz"]
    assert wc["frequency_hz"][0] <= f["q001"] and f["q999"] <= wc["frequency_hz"][1]
    assert wc["margin"] < mc.stats["margin"]["q001"]
