"""A refusal's advice is right: relaxing the requirement it names to the value it gives
makes the spec design (issue 11's acceptance check, which benchmarks/bench_coverage.py
--relax runs over its generated requirements with benchmarks/refusal_advice.py).

The spec below is requirement 156 of the benchmark's wide set (its own generator, not
hand-tuned). On 2026-12-03 its refusal advised "relax amplitude.tolerance to +/-6.7 %",
and the spec relaxed to 6.7 % was refused again (frequency.tolerance binding): the
refusal had judged its bisection with 4,000 Monte Carlo builds, the design verifies
with 20,000, and a yield just at its 99.5 % limit fell on either side. The refusal now
judges what it states with the design's own builds and seed.

The second spec is requirement 83 of the same set: no requirement loosened alone lets
a design through (amplitude tolerance, THD and yield bind together). Its refusal said
only "relax those requirements to" what the nearest design shows; it now names the
values, found by bisecting each in turn on that design and confirmed by a design run
(the design passes where the bisection ends, but the search need not propose it there),
and relaxing them all together designs.
"""

from __future__ import annotations

import math
import re

import numpy as np
import pytest
from click.testing import CliRunner

from partpick.cli import main
from tests.conftest import CATALOGS

SPEC = """\
name: cov-156-spread
description: requirement drawn over the coverage ranges
frequency: {target: 136 Hz, tolerance: 5 %}
amplitude: {target: 11 Vpp, tolerance: 2 %}
supply: {kind: dual, min: 16.2 V, max: 19.8 V}
load: {resistance: 33 ohm}
temperature: {min: 0 degC, max: 50 degC}
distortion: {max_thd: 10 %}
yield: {min: 99.5 %}
parts:
  capacitors: [c0g-1]
  opamps: [oa-power-4m]
  limiters: [z-pair-3v3]
"""


def _design(path):
    return CliRunner().invoke(main, ["design", str(path), "-n", "1", "--catalog", str(CATALOGS)])


def _refused(tmp_path, text: str):
    """The design command's result on the spec text, which must refuse it (exit 1)."""
    spec = tmp_path / "s.yaml"
    spec.write_text(text)
    refused = _design(spec)
    assert refused.exit_code == 1, refused.output
    return refused


def _advised(advice: str) -> dict:
    """{field: value in %} of a "relax jointly X to V and Y to W" advice."""
    return dict(re.findall(r"([a-z_]+\.[a-z_]+) to (?:\+/-)?([\d.]+) %", advice))


def _advice_reader():
    """benchmarks/refusal_advice.py, which bench_coverage --relax reads refusals with."""
    import importlib
    import sys

    from tests.conftest import ROOT

    sys.path.insert(0, str(ROOT / "benchmarks"))
    try:
        return importlib.import_module("refusal_advice")
    finally:
        sys.path.remove(str(ROOT / "benchmarks"))


def _refusal_of(tmp_path, text: str):
    """(the shipped catalog, the result of designing spec text), the refusal (exit 1) asserted."""
    from partpick.catalog import load_catalog

    refused = _refused(tmp_path, text)
    return load_catalog(CATALOGS), refused


def _every_advice_designs(tmp_path, text: str, output: str) -> list:
    """The advice the benchmark reads in refusal output (some asserted), each piece
    applied to spec text and designed (a design asserted)."""
    ra = _advice_reader()
    advice = ra.parse_refusal(output)
    assert advice, output
    for a in advice:
        _designs(tmp_path, ra.apply_advice(text, a))
    return advice


def _designs(tmp_path, text: str) -> None:
    relaxed = tmp_path / "r.yaml"
    relaxed.write_text(text)
    got = _design(relaxed)
    assert got.exit_code == 0, got.output


def test_relaxing_to_the_advised_value_designs(tmp_path):
    refused = _refused(tmp_path, SPEC)
    advice = re.search(r"relax amplitude\.tolerance to \+/-([\d.]+) %", refused.output)
    assert advice, refused.output
    tol = float(advice.group(1))
    assert 2 < tol < 50
    _designs(tmp_path, SPEC.replace("tolerance: 2 %}", f"tolerance: {tol:g} %}}"))


JOINT = """\
name: cov-083-spread
description: requirement drawn over the coverage ranges
frequency: {target: 262 Hz, tolerance: 3 %}
amplitude: {target: 420 mVrms, tolerance: 5 %}
supply: {kind: dual, min: 5.7 V, max: 6.3 V}
load: {resistance: 6.8 kohm}
temperature: {min: 0 degC, max: 50 degC}
distortion: {max_thd: 0.5 %}
yield: {min: 99.9 %}
parts:
  resistors: [tk-1]
  opamps: [oa-audio-10m, oa-power-4m]
  limiters: [z-pair-3v3]
"""


# requirement 144 of the same set: its nearest design (all four loosened) misses only the
# yield, 79.85 %; but with the yield relaxed to that, the search finds no design (the
# amplitude tolerance and the THD limit bind then). Its refusal named no value
# ("relax those requirements to it") until the other requirements were moved as well.
OTHERS = """\
name: cov-144-spread
description: requirement drawn over the coverage ranges
frequency: {target: 98 kHz, tolerance: 2 %}
amplitude: {target: 1.2 Vrms, tolerance: 10 %}
supply: {kind: dual, min: 17.1 V, max: 18.9 V}
load: {resistance: open}
temperature: {min: -40 degC, max: 85 degC}
distortion: {max_thd: 2 %}
yield: {min: 99.5 %}
parts:
  resistors: [tn-0.1]
"""


def test_joint_advice_moves_the_other_requirements_where_the_misses_are_not_enough(tmp_path):
    refused = _refused(tmp_path, OTHERS)
    assert "relax those requirements to it" not in refused.output
    line = re.search(r"no single requirement binds alone: .*relax jointly (.*)", refused.output)
    assert line, refused.output
    values = {k: float(v) for k, v in _advised(line.group(1)).items()}
    # the nearest design's own miss at what it reaches (79.85 % printed beside it), and
    # every other requirement loosened, none tightened, none past its loose value
    assert 50 <= values["yield.min"] <= 79.85
    assert set(values) > {"yield.min"}
    limits = {"frequency.tolerance": (2, 10), "amplitude.tolerance": (10, 50), "distortion.max_thd": (2, 10)}
    text = OTHERS.replace("min: 99.5 %", f"min: {values['yield.min']:g} %")
    for field, (now, loose) in limits.items():
        if field in values:
            assert now < values[field] <= loose, (field, values)
    text = text.replace("98 kHz, tolerance: 2 %", f"98 kHz, tolerance: {values.get('frequency.tolerance', 2):g} %")
    amp = values.get("amplitude.tolerance", 10)
    text = text.replace("1.2 Vrms, tolerance: 10 %", f"1.2 Vrms, tolerance: {amp:g} %")
    text = text.replace("max_thd: 2 %", f"max_thd: {values.get('distortion.max_thd', 2):g} %")
    _designs(tmp_path, text)


def test_relaxing_jointly_to_the_advised_values_designs(tmp_path):
    refused = _refused(tmp_path, JOINT)
    line = re.search(r"no single requirement binds alone: .*relax jointly (.*)", refused.output)
    assert line, refused.output
    values = _advised(line.group(1))
    assert values and set(values) <= {"amplitude.tolerance", "distortion.max_thd", "yield.min"}, values
    # each loosened, none tightened
    text = JOINT
    if "amplitude.tolerance" in values:
        assert 5 < float(values["amplitude.tolerance"]) <= 50
        text = text.replace("tolerance: 5 %}", f"tolerance: {values['amplitude.tolerance']} %}}")
    if "distortion.max_thd" in values:
        assert 0.5 < float(values["distortion.max_thd"]) <= 10
        text = text.replace("max_thd: 0.5 %", f"max_thd: {values['distortion.max_thd']} %")
    if "yield.min" in values:
        assert 50 <= float(values["yield.min"]) < 99.9
        text = text.replace("min: 99.9 %", f"min: {values['yield.min']} %")
    _designs(tmp_path, text)


def test_the_benchmark_applies_a_joint_advice_together():
    # benchmarks/refusal_advice.py, which bench_coverage --relax reads refusals with:
    # "relax jointly" is one piece of advice, applied whole (each part alone would not
    # design, by what the message says)
    import yaml

    ra = _advice_reader()
    msg = ("no single requirement binds alone: amplitude.tolerance, yield.min together; the search designs with "
           "them relaxed together (...): relax jointly amplitude.tolerance to +/-17 % and distortion.max_thd to 5.7 %\n"
           "nearest designs (--why-not N shows N):\n  1. tk-1 ...")
    (advice,) = ra.parse_refusal(msg)
    assert advice.field == "joint"
    data = yaml.safe_load(ra.apply_advice(JOINT, advice))
    assert data["amplitude"]["tolerance"] == "17 %" and data["distortion"]["max_thd"] == "5.7 %"
    assert data["yield"]["min"] == "99.9 %"


HOLD = """\
name: cov-019-spread
description: requirement drawn over the coverage ranges
frequency: {target: 22 kHz, tolerance: 3 %}
amplitude: {target: 810 mVrms, tolerance: 2 %}
supply: {kind: dual, min: 11.4 V, max: 12.6 V}
load: {resistance: 470 ohm}
temperature: {min: -40 degC, max: 85 degC}
distortion: {max_thd: 10 %}
yield: {min: 95 %}
parts:
  resistors: [mf-1]
  capacitors: [c0g-5]
"""


def test_a_frequency_tolerance_no_family_pair_holds_names_the_value_that_designs(tmp_path):
    # requirement 19 of the benchmark's wide set: 1 % resistors and 5 % capacitors cannot
    # hold +/-3 % in 95 % of builds even centred. The refusal used to stop there ("allow a
    # tighter family or plan a trim", no value); it now says what the pair holds at the
    # yield, works on from that tolerance, and names what binds next with it
    refused = _refused(tmp_path, HOLD)
    held = re.search(r"frequency\.tolerance binds: even centred on the target, .* hold \+/-3 % in about (\d+) % of "
                     r"builds and \+/-([\d.]+) % in 95 %", refused.output)
    assert held, refused.output
    share, t95 = float(held.group(1)) / 100, float(held.group(2)) / 100
    # the two figures describe one normal spread of ln f (scipy.stats.norm, a reference
    # library): sd = ln(1.03) / z((1 + share) / 2), and t95 = exp(sd z(0.975)) - 1; the
    # share is printed to 1 %, which moves the prediction by about 1 %
    from scipy.stats import norm

    sd = math.log1p(0.03) / norm.ppf((1 + share) / 2)
    assert math.expm1(sd * norm.ppf(0.975)) == pytest.approx(t95, rel=0.03)
    line = re.search(r"relax jointly (.*)", refused.output)
    assert line, refused.output
    values = _advised(line.group(1))
    assert float(values["frequency.tolerance"]) / 100 >= t95
    text = HOLD.replace("tolerance: 3 %}", f"tolerance: {values['frequency.tolerance']} %}}")
    if "amplitude.tolerance" in values:
        assert float(values["amplitude.tolerance"]) > 2
        text = text.replace("tolerance: 2 %}", f"tolerance: {values['amplitude.tolerance']} %}}")
    _designs(tmp_path, text)


def test_frequency_tolerance_inverts_the_share():
    # the tolerance a centred build holds in a share of builds: |N(0, sd)| <= ln(1 + t)
    # with probability share, so t = exp(sd z((1 + share) / 2)) - 1 (scipy.stats.norm)
    from scipy.stats import norm

    from partpick.search.estimate import frequency_share, frequency_tolerance

    for sigma, drift, share in ((0.003, 0.002, 0.95), (0.02, 0.0, 0.999), (0.001, 0.01, 0.5)):
        sd = math.sqrt(sigma ** 2 + drift ** 2 / 3)
        t = frequency_tolerance(sigma, drift, share)
        # (the search's phi is Abramowitz and Stegun 7.1.26, |error| < 1.5e-7: at a share of
        # 0.999 that moves the width by about 1e-5)
        assert t == pytest.approx(math.expm1(sd * norm.ppf((1 + share) / 2)), rel=1e-4)
        assert frequency_share(np.array([0.0]), sigma, drift, t)[0] == pytest.approx(share, abs=1e-6)


LOAD = """\
name: cov-063-lvdt
description: LVDT primary drive
frequency: {target: 5 kHz, tolerance: 1 %}
amplitude: {target: 5 Vrms, tolerance: 5 %}
supply: {kind: dual, min: 10.8 V, max: 13.2 V}
load: {resistance: 220 ohm}
temperature: {min: 0 degC, max: 50 degC}
distortion: {max_thd: 3 %}
yield: {min: 95 %}
parts:
  opamps: [oa-audio-10m, oa-jfet-4m, oa-rr-20m]
"""


def test_a_load_refusal_states_the_resistance_with_what_binds_next(tmp_path):
    # requirement 63 of the benchmark's wide set: 5 Vrms -5 % into 220 ohm is more current
    # than any allowed op-amp plans for. The load it names is Ohm's law, the amplitude's low
    # end (5 x sqrt(2) x 0.95 V peak) over 60 % of the strongest part's rated current, rounded
    # up to two figures; it was advised as "raise load.resistance to 319.9 ohm", and the spec
    # so relaxed was refused again (the amplitude tolerance binds there). The refusal now
    # states the load as a bound and gives what designs with it, applied together.
    from partpick.catalog import load_catalog

    cat = load_catalog(CATALOGS)
    # of the allowed op-amps, those whose supply range takes the 21.6..26.4 V span
    ops = [cat.find("opamps", i) for i in ("oa-audio-10m", "oa-jfet-4m", "oa-rr-20m")]
    strongest = max(o.output_current_a for o in ops if o.supply_min_v <= 21.6 and 26.4 <= o.supply_max_v)
    r_need = 5 * math.sqrt(2) * 0.95 / (0.6 * strongest)
    step = 10 ** (math.floor(math.log10(r_need)) - 1)
    r_advised = math.ceil(r_need / step) * step
    refused = _refused(tmp_path, LOAD)
    assert f"a load.resistance under {r_advised:g} Ω cannot design" in refused.output, refused.output
    assert "raise load.resistance" not in refused.output   # the bound alone does not design
    ra = _advice_reader()
    joint = [a for a in ra.parse_refusal(refused.output) if a.field == "joint"]
    assert joint and f"load.resistance={r_advised:g} Ω" in joint[0].value, refused.output
    for advice in ra.parse_refusal(refused.output):
        _designs(tmp_path, ra.apply_advice(LOAD, advice))


SHUT = """\
name: cov-124-spread
description: requirement drawn over the coverage ranges
frequency: {target: 1.1 kHz, tolerance: 2 %}
amplitude: {target: 530 mVpp, tolerance: 20 %}
supply: {kind: single, min: 3.135 V, max: 3.465 V}
load: {resistance: 390 kohm}
temperature: {min: -40 degC, max: 85 degC}
distortion: {max_thd: 3 %}
yield: {min: 99 %}
parts:
  resistors: [tk-1]
  capacitors: [pp-2, alu-20]
  limiters: [led-red, z-pair-3v3]
"""


def test_parts_that_cannot_oscillate_are_answered_with_the_families_that_would(tmp_path):
    # requirement 124 of the benchmark's wide set: on a 3.3 V single supply the allowed
    # limiters (a red LED pair, 3.3 V Zeners, each conducting near 1.6..2 V or 3.3 V a
    # side, with a rail-to-rail output of +/-1.65 V about mid-rail: common practice, no
    # published source) cannot limit, and its 1 % resistors with 2 % capacitors cannot
    # hold 2 % at 99 %. Opening one kind at a time designs nothing, so the refusal said
    # only "no allowed design oscillates". It now names the families a run with the
    # restricted kinds opened uses, and what binds with them allowed; every piece of
    # advice, applied with those families added, designs.
    refused = _refused(tmp_path, SHUT)
    assert "no allowed design oscillates" in refused.output
    named = re.search(r"with famil(?:y|ies) ([a-z0-9., -]+) allowed", refused.output)
    assert named, refused.output
    from partpick.catalog import load_catalog

    cat = load_catalog(CATALOGS)
    fams = [f.strip() for f in named[1].split(",")]
    # every one named is a catalog family the spec left out, and a limiter is among them
    assert all(cat.kind_of(f) is not None for f in fams) and "limiters" in {cat.kind_of(f) for f in fams}
    assert not set(fams) & {"tk-1", "pp-2", "alu-20", "led-red", "z-pair-3v3"}
    advice = _every_advice_designs(tmp_path, SHUT, refused.output)
    assert all(a.field == "joint" and a.value.startswith("parts.add=") for a in advice), advice


SUPPLY = """\
name: cov-133-audio-1k-600
description: 1 kHz audio test tone into a 600 ohm line
frequency: {target: 1 kHz, tolerance: 1 %}
amplitude: {target: 1 Vrms, tolerance: 5 %}
supply: {kind: dual, min: 14.25 V, max: 15.75 V}
load: {resistance: 600 ohm}
temperature: {min: 15 degC, max: 35 degC}
distortion: {max_thd: 2 %}
yield: {min: 99 %}
parts:
  resistors: [tk-5]
  opamps: [oa-rr-20m]
"""


def test_an_op_amp_that_cannot_take_the_supply_is_answered_with_one_that_can(tmp_path):
    # requirement 133 of the benchmark's wide set: the only allowed op-amp is a 5.5 V part
    # on +/-15 V. The refusal names an op-amp of the catalog whose rated supply range
    # (the catalog's figures) takes the 28.5..31.5 V across the rails, and, since 5 %
    # resistors cannot hold 1 % either, what designs with it; the advice applied designs.
    cat, refused = _refusal_of(tmp_path, SUPPLY)
    assert "no allowed op-amp can serve" in refused.output
    named = re.search(r"with famil(?:y|ies) ([a-z0-9., -]+) allowed", refused.output)
    assert named, refused.output
    ops = [cat.find("opamps", f.strip()) for f in named[1].split(",") if cat.kind_of(f.strip()) == "opamps"]
    assert ops and all(o.supply_min_v <= 28.5 and 31.5 <= o.supply_max_v for o in ops), refused.output
    _every_advice_designs(tmp_path, SUPPLY, refused.output)


def test_the_benchmark_applies_advice_with_the_families_it_is_given_with():
    # benchmarks/refusal_advice.py: advice stated "with families X, Y allowed" holds only
    # with them, so each piece is applied together with adding them; advice before the
    # phrase stands alone
    import yaml

    ra = _advice_reader()
    msg = ("frequency.tolerance binds: ...; relax frequency.tolerance to +/-3 %\n"
           "with families c0g-1, d-si-signal allowed, the spec still does not design:\n"
           "  yield.min binds: ...; relax yield.min to 95 %\n"
           "  also: allow resistors tn-0.1: the search designs with it\n")
    advice = ra.parse_refusal(msg)
    assert [a.field for a in advice] == ["frequency.tolerance", "joint", "joint"]
    data = yaml.safe_load(ra.apply_advice(SHUT, advice[1]))
    assert data["parts"]["capacitors"] == ["pp-2", "alu-20", "c0g-1"]
    assert data["parts"]["limiters"] == ["led-red", "z-pair-3v3", "d-si-signal"] and data["yield"]["min"] == "95 %"
    data = yaml.safe_load(ra.apply_advice(SHUT, advice[2]))
    assert data["parts"]["resistors"] == ["tk-1", "tn-0.1"] and data["parts"]["limiters"][-1] == "d-si-signal"
    assert yaml.safe_load(ra.apply_advice(SHUT, advice[0]))["frequency"]["tolerance"] == "3 %"


REACH = """\
name: cov-002-spread
description: requirement drawn over the coverage ranges
frequency: {target: 3.1 Hz, tolerance: 1 %}
amplitude: {target: 4.5 Vpp, tolerance: 2 %}
supply: {kind: dual, min: 10.8 V, max: 13.2 V}
load: {resistance: 120 kohm}
temperature: {min: 0 degC, max: 50 degC}
distortion: {max_thd: 5 %}
yield: {min: 99.5 %}
"""


def test_a_pair_that_cannot_reach_the_frequency_is_not_offered_as_holding_it(tmp_path):
    # requirement 2 of the benchmark's wide set: at 3.1 Hz the tight families (0.05 %
    # thin film up to 200 kohm, 1 % C0G up to 47 nF) cannot make the arms, f0 =
    # 1 / (2 pi R C) (the Wien bridge's textbook frequency), and the families that can
    # hold +/-1 % in fewer builds than 99.5 %. The refusal said "frequency.target out of
    # reach ... arms from 33.86 mHz to 1.592 MHz, not 3.1 Hz" (a contradiction: no pair
    # was kept, since each either missed the yield or the frequency). It now names the
    # best pair that reaches the frequency, and a value that designs.
    cat, refused = _refusal_of(tmp_path, REACH)
    assert "out of reach" not in refused.output
    named = re.search(r"best allowed families \(([a-z0-9.-]+) resistors [^,]+, ([a-z0-9.-]+) capacitors",
                      refused.output)
    assert named, refused.output
    r_fam, c_fam = cat.find("resistors", named[1]), cat.find("capacitors", named[2])
    # the named pair's largest arm (equal arms) reaches down to 3.1 Hz
    assert 1 / (2 * math.pi * r_fam.max_ohm * c_fam.max_f) <= 3.1, refused.output
    assert "c0g-1 capacitors would hold" not in refused.output   # (it cannot reach 3.1 Hz)
    _every_advice_designs(tmp_path, REACH, refused.output)


def test_a_target_nothing_oscillates_at_is_moved_to_where_a_run_designs():
    # partpick.opening.eased on a stand-in for the design runs: a run designs where the
    # amplitude target is at least 0.1 V peak (and the load anything). The bisection
    # (three halvings of the last step of the ladder) must end within its resolution
    # above that threshold, the value rounded to two figures toward the easy side, and
    # the refusal's line must give it in the spec's own kind (Vpp here); where the spec
    # there designs as written, the advice is to raise the target to it.
    from partpick.errors import InfeasibleError
    from partpick.opening import eased
    from partpick.spec import Spec

    spec = Spec.from_text(SHUT.replace("530 mVpp", "40 mVpp"))
    easy = spec.supply.span_min_v / 8                  # the easy amplitude, V peak

    def run(s):
        return ["bom"] if s.amplitude.peak_v >= 0.1 else []

    asked = []

    def design(s, opened):
        asked.append((s.amplitude.peak_v, opened))

    lines, binding = eased(spec, run, design)
    assert binding == ("amplitude.target",)
    (peak, opened), = asked
    assert opened == ("amplitude.target",)
    # at or above 0.1 V, within the bisection's resolution: the ladder's widest bracket (half
    # the way, geometrically) halved three times, then up to one step of the second figure
    now = spec.amplitude.peak_v
    t_star = math.log(0.1 / now) / math.log(easy / now)
    assert 0.1 <= peak <= now * (easy / now) ** (t_star + 0.5 / 8) * 1.1
    assert peak == float(f"{peak:.2g}")   # two figures
    assert re.search(r"raise amplitude\.target to [\d.]+ mVpp$", lines[0]), lines
    # where the spec there still does not design, its why-not follows, stated with the value
    def refusing(s, opened):
        raise InfeasibleError("no design meets the spec\nyield.min binds: ...; relax yield.min to 90 %")

    lines, binding = eased(spec, run, refusing)
    assert lines[1].startswith("with amplitude.target at ") and lines[1].endswith("the spec still does not design:")
    assert lines[2] == "  yield.min binds: ...; relax yield.min to 90 %" and binding == ("amplitude.target", )
    ra = _advice_reader()
    (advice,) = ra.parse_refusal("\n".join(lines))
    assert advice.field == "joint" and advice.value.startswith("amplitude.target=") and "yield.min=90 %" in advice.value


SWING = """\
name: swing-bound
frequency: {target: 2.33 kHz, tolerance: 0.5 %}
amplitude: {target: 7 Vrms, tolerance: 20 %}
supply: {kind: dual, min: 4.5 V, max: 5.5 V}
load: {resistance: open}
temperature: {min: -40 degC, max: 85 degC}
distortion: {max_thd: 0.5 %}
yield: {min: 98 %}
"""


def test_an_amplitude_no_op_amp_swings_is_answered_with_one_that_takes_the_supply(tmp_path):
    # requirement 7 of the benchmark's wide set: 7 Vrms on +/-4.5..5.5 V. The refusal once
    # named the swing of a 5.5 V op-amp that cannot take the 9..11 V across the rails; the
    # op-amp it names now takes it (the catalog's rated range), the amplitude it advises
    # sits, at the bottom of its tolerance, within that op-amp's swing at the minimum
    # supply (rail less the catalog's headroom, both sides: the usual data-sheet reading,
    # common practice), and where the spec there still does not design, its why-not is
    # stated with that amplitude and read by the benchmark together with it.
    cat, refused = _refusal_of(tmp_path, SWING)
    m = re.search(r"the best \(([a-z0-9-]+)\) swings .*?an amplitude.target over ([\d.]+) V peak cannot design",
                  refused.output)
    assert m, refused.output
    op = cat.find("opamps", m[1])
    assert op.supply_min_v <= 9.0 and 11.0 <= op.supply_max_v
    swing = 4.5 - max(op.headroom_high_v, op.headroom_low_v)
    assert float(m[2]) * (1 - 0.20) == pytest.approx(swing, rel=1e-3)
    still = re.search(r"with amplitude.target at ([\d.]+) Vrms, the spec still does not design:", refused.output)
    assert still, refused.output
    assert float(still[1]) * math.sqrt(2) <= float(m[2])     # (rounded toward the easy side)
    advice = _every_advice_designs(tmp_path, SWING, refused.output)
    assert all("amplitude.target=" in a.value for a in advice), advice


def test_the_benchmark_applies_advice_with_the_bound_the_refusal_states():
    # requirement 128 of the wide set: a load that needs more current than the op-amp may
    # give is stated as a bound, and what follows holds beyond it (the why-not was worked
    # out on the spec with the load at the bound): every piece is applied with it
    ra = _advice_reader()
    message = ("no design meets the spec\n"
               "load.resistance binds: 6.718 V peak into 470 Ω takes 14.29 mA; the strongest allowed op-amp plans "
               "for 12 mA: a load.resistance under 560 Ω cannot design (or add an external driver)\n"
               "with families oa-jfet-4m, z-pair-3v3 allowed, the spec still does not design:\n"
               "  amplitude.tolerance binds: ...; relax amplitude.tolerance to +/-50 %\n")
    advice = ra.parse_refusal(message)
    assert [a.value for a in advice] == [
        "load.resistance=560 Ω;parts.add=oa-jfet-4m,z-pair-3v3;amplitude.tolerance=50 %"]
    # alone, a bound is what the message gives
    assert [(a.field, a.value) for a in ra.parse_refusal(message.split("\nwith")[0])] == [("load.resistance", "560 Ω")]
