"""Fuzz the spec and stock loaders: random bytes and mutated valid files never raise
anything but a located PartpickError (hypothesis)."""

from __future__ import annotations

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
