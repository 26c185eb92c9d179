"""YAML read by libyaml where it can be (yamlsrc.parse_yaml): the same tree, and every
refusal in the same words, as the Python parser gives (PyYAML's two parsers of one
grammar; the project's own files and hostile texts compared)."""

from __future__ import annotations

import pytest
import yaml
from hypothesis import given, settings
from hypothesis import strategies as st

from partpick import yamlsrc
from partpick.errors import InputError
from tests.conftest import ROOT


def _both(text: str) -> tuple[str, str]:
    """The tree's repr, or the refusal's message, read with libyaml where it may and with
    the Python parser alone."""
    saved, out = yamlsrc._C_LOADER, []
    for loader in (saved, None):
        yamlsrc._C_LOADER = loader
        try:
            out.append(repr(yamlsrc.parse_yaml(text, "x.yaml")))
        except InputError as exc:
            out.append("refused: " + str(exc))
        finally:
            yamlsrc._C_LOADER = saved
    return out[0], out[1]


def test_libyaml_is_there_to_be_compared():
    assert yamlsrc._C_LOADER is not None   # (PyYAML's wheels carry it: else this file compares nothing)


def test_every_yaml_file_of_the_project_reads_the_same():
    files = [p for folder in ("catalogs", "specs", "tests", "benchmarks") for p in (ROOT / folder).rglob("*.yaml")]
    assert len(files) > 50
    for path in files:
        c_read, py_read = _both(path.read_text(encoding="utf-8"))
        assert c_read == py_read, path


HOSTILE = [
    "a: [1, 2\nb: 3\n",                      # an unclosed bracket
    "a: &x 1\nb: *x\n",                       # an alias
    "a: 1\na: 2\n",                           # a duplicate key
    "a:\n\t- 1\n",                            # a tab for indentation
    "a: 'b\n",                                # an unclosed quote
    "a: \"\\ud83d\"\n",                       # a lone surrogate
    "a: b\x07c\n",                            # a non-printable character
    "",                                       # nothing
    "- - - - - x\n",                          # compact sequences
    "".join(f"{' ' * i}k{i}:\n" for i in range(40)) + " " * 40 + "v: 1\n",   # 40 block levels
    "a: " + "[" * 40 + "]" * 40 + "\n",       # 40 flow levels
    "a: " + "[" * 5000 + "]" * 5000 + "\n",   # past the Python parser's recursion
    "? [a, b]\n: c\n",                        # a complex key
    "%YAML 1.2\n---\na: 1\n",                 # a directive
    "a: 1\n---\nb: 2\n",                      # two documents
    "a: !!python/object:os.system x\n",       # a tag the safe loader leaves a tag
]


@pytest.mark.parametrize("text", HOSTILE)
def test_a_hostile_text_reads_or_is_refused_alike(text):
    c_read, py_read = _both(text)
    assert c_read == py_read


@settings(max_examples=1000, deadline=None)
@given(st.lists(st.sampled_from(["a", "b: ", "- ", "  ", "\n", ":", "[", "]", "{", "}", ",", "'", '"', "#", "&x",
                                 "*x", "!t", "?", "|", ">", "1 kHz", "\t", "\\u00e9", "é", "%", "@", "`", "---",
                                 "...", "~", "null", "\r", "\u2028", "5 %", "-1"]), max_size=30))
def test_any_text_reads_or_is_refused_alike(parts):
    text = "".join(parts)
    c_read, py_read = _both(text)
    assert c_read == py_read, text


_SCALARS = st.one_of(st.text(max_size=12), st.integers(), st.floats(allow_nan=False), st.booleans(), st.none())
_TREES = st.recursive(_SCALARS, lambda kids: st.lists(kids, max_size=4) | st.dictionaries(st.text(max_size=8), kids,
                                                                                            max_size=4), max_leaves=20)


@settings(max_examples=300, deadline=None)
@given(st.dictionaries(st.text(min_size=1, max_size=8), _TREES, min_size=1, max_size=5), st.booleans())
def test_any_written_tree_reads_alike(tree, flow):
    text = yaml.safe_dump(tree, default_flow_style=flow, allow_unicode=True)
    c_read, py_read = _both(text)
    assert c_read == py_read, text
