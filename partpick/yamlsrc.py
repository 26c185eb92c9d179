"""YAML read with line numbers, and typed, located access to its fields.

Every spec, catalog and BOM file goes through here so that any refusal can name the
file, the line and the dotted field (``specs/x.yaml:4: 'frequency.target' ...``).
The YAML is composed (not constructed) with PyYAML's safe loader: partpick reads
the raw scalar text and parses quantities itself (:mod:`partpick.units`), so
``5 kHz`` and ``4k7`` never pass through YAML's own typing.
"""

from __future__ import annotations

import csv
import difflib
import math
import re
from dataclasses import dataclass
from pathlib import Path
from typing import Iterable, Iterator

import yaml

from partpick import units
from partpick.errors import InputError, UnitError
from partpick.fileio import read_bytes

__all__ = ["Scalar", "Mapping", "Sequence", "Node", "read_yaml", "parse_yaml", "Fields", "read_text", "did_you_mean",
           "read_csv_rows"]

_MAX_DEPTH = 32


@dataclass(frozen=True, slots=True)
class Scalar:
    """A YAML scalar: its raw text, the YAML tag it would resolve to, 1-based line."""

    text: str
    tag: str
    line: int
    quoted: bool = False

    @property
    def is_null(self) -> bool:
        return self.tag.endswith(":null") and not self.quoted


@dataclass(frozen=True, slots=True)
class Mapping:
    """A YAML mapping: ordered ``key -> (key line, value node)``."""

    items: dict
    line: int


@dataclass(frozen=True, slots=True)
class Sequence:
    """A YAML sequence of nodes."""

    items: tuple
    line: int


Node = Scalar | Mapping | Sequence


def read_text(path: str | Path, error_cls: type[InputError] = InputError) -> str:
    """Read a UTF-8 text file (a regular file, bounded: :func:`partpick.fileio.read_bytes`);
    unreadable or undecodable files raise ``error_cls``."""
    source = str(path)
    data = read_bytes(path, error_cls)
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = data[: exc.start].count(b"\n") + 1
        raise error_cls("is not UTF-8 text", source=source, line=line) from None


def read_csv_rows(lines: list[tuple[int, str]], source: str, error_cls: type[InputError]) -> list[list[str]]:
    """The cells of CSV ``lines`` ((line number, text) pairs, one record each): a cell
    the csv module refuses (an unclosed quote, a cell over its size limit) is
    ``error_cls`` at its line."""
    rows = []
    for line, text in lines:
        try:
            rows.append(next(csv.reader([text]), []))
        except csv.Error as exc:
            raise error_cls(f"is not valid CSV: {exc}", source=source, line=line) from None
    return rows


def read_yaml(path: str | Path, error_cls: type[InputError] = InputError) -> Node:
    """Read one YAML document from ``path`` into located nodes."""
    return parse_yaml(read_text(path, error_cls), str(path), error_cls)


def parse_yaml(text: str, source: str, error_cls: type[InputError] = InputError) -> Node:
    """Parse one YAML document; syntax errors, aliases and duplicate keys raise ``error_cls``.
    Parsed by libyaml (PyYAML's C parser: a catalog in a tenth of the time) where it is
    there and may read the text (_plain); any text it refuses, or whose tree is refused, is
    parsed again by the Python parser, whose words every refusal keeps (the two build the
    same tree from every YAML file of the project: a test)."""
    if _C_LOADER is not None and _plain(text):
        try:
            root = yaml.compose(text, Loader=_C_LOADER)
            if root is not None:
                return _convert(root, source, error_cls, set(), 0, "")
        except Exception:   # noqa: BLE001 (refused: the Python parser below says why, as it always has)
            pass
    try:
        root = yaml.compose(text, Loader=yaml.SafeLoader)
    except yaml.MarkedYAMLError as exc:
        mark = exc.problem_mark or exc.context_mark
        line = mark.line + 1 if mark is not None else None
        problem = (exc.problem or exc.context or "invalid YAML").strip()
        raise error_cls(f"is not valid YAML: {problem}", source=source, line=line) from None
    except yaml.reader.ReaderError as exc:
        line = text.count("\n", 0, exc.position) + 1
        what = f"U+{exc.character:04X}" if isinstance(exc.character, int) else repr(exc.character)
        raise error_cls(f"holds the non-printable character {what}, which YAML does not allow; remove it",
                        source=source, line=line) from None
    except RecursionError:
        raise error_cls(f"nests deeper than {_MAX_DEPTH} levels", source=source, line=_too_deep(text)) from None
    except yaml.YAMLError as exc:
        raise error_cls(f"is not valid YAML: {exc.__class__.__name__}", source=source) from None
    if root is None:
        raise error_cls("is empty; expected a YAML mapping of fields", source=source, line=1)
    return _convert(root, source, error_cls, set(), 0, "")


_C_LOADER = getattr(yaml, "CSafeLoader", None)   # (None where PyYAML was built without libyaml)


def _plain(text: str) -> bool:
    """Whether libyaml may read the text: it nests under 1,000 levels (a flow level takes a
    bracket, a block level at least one more column: a bound on libyaml's recursion, far
    inside the C stack), holds no character the Python reader refuses, and none of what
    libyaml takes in places the Python parser refuses or places on other lines (tabs and
    other line breaks, tags, anchors, aliases, complex keys, block scalars, directives,
    document markers, reserved indicators: none is in a catalog partpick ships)."""
    return (not _UNPLAIN.search(text) and not yaml.reader.Reader.NON_PRINTABLE.search(text)
            and text.count("[") + text.count("{") + max(map(len, text.splitlines()), default=0) < 1000)


_UNPLAIN = re.compile("[\t\r!&*?|>@`\x85\u2028\u2029]|^(?:%|---|\\.\\.\\.)", re.MULTILINE)


def _too_deep(text: str) -> int | None:
    """The line where the nesting first passes the limit, found with PyYAML's scanner
    (which does not recurse)."""
    opens = (yaml.BlockMappingStartToken, yaml.BlockSequenceStartToken, yaml.FlowMappingStartToken,
             yaml.FlowSequenceStartToken)
    closes = (yaml.BlockEndToken, yaml.FlowMappingEndToken, yaml.FlowSequenceEndToken)
    depth = 0
    try:
        for token in yaml.scan(text, Loader=yaml.SafeLoader):
            depth += isinstance(token, opens) - isinstance(token, closes)
            if depth > _MAX_DEPTH:
                return token.start_mark.line + 1
    except yaml.YAMLError:
        return None
    return None


def _convert(node: yaml.Node, source: str, error_cls: type[InputError], seen: set, depth: int, path: str) -> Node:
    line = node.start_mark.line + 1
    # A repeated node object means an alias (*name): refused, so one bad anchor
    # cannot blow a small file up into a huge tree.
    if id(node) in seen:
        raise error_cls("YAML anchors and aliases (&name, *name) are not supported; write the value out", source=source, line=line)
    if depth > _MAX_DEPTH:
        raise error_cls(f"nests deeper than {_MAX_DEPTH} levels", source=source, line=line)
    seen.add(id(node))
    if isinstance(node, yaml.ScalarNode):
        bad = next((c for c in node.value if 0xD800 <= ord(c) <= 0xDFFF), None)
        if bad is not None:
            raise error_cls(f"holds a lone surrogate U+{ord(bad):04X} (an escape such as '\\ud83d' that is half of "
                            "a character); write the character itself", source=source, line=line, field=path or None)
        return Scalar(node.value, node.tag, line, quoted=node.style in ("'", '"'))
    if isinstance(node, yaml.SequenceNode):
        return Sequence(tuple(_convert(n, source, error_cls, seen, depth + 1, f"{path}[{i}]")
                              for i, n in enumerate(node.value)), line)
    items: dict = {}
    for key_node, value_node in node.value:
        key_line = key_node.start_mark.line + 1
        if not isinstance(key_node, yaml.ScalarNode):
            raise error_cls("a key must be a plain name", source=source, line=key_line)
        key = key_node.value
        if key in items:
            first = items[key][0]
            raise error_cls(f"duplicate key '{key}' (first on line {first})", source=source, line=key_line,
                            field=f"{path}.{key}" if path else key)
        items[key] = (key_line, _convert(value_node, source, error_cls, seen, depth + 1, f"{path}.{key}" if path else key))
    return Mapping(items, line)


def _kind_name(node: Node) -> str:
    if isinstance(node, Mapping):
        return "a mapping"
    if isinstance(node, Sequence):
        return "a list"
    if node.is_null:
        return "nothing"
    return f"'{node.text}'"


def did_you_mean(word: str, choices: Iterable[str]) -> str:
    """'; did you mean 'x'?' for the closest of ``choices`` (difflib), or ''."""
    close = difflib.get_close_matches(word, list(choices), n=1, cutoff=0.6)
    return f"; did you mean '{close[0]}'?" if close else ""


class Fields:
    """Typed, located access to one YAML mapping.

    Unknown keys are refused when the object is made (with a did-you-mean among
    ``allowed``). Each accessor returns SI floats or plain values and raises
    ``error_cls`` naming file, line and the dotted field path on any bad value.
    """

    def __init__(
        self,
        node: Node,
        source: str,
        error_cls: type[InputError],
        *,
        allowed: Iterable[str],
        prefix: str = "",
        line: int | None = None,
    ) -> None:
        self.source = source
        self.error_cls = error_cls
        self.prefix = prefix
        self.allowed = tuple(allowed)
        if not isinstance(node, Mapping):
            subject = "must" if prefix else "the file must"
            raise error_cls(
                f"{subject} be a mapping of fields ({', '.join(self.allowed)}), got {_kind_name(node)}",
                source=source,
                line=getattr(node, "line", line),
                field=prefix or None,
            )
        self.node = node
        for key, (key_line, _) in node.items.items():
            if key not in self.allowed:
                raise error_cls(
                    f"is not a known field; expected one of {', '.join(self.allowed)}"
                    + did_you_mean(key, self.allowed),
                    source=source,
                    line=key_line,
                    field=self.path(key),
                )

    # -- plumbing ---------------------------------------------------------------
    def path(self, key: str) -> str:
        return f"{self.prefix}.{key}" if self.prefix else key

    def has(self, key: str) -> bool:
        return key in self.node.items and not (
            isinstance(self.node.items[key][1], Scalar) and self.node.items[key][1].is_null
        )

    def line_of(self, key: str) -> int:
        return self.node.items[key][0] if key in self.node.items else self.node.line

    def keys(self) -> Iterator[str]:
        return iter(self.node.items)

    def error(self, key: str | None, message: str, line: int | None = None) -> InputError:
        """An error located at ``key`` (or at this mapping when ``key`` is None)."""
        field = self.path(key) if key else (self.prefix or None)
        where = line if line is not None else (self.line_of(key) if key else self.node.line)
        return self.error_cls(message, source=self.source, line=where, field=field)

    def _get(self, key: str, required: bool) -> Node | None:
        if not self.has(key):
            if required:
                raise self.error(key, "is required", line=self.node.line)
            return None
        return self.node.items[key][1]

    def _scalar(self, key: str, expected: str) -> Scalar:
        node = self.node.items[key][1]
        if not isinstance(node, Scalar):
            raise self.error(key, f"must be {expected}, got {_kind_name(node)}")
        return node

    # -- typed accessors ----------------------------------------------------------
    def quantity(
        self,
        key: str,
        dim: str,
        *,
        default: float | None = None,
        required: bool = True,
        positive: bool = False,
        nonnegative: bool = False,
        bounds: tuple[float, float] | None = None,
    ) -> float | None:
        """A quantity in SI (see :func:`partpick.units.parse_quantity`), within ``bounds``
        (SI, inclusive; for magnitudes that keep the physics in a sane range) when
        given. A fraction must carry its unit: a bare ``0.3`` could mean 0.3 % or 30 %; so
        must an angle (degrees or radians)."""
        if not self.has(key):
            if default is not None or not required:
                return default
            self._get(key, True)
        node = self._scalar(key, f"a {dim.replace('_', ' ')}")
        if node.tag.endswith(":bool"):
            raise self.error(key, f"must be a {dim.replace('_', ' ')}, got '{node.text}'")
        try:
            value = units.parse_quantity(node.text, dim)
        except UnitError as exc:
            raise self.error(key, exc.message) from None
        if dim == "fraction" and node.tag.endswith((":int", ":float")):
            raise self.error(key, f"needs its unit: write '{node.text.strip()} %' or "
                                  f"'{units.format_quantity(value, 'fraction')}' (got bare {node.text.strip()})")
        if dim == "angle" and node.tag.endswith((":int", ":float")):
            raise self.error(key, f"needs its unit: write '{node.text.strip()} deg' or '{node.text.strip()} rad' "
                                  f"(got bare {node.text.strip()})")
        if positive and not value > 0:
            raise self.error(key, f"must be > 0 {units.unit_symbol(dim)} (got {node.text})")
        if nonnegative and not value >= 0:
            raise self.error(key, f"must be >= 0 {units.unit_symbol(dim)} (got {node.text})")
        if bounds is not None and not bounds[0] <= value <= bounds[1]:
            lo, hi = (units.format_quantity(b, dim) for b in bounds)
            raise self.error(key, f"must lie within {lo} .. {hi} (got {node.text})")
        return value

    def number(
        self, key: str, *, default: float | None = None, minimum: float | None = None,
        maximum: float | None = None,
    ) -> float:
        """A plain finite number (a price, an exponent) within [minimum, maximum]."""
        if not self.has(key):
            if default is not None:
                return default
            self._get(key, True)
        node = self._scalar(key, "a number")
        try:
            value = float(node.text.strip().replace("_", ""))
        except ValueError:
            raise self.error(key, f"must be a plain number (got '{node.text}')") from None
        if node.tag.endswith(":bool") or not math.isfinite(value):
            raise self.error(key, f"must be a plain finite number (got '{node.text}')")
        if (minimum is not None and value < minimum) or (maximum is not None and value > maximum):
            lo = "-inf" if minimum is None else f"{minimum:g}"
            hi = "inf" if maximum is None else f"{maximum:g}"
            raise self.error(key, f"must be between {lo} and {hi} (got {node.text})")
        return value

    def amplitude(self, key: str) -> units.Amplitude:
        """An amplitude that keeps its kind (peak, peak-to-peak, rms)."""
        self._get(key, True)
        node = self._scalar(key, "an amplitude like '3 Vrms'")
        try:
            amp = units.parse_amplitude(node.text)
        except UnitError as exc:
            raise self.error(key, exc.message) from None
        if not amp.value_v > 0:
            raise self.error(key, f"must be > 0 V (got {node.text})")
        return amp

    def text(self, key: str, *, choices: Iterable[str] | None = None, default: str | None = None,
             multiline: bool = False) -> str:
        """A plain word (one line of printable text, or several with ``multiline``),
        optionally one of ``choices``."""
        if not self.has(key):
            if default is not None:
                return default
            self._get(key, True)
        node = self._scalar(key, "a name")
        value = node.text.strip()
        if not value:
            raise self.error(key, "must not be empty")
        if not (value.replace("\n", " ").replace("\t", " ") if multiline else value).isprintable():
            raise self.error(key, f"must be one line of printable text (got '{value}')")
        if choices is not None:
            choices = tuple(choices)
            if value not in choices:
                raise self.error(
                    key, f"must be one of {', '.join(choices)} (got '{value}')" + did_you_mean(value, choices)
                )
        return value

    def integer(self, key: str, *, default: int, minimum: int = 0, maximum: int | None = None) -> int:
        """A whole number within [minimum, maximum]."""
        if not self.has(key):
            return default
        node = self._scalar(key, "a whole number")
        try:
            value = int(node.text.strip().replace("_", ""), 10)
        except ValueError:
            raise self.error(key, f"must be a whole number (got '{node.text}')") from None
        if value < minimum or (maximum is not None and value > maximum):
            bound = f">= {minimum}" if maximum is None else f"between {minimum} and {maximum}"
            raise self.error(key, f"must be {bound} (got {value})")
        return value

    def boolean(self, key: str, *, default: bool) -> bool:
        """``true`` or ``false``."""
        if not self.has(key):
            return default
        node = self._scalar(key, "true or false")
        word = node.text.strip().lower()
        if node.quoted or word not in ("true", "false", "yes", "no"):
            raise self.error(key, f"must be true or false (got '{node.text}')")
        return word in ("true", "yes")

    def sub(self, key: str, allowed: Iterable[str], *, required: bool = True) -> "Fields | None":
        """The nested mapping at ``key``."""
        node = self._get(key, required)
        if node is None:
            return None
        return Fields(node, self.source, self.error_cls, allowed=allowed, prefix=self.path(key),
                      line=self.line_of(key))

    def names(self, key: str, *, all_word: str = "all") -> tuple[tuple[str, int], ...] | None:
        """A list of names with their lines, or ``None`` for the word ``all`` (or absent)."""
        if not self.has(key):
            return None
        node = self.node.items[key][1]
        if isinstance(node, Scalar):
            if node.text.strip() == all_word:
                return None
            if not node.text.strip().isprintable():
                raise self.error(key, f"must be a name of printable text (got '{node.text}')")
            return ((node.text.strip(), node.line),) if node.text.strip() else self._names_error(key)
        if isinstance(node, Sequence):
            out = []
            for item in node.items:
                if not isinstance(item, Scalar) or not item.text.strip() or item.is_null:
                    raise self.error(key, f"must list names, got {_kind_name(item)}", line=item.line)
                if not item.text.strip().isprintable():
                    raise self.error(key, f"must list names of printable text (got '{item.text}')", line=item.line)
                out.append((item.text.strip(), item.line))
            return tuple(out)  # an empty list allows nothing of this kind (the search says so)
        return self._names_error(key)

    def _names_error(self, key: str):
        raise self.error(key, "must be 'all' or a list of names")

    def records(self, key: str, allowed: Iterable[str]) -> list["Fields"]:
        """A list of mappings, each checked against ``allowed``."""
        node = self._get(key, False)
        if node is None:
            return []
        if not isinstance(node, Sequence):
            raise self.error(key, f"must be a list of entries, got {_kind_name(node)}")
        allowed = tuple(allowed)
        return [
            Fields(item, self.source, self.error_cls, allowed=allowed, prefix=f"{self.path(key)}[{i}]",
                   line=item.line)
            for i, item in enumerate(node.items)
        ]
