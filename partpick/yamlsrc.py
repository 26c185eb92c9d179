"""YAML read with line numbers, and typed, located access to its fields.

Every spec, catalog and BOM file goes through here so that any refusal can name the
file, the line and the dotted field (``specs/x.yaml:4: 'frequency.target' ...``).
The YAML is composed (not constructed) with PyYAML's safe loader: partpick reads
the raw scalar text and parses quantities itself (:mod:`partpick.units`), so
``5 kHz`` and ``4k7`` never pass through YAML's own typing.
"""

from __future__ import annotations

import difflib
import math
from dataclasses import dataclass
from pathlib import Path
from typing import Iterable, Iterator

import yaml

from partpick import units
from partpick.errors import InputError, UnitError

__all__ = ["Scalar", "Mapping", "Sequence", "Node", "read_yaml", "parse_yaml", "Fields", "read_text", "did_you_mean"]

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
    """Read a UTF-8 text file; unreadable or undecodable files raise ``error_cls``."""
    source = str(path)
    try:
        data = Path(path).read_bytes()
    except FileNotFoundError:
        raise error_cls("file not found", source=source) from None
    except IsADirectoryError:
        raise error_cls("is a directory, expected a file", source=source) from None
    except OSError as exc:
        raise error_cls(f"cannot read file ({exc.strerror or exc})", source=source) from None
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = data[: exc.start].count(b"\n") + 1
        raise error_cls("is not UTF-8 text", source=source, line=line) from None


def read_yaml(path: str | Path, error_cls: type[InputError] = InputError) -> Node:
    """Read one YAML document from ``path`` into located nodes."""
    return parse_yaml(read_text(path, error_cls), str(path), error_cls)


def parse_yaml(text: str, source: str, error_cls: type[InputError] = InputError) -> Node:
    """Parse one YAML document; syntax errors, aliases and duplicate keys raise ``error_cls``."""
    try:
        root = yaml.compose(text, Loader=yaml.SafeLoader)
    except yaml.MarkedYAMLError as exc:
        mark = exc.problem_mark or exc.context_mark
        line = mark.line + 1 if mark is not None else None
        problem = (exc.problem or exc.context or "invalid YAML").strip()
        raise error_cls(f"is not valid YAML: {problem}", source=source, line=line) from None
    except (yaml.YAMLError, RecursionError) as exc:
        raise error_cls(f"is not valid YAML: {exc.__class__.__name__}", source=source) from None
    if root is None:
        raise error_cls("is empty; expected a YAML mapping of fields", source=source, line=1)
    return _convert(root, source, error_cls, set(), 0)


def _convert(node: yaml.Node, source: str, error_cls: type[InputError], seen: set, depth: int) -> Node:
    line = node.start_mark.line + 1
    # A repeated node object means an alias (*name): refused, so one bad anchor
    # cannot blow a small file up into a huge tree.
    if id(node) in seen:
        raise error_cls("YAML anchors and aliases (&name, *name) are not supported; write the value out", source=source, line=line)
    if depth > _MAX_DEPTH:
        raise error_cls(f"nests deeper than {_MAX_DEPTH} levels", source=source, line=line)
    seen.add(id(node))
    if isinstance(node, yaml.ScalarNode):
        return Scalar(node.value, node.tag, line, quoted=node.style in ("'", '"'))
    if isinstance(node, yaml.SequenceNode):
        return Sequence(tuple(_convert(n, source, error_cls, seen, depth + 1) for n in node.value), line)
    items: dict = {}
    for key_node, value_node in node.value:
        key_line = key_node.start_mark.line + 1
        if not isinstance(key_node, yaml.ScalarNode):
            raise error_cls("a key must be a plain name", source=source, line=key_line)
        key = key_node.value
        if key in items:
            first = items[key][0]
            raise error_cls(f"duplicate key '{key}' (first on line {first})", source=source, line=key_line)
        items[key] = (key_line, _convert(value_node, source, error_cls, seen, depth + 1))
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
    ) -> float | None:
        """A quantity in SI (see :func:`partpick.units.parse_quantity`)."""
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
        if positive and not value > 0:
            raise self.error(key, f"must be > 0 {units.unit_symbol(dim)} (got {node.text})")
        if nonnegative and not value >= 0:
            raise self.error(key, f"must be >= 0 {units.unit_symbol(dim)} (got {node.text})")
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

    def text(self, key: str, *, choices: Iterable[str] | None = None, default: str | None = None) -> str:
        """A plain word, optionally one of ``choices``."""
        if not self.has(key):
            if default is not None:
                return default
            self._get(key, True)
        node = self._scalar(key, "a name")
        value = node.text.strip()
        if not value:
            raise self.error(key, "must not be empty")
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
            return ((node.text.strip(), node.line),) if node.text.strip() else self._names_error(key)
        if isinstance(node, Sequence):
            out = []
            for item in node.items:
                if not isinstance(item, Scalar) or not item.text.strip() or item.is_null:
                    raise self.error(key, f"must list names, got {_kind_name(item)}", line=item.line)
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
