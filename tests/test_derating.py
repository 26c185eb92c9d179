"""Derating rules by name: package thermal limits from the catalog, shares set in the spec
or in a rules file it names, and every rule shown by `design --explain`.

Reference for the package limit: the junction temperature of a part dissipating P in
still air is Tj = Ta + theta_ja P (the definition of theta_ja in JEDEC JESD51-1; any
thermal-design text), so the most it may dissipate is (Tj,max - Ta) / theta_ja.
"""

from __future__ import annotations

import dataclasses

import pytest
from click.testing import CliRunner

from partpick.catalog import load_catalog
from partpick.cli import main
from partpick.pipeline import evaluate_bom
from partpick.bom import load_bom
from partpick.spec import Spec
from partpick.verify import package_limit
from tests.conftest import CATALOGS, SPECS, VALID_SPEC


def _spec(text: str = VALID_SPEC, tmp_path=None) -> Spec:
    if tmp_path is None:
        return Spec.from_text(text)
    path = tmp_path / "spec.yaml"
    path.write_text(text, encoding="utf-8")
    return Spec.from_yaml(path)


def test_package_limit_is_the_junction_rule(demo_catalog):
    spec = _spec()  # ambient up to 60 degC
    power = demo_catalog.find("opamps", "oa-power-4m")
    small = demo_catalog.find("opamps", "oa-jfet-4m")
    # demo packages: SOIC-8-EP 55 K/W, SOIC-8 150 K/W, both 150 degC
    assert power.package == "SOIC-8-EP" and power.thermal.theta_ja_k_per_w == pytest.approx(55)
    assert package_limit(power, spec)[0] == pytest.approx((150 - 60) / 55)
    assert package_limit(small, spec)[0] == pytest.approx((150 - 60) / 150)
    # the power op-amp is not held to the small-package limit
    assert package_limit(power, spec)[0] > 2.5 * package_limit(small, spec)[0]
    # at 70 degC ambient a SOIC-8 takes about the 0.5 W of common practice
    hot = dataclasses.replace(spec, temperature=dataclasses.replace(spec.temperature, max_k=273.15 + 70))
    assert package_limit(small, hot)[0] == pytest.approx(80 / 150)


def test_share_and_unknown_package_rules(demo_catalog, tmp_path):
    spec = _spec(VALID_SPEC + "derating: {package_power: 50 %, unknown_package: 0.3 W}\n")
    power = demo_catalog.find("opamps", "oa-power-4m")
    assert package_limit(power, spec)[0] == pytest.approx(0.5 * 90 / 55)
    bare = dataclasses.replace(power, thermal=None)
    limit, how = package_limit(bare, spec)
    assert limit == pytest.approx(0.3) and "no thermal data" in how
    assert spec.derating.origin_of("package_power") == "spec"
    assert spec.derating.origin_of("resistor_power") == "default"


def test_rules_file_named_by_the_spec(tmp_path):
    rules = tmp_path / "house.yaml"
    rules.write_text("description: our bench rules\nderating: {resistor_power: 25 %, thd_share: 70 %}\n",
                     encoding="utf-8")
    spec = _spec(VALID_SPEC + "derating: house.yaml\n", tmp_path)
    assert spec.derating.resistor_power == pytest.approx(0.25)
    assert spec.derating.thd_share == pytest.approx(0.7)
    assert spec.derating.output_current == pytest.approx(0.6)  # not set: the default
    assert spec.derating.origin_of("resistor_power") == str(rules.resolve())


@pytest.mark.parametrize("tail,line,field,words", [
    ("derating: {resistor_power: 150 %}\n", 17, "derating.resistor_power", ["<= 100 %"]),
    ("derating: {resistor_pwr: 50 %}\n", 17, "derating.resistor_pwr", ["did you mean 'resistor_power'"]),
    ("derating: {unknown_package: 0.5 V}\n", 17, "derating.unknown_package", ["power"]),
    ("derating: {thd_share: 0 %}\n", 17, "derating.thd_share", ["must be > 0"]),
])
def test_bad_rules_exit_2_naming_the_field(tmp_path, tail, line, field, words):
    path = tmp_path / "spec.yaml"
    path.write_text(VALID_SPEC + tail, encoding="utf-8")
    result = CliRunner().invoke(main, ["spec", "check", str(path), "--catalog", str(CATALOGS)])
    assert result.exit_code == 2, result.output
    assert result.stderr.startswith(f"error: {path}:{line}: '{field}' "), result.stderr
    for w in words:
        assert w in result.stderr


def test_missing_rules_file_exits_2(tmp_path):
    path = tmp_path / "spec.yaml"
    path.write_text(VALID_SPEC + "derating: nowhere.yaml\n", encoding="utf-8")
    result = CliRunner().invoke(main, ["spec", "check", str(path), "--catalog", str(CATALOGS)])
    assert result.exit_code == 2 and "nowhere.yaml" in result.stderr, result.output


def test_verify_uses_the_rules(demo_catalog, tmp_path):
    """The shipped transducer draft on the power op-amp: its package check uses the
    exposed-pad package's limit, and a tighter share moves the limit with it."""
    base = (SPECS / "lvdt-exciter.yaml").read_text(encoding="utf-8")
    bom = load_bom(SPECS / "boms" / "lvdt-exciter-draft.yaml", demo_catalog)
    bom = dataclasses.replace(bom, lines=tuple(dataclasses.replace(ln, family="oa-power-4m") if ln.role == "opamp"
                                               else ln for ln in bom.lines))
    limits = []
    for tail in ("", "derating: {package_power: 25 %}\n"):
        spec = _spec(base + tail, tmp_path)
        r = evaluate_bom(bom, spec, demo_catalog, samples=200)
        check = next(c for c in r.verdict.checks if c.name == "op-amp package dissipation")
        assert "SOIC-8-EP" in check.note
        limits.append(check.high)
    assert limits[0] == pytest.approx((150 - 50) / 55)
    assert limits[1] == pytest.approx(0.25 * limits[0])


def test_explain_shows_every_rule():
    result = CliRunner().invoke(main, ["design", str(SPECS / "lvdt-exciter.yaml"), "--catalog", str(CATALOGS),
                                       "-n", "1", "--samples", "200", "--explain", "-q"])
    assert result.exit_code == 0, result.output
    for key in ("resistor_power = 50 %", "package_power = 100 %", "unknown_package = 500 mW", "thd_share = 100 %",
                "output_current = 60 %", "bias_drop = 150 mV", "package limit of oa-"):
        assert key in result.output, key


def test_catalog_packages_section(tmp_path):
    (tmp_path / "a.yaml").write_text(
        "packages:\n  - {id: DIP-8, theta_ja: 100 K/W, max_junction: 125 degC}\n"
        "opamps:\n  - {id: op-x, gbw: 1 MHz, dc_gain: 100 dB, slew_rate: 0.5 V/us, supply: {min: 3 V, max: 32 V},\n"
        "     headroom: {high: 1.5 V, low: 0.1 V}, output_current: 20 mA, output_resistance: 100 ohm,\n"
        "     input_common_mode: {low: 0 V, high: 1.5 V}, quiescent_current: 0.5 mA, input_bias_current: 20 nA,\n"
        "     package: DIP-8, maker: Example Corp, maker_part: EX-1, price: {unit: 0.1}}\n", encoding="utf-8")
    cat = load_catalog(tmp_path)
    op = cat.find("opamps", "op-x")
    assert op.thermal == cat.package("DIP-8")
    assert op.thermal.theta_ja_k_per_w == 100 and op.thermal.tj_max_k == pytest.approx(398.15)
    assert cat.package("DIP-8").limit_w(273.15 + 25) == pytest.approx(1.0)
    assert (op.maker, op.maker_part) == ("Example Corp", "EX-1")


def test_the_search_aims_with_the_spec_shares(demo_catalog):
    """The search plans with the spec's derating rules: the nominal THD it aims at
    (thd_share of max_thd) and the share of the op-amp's output current (output_current);
    a design it proposes keeps to both."""
    from partpick.pipeline import design
    from partpick.search.problem import build_problem

    base = _spec((SPECS / "carrier-50khz.yaml").read_text(encoding="utf-8"))
    tight = _spec((SPECS / "carrier-50khz.yaml").read_text(encoding="utf-8")
                  + "derating: {thd_share: 50 %, output_current: 30 %}\n")
    a, b = build_problem(base, demo_catalog), build_problem(tight, demo_catalog)
    assert a.thd_aim == pytest.approx(base.max_thd_frac)   # (by default the limit itself)
    assert b.thd_aim == pytest.approx(0.5 * base.max_thd_frac)
    assert (a.current_share, b.current_share) == (pytest.approx(0.6), pytest.approx(0.3))
    d = design(tight, demo_catalog, results=3, samples=2000)
    assert d.passing
    for r in d.passing:
        # what the search planned with (its estimate of the nominal THD); verification
        # then holds the design to the spec's own limit
        assert r.pick.thd <= 0.5 * base.max_thd_frac + 1e-12
        assert r.thd <= base.max_thd_frac


@pytest.mark.parametrize("phase_deg", [0.0, 30.0, 60.0, 89.0, 90.0])
def test_class_b_loss_with_a_reactive_load(phase_deg):
    """The output stage's loss against its definition, integrated over a period: a
    class-B stage draws the positive half of the load current from the upper rail and
    the negative half from the lower one (Sedra and Smith, Microelectronic Circuits,
    class B output stage), so it dissipates V_rail mean|i| - mean(v i); a load current
    phi out of phase with the voltage (a capacitive load) takes less of that power."""
    import math

    import numpy as np

    from partpick.physics.opamp import class_b_loss

    v_rail, v_pk, i_pk = 12.0, 7.0, 0.05
    phi = math.radians(phase_deg)
    t = 2 * np.pi * (np.arange(100_000) + 0.5) / 100_000
    v, i = v_pk * np.sin(t), i_pk * np.sin(t + phi)
    loss = v_rail * np.mean(np.abs(i)) - np.mean(v * i)
    assert float(class_b_loss(v_rail, v_pk, i_pk, math.cos(phi))) == pytest.approx(loss, rel=1e-6)


def test_check_judges_the_output_current_share(demo_catalog, tmp_path):
    """The output current a design may draw is the rule's share of the op-amp's rating,
    in check as in the search (which plans for it): the transducer draft's buffer draws
    24.66 mA of the op-amp's 35 mA, over the default 60 % (21 mA), within 80 %."""
    base = (SPECS / "lvdt-exciter.yaml").read_text(encoding="utf-8")
    bom = load_bom(SPECS / "boms" / "lvdt-exciter-draft.yaml", demo_catalog)
    rated = demo_catalog.find("opamps", next(ln.family for ln in bom.lines if ln.role == "opamp")).output_current_a
    got = {}
    for tail, share in (("", 0.6), ("derating: {output_current: 80 %}\n", 0.8)):
        r = evaluate_bom(bom, _spec(base + tail, tmp_path), demo_catalog, samples=200)
        for name in ("op-amp output current", "output stage current"):
            check = next(c for c in r.verdict.checks if c.name == name)
            assert check.high == pytest.approx(share * rated)
            assert f"{share:.0%} of" in check.note
        got[share] = next(c for c in r.verdict.checks if c.name == "output stage current")
    assert got[0.6].value == pytest.approx(got[0.8].value)          # the same current, judged against two limits
    assert not got[0.6].passed and got[0.8].passed


def test_check_judges_the_bias_drop(demo_catalog, tmp_path):
    """The bias current's DC drop across the largest frequency-setting resistor is Ohm's
    law, I_bias x R (the catalog's input bias current times the BOM's larger arm
    resistor), judged against the rule bias_drop: the transducer draft's 150 nA through
    3.09 kohm is 463.5 uV, within the default 150 mV, over a rule of 0.2 mV."""
    base = (SPECS / "lvdt-exciter.yaml").read_text(encoding="utf-8")
    bom = load_bom(SPECS / "boms" / "lvdt-exciter-draft.yaml", demo_catalog)
    op = demo_catalog.find("opamps", next(ln.family for ln in bom.lines if ln.role == "opamp"))
    arm_r = max(ln.value for ln in bom.lines if ln.role in ("rs", "rp"))
    got = {}
    for tail, drop in (("", 0.15), ("derating: {bias_drop: 0.2 mV}\n", 2e-4)):
        r = evaluate_bom(bom, _spec(base + tail, tmp_path), demo_catalog, samples=200)
        got[drop] = next(c for c in r.verdict.checks if c.name == "input bias drop")
        assert got[drop].value == pytest.approx(op.input_bias_a * arm_r, rel=1e-12)
        assert got[drop].high == pytest.approx(drop)
    assert got[0.15].value == pytest.approx(463.5e-6)
    assert got[0.15].passed and not got[2e-4].passed


def test_the_search_keeps_the_arms_within_the_bias_drop(demo_catalog, tmp_path):
    """Every design the search offers passes the bias-drop row check judges, at the
    rule a transducer winding would ask (5 mV: arms up to 50 kohm on the 100 nA parts the
    spec's top designs use) and at one tight enough to move them further (0.2 mV: 2 kohm)."""
    from partpick.pipeline import design

    base = (SPECS / "lvdt-exciter.yaml").read_text(encoding="utf-8")
    for tail, drop in (("derating: {bias_drop: 5 mV}\n", 5e-3), ("derating: {bias_drop: 0.2 mV}\n", 2e-4)):
        d = design(_spec(base + tail, tmp_path), demo_catalog, results=3, samples=2000)
        assert d.ranked
        for r in d.ranked:
            row = next(c for c in r.verdict.checks if c.name == "input bias drop")
            assert row.passed and row.value <= drop
            arms = [r.circuit.value(k) for k in ("rs", "rp")]
            assert max(arms) * r.circuit.opamp.input_bias_a <= drop
        biggest = max(max(r.circuit.value(k) for k in ("rs", "rp")) for r in d.ranked)
        assert biggest <= 50e3 if drop == 5e-3 else biggest <= 2e3
