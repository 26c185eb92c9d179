"""Fuzz the loaders, the options, the output names and the physics at the edges of the
ranges: random and mutated inputs never raise anything but a located PartpickError in
one line (hypothesis; derandomised in CI by the conftest profile). The command-line
counterpart over 10,000 generated inputs is benchmarks/bench_fuzz.py."""

from __future__ import annotations

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from partpick.catalog import load_catalog
from partpick.errors import InputError
from partpick.spec import Spec, check_parts
from partpick.stock import parse_stock
from tests.conftest import CATALOGS, VALID_SPEC

CAT = load_catalog(CATALOGS)
SETTINGS = settings(max_examples=400, deadline=None, suppress_health_check=[HealthCheck.too_slow])


def _load(text: str) -> None:
    try:
        spec = Spec.from_text(text, "fuzz.yaml")
        check_parts(spec, CAT)
    except InputError as exc:
        assert exc.source == "fuzz.yaml"
        assert "\n" not in str(exc)


@SETTINGS
@given(st.binary(max_size=400))
def test_random_bytes(data):
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError:
        return
    _load(text)


_TOKENS = ["", "-", "0", "1e400", "nan", "[", "{", "}", ":", "&a", "*a", "!!python/object:os.system", "'",
           "\t", "%", "kHz", "Vrms", "degC", "all", "~", "null", "true", "- x", "4k7", "µ", "\x00", "\ufeff"]


@st.composite
def mutated_spec(draw):
    lines = VALID_SPEC.splitlines()
    for _ in range(draw(st.integers(1, 4))):
        i = draw(st.integers(0, len(lines) - 1))
        action = draw(st.sampled_from(["delete", "duplicate", "insert", "replace", "truncate"]))
        line = lines[i]
        if action == "delete":
            del lines[i]
        elif action == "duplicate":
            lines.insert(i, line)
        elif action == "insert":
            pos = draw(st.integers(0, len(line)))
            lines[i] = line[:pos] + draw(st.sampled_from(_TOKENS)) + line[pos:]
        elif action == "replace":
            tokens = line.split(" ")
            tokens[draw(st.integers(0, len(tokens) - 1))] = draw(st.one_of(st.sampled_from(_TOKENS), st.text(max_size=5)))
            lines[i] = " ".join(tokens)
        else:
            lines[i] = line[: draw(st.integers(0, len(line)))]
        if not lines:
            break
    return "\n".join(lines) + "\n"


@SETTINGS
@given(mutated_spec())
def test_mutated_valid_spec(text):
    _load(text)


@SETTINGS
@given(st.text(max_size=300))
def test_random_stock_text(text):
    try:
        parse_stock("family,value,quantity,unit_price\n" + text, "fuzz.csv", CAT)
    except InputError as exc:
        assert exc.source == "fuzz.csv"


# -- BOMs, catalogs, options, names and messages (issue "bad input") ----------------------------------

from pathlib import Path  # noqa: E402

from partpick import fileio, inputs  # noqa: E402
from partpick.bom import bom_to_csv, load_bom, parse_bom  # noqa: E402
from partpick.errors import PartpickError, one_line  # noqa: E402
from tests.conftest import CATALOGS, SPECS  # noqa: E402

BOM_TEXT = (SPECS / "boms" / "carrier-50khz-01.yaml").read_text(encoding="utf-8")
BOM = load_bom(SPECS / "boms" / "carrier-50khz-01.yaml", CAT)
_VALUES = st.one_of(st.sampled_from(["47", "0", "-1k", "1e-320", "1e300", "nan", "10k3", "4k7", "300", "1 F", "9k76",
                                     "'a\\nb'", "x" * 200, "21k", "1M", "1G"]),
                    st.floats(allow_nan=True, allow_infinity=True).map(repr), st.text(max_size=12))


def _one_located_line(exc: InputError, source: str) -> None:
    assert exc.source == source, exc
    text = str(exc)
    assert "\n" not in text and "\r" not in text and len(text) < 1500, text


@SETTINGS
@given(st.lists(st.tuples(st.integers(0, 20), _VALUES), min_size=1, max_size=3), st.booleans())
def test_mutated_bom_values(edits, as_csv):
    lines = BOM_TEXT.splitlines()
    value_lines = [i for i, ln in enumerate(lines) if "value:" in ln]
    for k, value in edits:
        i = value_lines[k % len(value_lines)]
        lines[i] = lines[i].split("value:")[0] + f"value: {value}}}"
    text = "\n".join(lines) + "\n"
    source = "fuzz.yaml"
    if as_csv:
        text = bom_to_csv(BOM).replace(",21k\n", f",{edits[0][1]}\n".replace("\n", " ", 1) + "\n")
        source = "fuzz.csv"
    try:
        parse_bom(text, source, CAT)
    except InputError as exc:
        _one_located_line(exc, source)


_CATALOG_TEXT = {p.name: p.read_text(encoding="utf-8") for p in sorted(Path(CATALOGS).glob("*.yaml"))}


@settings(max_examples=100, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.sampled_from(sorted(_CATALOG_TEXT)), st.integers(0, 10_000),
       st.sampled_from([1e-30, 1e-12, 1e-6, 1e-3, 0.1, 10.0, 1e3, 1e6, 1e12, 1e30, 0.0, -1.0]))
def test_catalog_values_scaled_to_extremes(tmp_path_factory, name, pick, factor):
    import re

    text = _CATALOG_TEXT[name]
    numbers = list(re.finditer(r"(?<=: )(-?[0-9.]+)(?=\s*[a-zA-Zµ%/]+\s*(?:[,}#]|$))", text, re.M))
    m = numbers[pick % len(numbers)]
    folder = tmp_path_factory.mktemp("cat")
    for other, t in _CATALOG_TEXT.items():
        (folder / other).write_text(t, encoding="utf-8")
    (folder / name).write_text(text[: m.start()] + f"{float(m[0]) * factor:g}" + text[m.end():], encoding="utf-8")
    try:
        load_catalog(folder)
    except InputError as exc:
        assert exc.source == str(folder / name) and exc.line is not None and exc.field, exc
        assert "\n" not in str(exc)


@SETTINGS
@given(st.one_of(st.none(), st.integers(-2**70, 2**70)), st.one_of(st.none(), st.integers(-10, 10**9)),
       st.integers(1, 100), st.floats(allow_nan=True, allow_infinity=True), st.text(max_size=40))
def test_options_are_accepted_in_range_or_refused_in_one_line(seed, samples, results, number, rank_by):
    for check in (lambda: inputs.check_seed(seed), lambda: inputs.check_samples(samples, results),
                  lambda: inputs.check_number("--cycles", number, inputs.CYCLES),
                  lambda: inputs.rank_keys(rank_by)):
        try:
            check()
        except InputError as exc:
            assert exc.field and exc.field.startswith("--") and "\n" not in str(exc), exc
    if seed is not None and 0 <= seed <= inputs.SEED_MAX:
        inputs.check_seed(seed)


@SETTINGS
@given(st.text(max_size=400))
def test_safe_stem_is_a_plain_name_inside_the_folder(tmp_path_factory, name):
    stem = fileio.safe_stem(name, "spec.yaml")
    assert stem and len(stem) <= 70 and stem[0] not in ".-" and "/" not in stem and "\0" not in stem, stem
    assert all(c.isalnum() or c in "._-" for c in stem), stem
    folder = tmp_path_factory.mktemp("out")
    plan = fileio.OutputPlan()
    path = plan.in_folder(folder, f"{stem}-01.yaml", "--out")
    assert path.parent == folder


@SETTINGS
@given(st.text(max_size=3000))
def test_one_line_is_one_printable_line(text):
    out = one_line(text)
    assert "\n" not in out and "\r" not in out and len(out) <= 1100
    assert all(c.isprintable() for c in out), out


# Edge requirements inside partpick's ranges reach the physics: it answers or refuses in one
# line, never with another exception (checked on a real BOM; few examples, each runs physics
# and a small Monte Carlo).
_EDGES = st.fixed_dictionaries({
    "frequency": st.sampled_from(["1 mHz", "1 Hz", "50 kHz", "1 MHz", "10 MHz"]),
    "amplitude": st.sampled_from(["1 mVpk", "1 Vpk", "6 Vpk", "100 Vpp", "1 kVpk"]),
    "supply": st.sampled_from(["0.5 V", "5 V", "15 V", "200 V"]),
    "load_r": st.sampled_from(["0.1 ohm", "16 ohm", "1 kohm", "1e12 ohm", "open"]),
    "load_c": st.sampled_from(["0 F", "1 pF", "10 nF", "10 uF"]),
    "temp": st.sampled_from([("-100 degC", "-99 degC"), ("0 degC", "50 degC"), ("199 degC", "200 degC"),
                             ("-100 degC", "200 degC")]),
    "thd": st.sampled_from(["1 ppm", "1 %", "99 %"]),
    "tol": st.sampled_from(["1 ppm", "1 %", "49 %"]),
})


@pytest.mark.slow
@settings(max_examples=16, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(_EDGES)
def test_edge_requirements_never_break_the_physics(e):
    from partpick.pipeline import evaluate_bom

    text = f"""\
name: edge
frequency: {{target: {e['frequency']}, tolerance: {e['tol']}}}
amplitude: {{target: {e['amplitude']}, tolerance: 10 %}}
supply: {{kind: dual, min: {e['supply']}, max: {e['supply']}}}
load: {{resistance: {e['load_r']}, capacitance: {e['load_c']}}}
temperature: {{min: {e['temp'][0]}, max: {e['temp'][1]}}}
distortion: {{max_thd: {e['thd']}}}
"""
    try:
        spec = Spec.from_text(text, "edge.yaml")
        evaluate_bom(BOM, spec, CAT, samples=200)
    except PartpickError as exc:
        assert "\n" not in str(exc)
