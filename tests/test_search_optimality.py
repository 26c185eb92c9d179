"""The search's answer is the best of everything allowed.

On reduced spaces small enough to enumerate completely (stock mode ``only`` with a
small shelf), an independent brute force builds EVERY BOM the shelf allows -- every
stocked value in every slot, every allowed op-amp, limiter and output stage, each
value's quantity times the boards built held to the shelf -- verifies each with
partpick's public verification entry point (:func:`partpick.pipeline.evaluate_bom`,
what ``partpick check`` runs) and picks the best by the ranking rule as the README
("How ranking works") states it. ``partpick design`` (:func:`partpick.pipeline.design`)
must return that BOM, or refuse exactly when no BOM passes. The brute force shares no
code with the search: it neither calls the Searcher nor partpick.rank.

Also: #1 does not depend on ``-n`` on the shipped demo specs, the starter spec and three
requirements of the coverage benchmark where it did, and allowing more parts
never makes a spec refuse that designed, nor #1 worse by the ranking rule.

The oracle here is exhaustive enumeration, judged by partpick's own verifier: the test
checks the search against it, not the physics (the physics is checked against ngspice
and handbook results in tests/test_ngspice_*.py and tests/test_conformance.py).
"""

from __future__ import annotations

import itertools
import math
from collections import Counter
from pathlib import Path

import pytest

from partpick.bom import Bom, BomLine
from partpick.circuits import STAGES, slots_for
from partpick.errors import InfeasibleError
from partpick.pipeline import design, evaluate_bom
from partpick.spec import Spec
from partpick.starter import STARTER_SPEC
from partpick.stock import load_stock
from tests.conftest import SPECS

SAMPLES = 20_000     # the Monte Carlo builds, as `partpick design` runs by default
SEED = 0             # design's seed; it verifies with seed + 1, as evaluate_bom's default
CONTROL = "diode-limiter"   # what `partpick design` proposes (README, "JFET amplitude control")


# -- the reduced problem: a spec and its shelf, written as a user writes them ------------------

def write_space(tmp_path: Path, name: str, spec_body: str, shelf_rows: list[str]) -> Path:
    """A spec with ``stock: {mode: only}`` and its shelf CSV (the README's format:
    ``family,value,quantity[,unit_price][,note]``) written in tmp_path; the spec's path."""
    shelf = tmp_path / f"{name}-shelf.csv"
    shelf.write_text("family,value,quantity,unit_price,note\n" + "\n".join(shelf_rows) + "\n", encoding="utf-8")
    path = tmp_path / f"{name}.yaml"
    path.write_text(f"name: {name}\ntopology: wien-bridge\n{spec_body}"
                    f"stock: {{file: {shelf.name}, mode: only}}\n", encoding="utf-8")
    return path


# -- the brute force ---------------------------------------------------------------------------

def _allowed(spec: Spec, kind: str, family: str) -> bool:
    ids = spec.parts.of_kind(kind)
    return ids is None or family in ids


def every_bom(spec: Spec, catalog, shelf):
    """Every BOM buildable from the shelf alone (README: stock mode ``only``): each slot
    of each output stage the spec allows filled with every stocked part of its kind whose
    family the spec allows (an optional slot also left empty), and kept when the shelf
    holds every part in the quantity the boards need (per part: the slots using it, the
    op-amp's packages, times ``builds``)."""
    kinds = {"resistors", "capacitors", "opamps", "limiters"}
    stocked = {k: [(it.family, it.value) for it in shelf.items
                   if catalog.kind_of(it.family) == k and _allowed(spec, k, it.family)] for k in kinds}
    stages = STAGES if spec.output_stage == "auto" else (spec.output_stage,)
    for stage in stages:
        slots = slots_for(spec.topology, CONTROL, stage, spec.supply.kind)
        options = [stocked[s.kind] + ([None] if s.optional else []) for s in slots]
        for pick in itertools.product(*options):
            lines = tuple(BomLine(s.designator, s.role, p[0], p[1]) for s, p in zip(slots, pick) if p is not None)
            bom = Bom(lines, spec.supply.kind, stage, spec.topology, CONTROL)
            if _on_shelf(bom, catalog, shelf, spec.builds):
                yield bom


def _on_shelf(bom: Bom, catalog, shelf, builds: int) -> bool:
    need = Counter((ln.family, ln.value) for ln in bom.lines)
    for (family, value), n in need.items():
        if catalog.kind_of(family) == "opamps":
            n = math.ceil(bom.channels / catalog.find("opamps", family).channels)
        if n * builds > shelf.quantity(family, value):
            return False
    return True


def verify_all(spec: Spec, catalog, shelf) -> list:
    """Every buildable BOM, verified exactly (physics at every operating point, the
    Monte Carlo yield with the seed design verifies with)."""
    return [evaluate_bom(b, spec, catalog, shelf, samples=SAMPLES, seed=SEED + 1) for b in every_bom(spec, catalog, shelf)]


# -- the ranking rule, as the README states it ("How ranking works") ---------------------------

def _figure(r, key: str) -> tuple[float, float]:
    """(value to minimise, the resolution below which two candidates tie) of one key:
    yields within two binomial standard errors of the builds (0.2 % at least); frequency
    and amplitude errors within half the spread the builds show (rank.py's floors of
    0.01 % and 0.1 %); THDs within 5 % (or half their spread); cost exact; part count."""
    stats = r.mc.stats if r.mc is not None else {}

    def half_spread(name: str, scale: float) -> float:
        st = stats.get(name)
        return 0.5 * st["std"] / scale if st and scale else 0.0

    if key == "yield":
        p, n = r.mc.yield_frac, r.mc.samples
        return -p, max(2 * math.sqrt(max(p * (1 - p), 1e-12) / n), 0.002)
    if key == "frequency_error":
        return abs(r.freq_error), max(half_spread("frequency_hz", r.verdict.nominal.freq_hz), 1e-4)
    if key == "amplitude_error":
        return abs(r.amp_error), max(half_spread("amplitude_v", r.verdict.nominal.load_peak_v), 1e-3)
    if key == "thd":
        return r.thd, max(half_spread("thd", 1.0), 0.05 * r.thd)
    if key == "startup_margin":
        return -r.verdict.nominal.lin.margin, max(half_spread("margin", 1.0), 1e-4)
    if key == "cost":
        return r.cost, 1e-9
    return float(r.parts), 0.0


def best_tier(passing: list, rank_by) -> list:
    """The candidates the ranking rule puts first: for each key in order (the spec's
    rank_by, then cost and part count), keep those within the key's resolution of the
    best; what is left ties on every key (the BOM's text then orders them)."""
    keys = tuple(rank_by) + tuple(k for k in ("cost", "parts") if k not in rank_by)
    tier = list(passing)
    for key in keys:
        best, res = min((_figure(r, key) for r in tier), key=lambda f: f[0])
        tier = [r for r in tier if _figure(r, key)[0] <= best + res]
    return tier


def signature(bom: Bom) -> tuple:
    return bom.stage, tuple((ln.role, ln.family, ln.value) for ln in bom.lines)


def describe(r) -> str:
    parts = ", ".join(f"{ln.role} {ln.family}" + (f" {ln.value:g}" if ln.value else "") for ln in r.bom.lines)
    return (f"[{r.bom.stage} stage: {parts}] cost {r.cost:.4f}, yield {r.yield_frac * 100:.2f} %, "
            f"frequency error {r.freq_error * 100:+.3f} %")


# -- the reduced spaces ------------------------------------------------------------------------
# Each is a requirement a user could write and a drawer they could have: a few stocked values
# with their own unit prices (a shelf part without one costs nothing), dual supplies. The
# resistor values of a shelf lie within a factor of about 3 of each other, so no
# assignment puts a gain far above what the limiter holds (such a BOM would fall to the
# transient solver and cost seconds to verify, not change what the test shows).

_TONE_1K = """\
frequency: {target: 1 kHz, tolerance: 3 %}
amplitude: {target: 2 Vpk, tolerance: 20 %}
supply: {kind: dual, min: 14.25 V, max: 15.75 V}
load: {resistance: 10 kohm}
temperature: {min: 10 degC, max: 40 degC}
distortion: {max_thd: 5 %}
yield: {min: 95 %}
"""
_ONE_K_ARMS = ["mf-1,15.8k,2,0.05", "mf-1,16.2k,2,0.02", "mf-1,10k,1,0.01", "mf-1,20.5k,1,0.01", "c0g-1,10n,2,0.10",
               "oa-jfet-4m,,10,0.20", "led-red,,10,0.05"]

SPACES = {
    # 16.2k is cheaper than 15.8k: the cheapest passing BOM mixes the two arms and lands
    # 1.3 % low, where two 15.8k land within 0.1 % -- the yields tie, so cost decides
    "cheapest-not-nearest": (_TONE_1K + "output_stage: none\nrank_by: [yield, cost]\n", _ONE_K_ARMS),
    # two op-amps and two limiters; frequency error before cost
    "opamp-and-limiter": (_TONE_1K + "output_stage: none\nrank_by: [yield, frequency_error, cost]\n",
                          ["mf-1,15.8k,2,0.05", "mf-1,10k,1,0.01", "mf-1,20.5k,1,0.01", "mf-1,22.1k,1,0.01",
                           "c0g-1,10n,2,0.10", "oa-jfet-4m,,10,0.20", "oa-gp-bip,,10,0.08", "led-red,,10,0.05",
                           "d-si-signal,,10,0.02"]),
    # two boards from a shelf that holds three of each arm value: no board gets two of one
    "quantities-bind": (_TONE_1K + "output_stage: none\nrank_by: [yield, cost]\nbuilds: 2\n",
                        ["mf-1,15.8k,3,0.02", "mf-1,16.2k,3,0.05", "mf-1,10k,2,0.01", "mf-1,20.5k,2,0.01",
                         "c0g-1,10n,4,0.10", "oa-jfet-4m,,10,0.20", "led-red,,10,0.05"]),
    # nothing passes: an LED limiter at these gains distorts more than 0.5 %
    "nothing-passes": (_TONE_1K.replace("max_thd: 5 %", "max_thd: 0.5 %") + "output_stage: none\n"
                       "rank_by: [yield, cost]\n", _ONE_K_ARMS),
    # every output stage for a 600 ohm line load, on a regulated +/-15 V at room temperature
    "every-stage-600-ohm": ("frequency: {target: 1 kHz, tolerance: 3 %}\n"
                            "amplitude: {target: 1 Vrms, tolerance: 10 %}\nsupply: {kind: dual, min: 15 V}\n"
                            "load: {resistance: 600 ohm}\ndistortion: {max_thd: 5 %}\nyield: {min: 95 %}\n"
                            "rank_by: [yield, cost]\n",
                            ["mf-1,15.8k,2,0.05", "mf-1,10k,2,0.01", "mf-1,20.5k,1,0.01", "mf-1,22.1k,1,0.01",
                             "c0g-1,10n,2,0.10", "oa-jfet-4m,,10,0.20", "led-red,,10,0.05"]),
    # a 50 kHz carrier: the op-amp's bandwidth decides; a gain stage lifts a silicon limiter
    "carrier-opamps": ("frequency: {target: 50 kHz, tolerance: 1.5 %}\n"
                       "amplitude: {target: 1 Vrms, tolerance: 20 %}\nsupply: {kind: dual, min: 4.75 V, max: 5.25 V}\n"
                       "load: {resistance: 1 kohm, capacitance: 100 pF}\ntemperature: {min: 10 degC, max: 40 degC}\n"
                       "distortion: {max_thd: 5 %}\nyield: {min: 95 %}\noutput_stage: gain\n"
                       "rank_by: [frequency_error, yield, cost]\n",
                       ["tk-1,23.2k,2,0.01", "tk-1,10k,2,0.01", "tk-1,21.5k,1,0.01", "tk-1,13.7k,1,0.01",
                        "c0g-1,130p,2,0.05", "oa-audio-10m,,10,0.30", "oa-jfet-4m,,10,0.18", "d-si-signal,,10,0.02"]),
    # a drawer without a 10k: the gain pair that works is 4.99k and 10.5k
    "no-10k-on-the-shelf": (_TONE_1K + "output_stage: none\nrank_by: [yield, cost]\n",
                            ["mf-1,15.8k,2,0.05", "mf-1,4.99k,1,0.01", "mf-1,10.5k,1,0.01", "c0g-1,10n,2,0.10",
                             "oa-jfet-4m,,10,0.20", "led-red,,10,0.05"]),
}

# what brute force shows the search gets wrong (found by this test; the search is not
# changed here: each case fails, strictly, until it is fixed)
_MISSED: dict[str, str] = {
    # (no-10k-on-the-shelf, refused while Rg was fixed at the value nearest 10 kohm and rows
    # over 80 % of max_thd were left out, designs since the gain network is searched at
    # each impedance level and rows are judged against the limit itself)
}


def _space_params():
    for name in SPACES:
        marks = [pytest.mark.xfail(strict=True, reason=_MISSED[name])] if name in _MISSED else []
        yield pytest.param(name, marks=marks, id=name)


def _load_space(tmp_path: Path, name: str, catalog):
    body, rows = SPACES[name]
    spec = Spec.from_yaml(write_space(tmp_path, name, body, rows))
    return spec, load_stock(spec.stock.path, catalog)


@pytest.mark.parametrize("name", list(_space_params()))
def test_design_returns_the_exhaustive_best(tmp_path, demo_catalog, name):
    spec, shelf = _load_space(tmp_path, name, demo_catalog)
    verified = verify_all(spec, demo_catalog, shelf)
    assert len(verified) >= 12, "the space must hold enough BOMs to mean anything"
    passing = [r for r in verified if r.verdict.passed]
    if name == "nothing-passes":
        assert not passing, "this space is meant to hold no passing BOM"
    if name == "cheapest-not-nearest":
        nearest = min(passing, key=lambda r: abs(r.freq_error))
        assert signature(nearest.bom) not in {signature(r.bom) for r in best_tier(passing, spec.rank_by)}
    try:
        got = design(spec, demo_catalog, stock=shelf, samples=SAMPLES, seed=SEED).ranked[0]
    except InfeasibleError as exc:
        assert not passing, (f"design refused ({exc.message.splitlines()[0]}) but {len(passing)} BOM(s) pass, "
                             f"the best {describe(best_tier(passing, spec.rank_by)[0])}")
        return
    assert passing, f"design returned {describe(got)}, but no buildable BOM passes verification"
    assert _on_shelf(got.bom, demo_catalog, shelf, spec.builds), f"design's #1 {describe(got)} is not on the shelf"
    tier = {signature(r.bom): r for r in best_tier(passing, spec.rank_by)}
    best = next(iter(tier.values()))
    assert signature(got.bom) in tier, f"design's #1 {describe(got)}; exhaustive best {describe(best)}"
    assert got.cost == pytest.approx(tier[signature(got.bom)].cost, abs=1e-9)


# -- the shipped demo specs: #1 does not depend on -n ------------------------------------------

DEMO_SPECS = sorted(p.name for p in SPECS.glob("*.yaml"))
_N_DEPENDS: dict[str, str] = {}   # (audio-tone-1k depended on -n until the certification judged every candidate left)
# Requirements of the coverage benchmark (benchmarks/bench_coverage.py --set wide, seeded: the
# files as it generated them) whose #1 depended on -n on main 6b2e0b5: with -n 1 a cheaper #1
# (056: 1.607 against 2.094 USD with -n 10; 132: 0.889 against 0.992), or one certified after
# a single verification where -n 10 found a frequency error in a better tier (079: 0.254 %
# against 0.056 %); and the starter spec `partpick init` writes (-n 1: 1.132 USD, -n 3: 1.129,
# its refined stage pair sharing Rd's value and line)
N_DATA = Path(__file__).resolve().parent / "data" / "n-independent"
N_SPECS = DEMO_SPECS + sorted(p.name for p in N_DATA.glob("*.yaml")) + ["starter"]


def _n_spec(name: str, tmp_path: Path) -> Spec:
    if name == "starter":
        path = tmp_path / "spec.yaml"
        path.write_text(STARTER_SPEC, encoding="utf-8")
        return Spec.from_yaml(path)
    return Spec.from_yaml((SPECS if name in DEMO_SPECS else N_DATA) / name)


@pytest.mark.slow
@pytest.mark.parametrize("name", [pytest.param(n, marks=[pytest.mark.xfail(strict=True, reason=_N_DEPENDS[n])]
                                               if n in _N_DEPENDS else [], id=n) for n in N_SPECS])
def test_first_does_not_depend_on_n(demo_catalog, tmp_path, name):
    spec = _n_spec(name, tmp_path)
    firsts = {n: design(spec, demo_catalog, results=n).ranked[0] for n in (1, 5, 10, 50)}
    sigs = {n: (signature(r.bom), round(r.cost, 9)) for n, r in firsts.items()}
    assert len(set(sigs.values())) == 1, "; ".join(f"-n {n}: {describe(r)}" for n, r in firsts.items())


# -- more parts allowed never makes #1 worse ---------------------------------------------------

SUPERSETS = [
    # (demo spec, the line of its parts list, the subset, the superset)
    ("seismic-cal-20hz.yaml", "  limiters: all", "  limiters: [led-red]", "  limiters: [led-red, d-si-signal]"),
    ("carrier-50khz.yaml", "  limiters: all", "  limiters: [d-si-signal]", "  limiters: all"),
    ("lvdt-exciter.yaml", "  capacitors: [c0g-1, pp-2]", "  capacitors: [c0g-1]", "  capacitors: [c0g-1, pp-2]"),
    ("audio-tone-1k.yaml", "  opamps: all", "  opamps: [oa-gp-bip]", "  opamps: [oa-gp-bip, oa-jfet-4m]"),
]


def _variant(tmp_path: Path, name: str, line: str, new: str, tag: str) -> Spec:
    text = (SPECS / name).read_text(encoding="utf-8")
    assert line in text
    path = tmp_path / f"{tag}-{name}"
    path.write_text(text.replace(line, new), encoding="utf-8")
    return Spec.from_yaml(path)


def _first(spec: Spec, catalog):
    try:
        return design(spec, catalog).ranked[0]
    except InfeasibleError:
        return None


@pytest.mark.slow
@pytest.mark.parametrize("name,line,subset,superset", SUPERSETS, ids=[f"{s[0][:-5]}:{s[2].strip()}" for s in SUPERSETS])
def test_more_parts_never_worsen_first(tmp_path, demo_catalog, name, line, subset, superset):
    small = _variant(tmp_path, name, line, subset, "subset")
    large = _variant(tmp_path, name, line, superset, "superset")
    a, b = _first(small, demo_catalog), _first(large, demo_catalog)
    assert a is not None, f"{name} with {subset.strip()} must design for the comparison to mean anything"
    assert b is not None, f"{name} designs with {subset.strip()} ({describe(a)}) but refuses with {superset.strip()}"
    tier = {signature(r.bom) for r in best_tier([a, b], large.rank_by)}
    assert signature(b.bom) in tier, (f"with {superset.strip()} #1 is {describe(b)}, worse by the ranking rule "
                                      f"than {describe(a)} with {subset.strip()}")
