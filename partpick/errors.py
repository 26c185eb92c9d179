"""The one error family of partpick.

Every error a user can cause is a :class:`PartpickError`; the CLI turns it into a
single line on stderr and exit code 2 (bad input) or 1 (no design meets the spec).
Subclasses also derive from the matching built-in so library callers can catch
``ValueError`` as usual.
"""

from __future__ import annotations

import re

__all__ = [
    "one_line",
    "failure",
    "PartpickError",
    "InputError",
    "UnitError",
    "SpecError",
    "CatalogError",
    "StockError",
    "InfeasibleError",
]


_WORD = 64         # a word longer than this in a message is shortened to its ends
_MAX = 1000        # ... and a message longer than this loses its middle
_LONG_WORD = re.compile(r"\S{%d,}" % (_WORD + 1))


def _escape(c: str) -> str:
    if c in "\n\r\t":
        return {"\n": "\\n", "\r": "\\r", "\t": "\\t"}[c]
    code = ord(c)
    return f"\\x{code:02x}" if code < 0x100 else f"\\u{code:04x}"


def one_line(text: str, *, shorten: bool = True) -> str:
    """``text`` safe to print as one line: line breaks, control characters and lone
    surrogates escaped (``\\n``, ``\\x07``, ``\\ud83d``); with ``shorten``, every word over
    64 characters cut to its ends and its length and the whole kept under 1000
    characters, so a 100,000-character value cannot flood the terminal."""
    out = "".join(_escape(c) if (not c.isprintable() and c != " ") or 0xD800 <= ord(c) <= 0xDFFF else c
                  for c in str(text))
    if shorten:
        out = _LONG_WORD.sub(lambda m: f"{m[0][:_WORD - 16]}...{m[0][-8:]} ({len(m[0])} characters)", out)
        if len(out) > _MAX:
            out = f"{out[:_MAX // 2]} ... {out[-_MAX // 2:]} ({len(out)} characters)"
    return out


class PartpickError(Exception):
    """Root of every error partpick raises on purpose."""

    exit_code = 2


class InputError(ValueError, PartpickError):
    """Bad input, located in a source file when it came from one.

    ``source`` is the file path (or ``None``), ``line`` is 1-based (or ``None``),
    ``field`` is the dotted field path (``frequency.target``), ``message`` says
    what was expected and what was found.
    """

    def __init__(
        self,
        message: str,
        *,
        source: str | None = None,
        line: int | None = None,
        column: int | None = None,
        field: str | None = None,
    ) -> None:
        self.message = message
        self.source = source
        self.line = line
        self.column = column
        self.field = field
        super().__init__(self.render())

    def render(self) -> str:
        """``file:line[:column]: 'field' message``, leaving out what is unknown."""
        where = ""
        if self.source is not None:
            where = str(self.source)
            if self.line is not None:
                where += f":{self.line}"
                if self.column is not None:
                    where += f":{self.column}"
            where += ": "
        what = f"'{one_line(self.field)}' " if self.field else ""
        return one_line(where, shorten=False) + what + one_line(self.message)

    def located(
        self, *, source: str | None, line: int | None, field: str | None, column: int | None = None
    ) -> "InputError":
        """The same error placed in a file; keeps what is already known."""
        return type(self)(
            self.message,
            source=self.source or source,
            line=self.line or line,
            column=self.column or column,
            field=self.field or field,
        )


class UnitError(InputError):
    """A quantity that cannot be read in the unit its field needs."""


class SpecError(InputError):
    """A spec file that is not a valid requirement."""


class CatalogError(InputError):
    """A catalog file or family that is not valid, or an unknown family."""


class StockError(InputError):
    """A stock list (CSV) that is not valid."""


class InfeasibleError(PartpickError):
    """No design meets the spec; ``binding`` names the requirements in conflict."""

    exit_code = 1

    def __init__(self, message: str, binding: tuple[str, ...] = ()) -> None:
        self.message = message
        self.binding = binding
        super().__init__(message)


def failure(exc: BaseException) -> tuple[str, int]:
    """The one line and the exit code for an exception that ends a command: partpick's
    own errors as they are (2 bad input, 1 no design), Ctrl-C 130, exhausted memory or
    stack 2, anything else an internal error (3) that names itself as a bug."""
    if isinstance(exc, PartpickError):
        return str(exc), exc.exit_code
    if isinstance(exc, KeyboardInterrupt):
        return "interrupted", 130
    if isinstance(exc, (MemoryError, RecursionError)):
        what = "memory" if isinstance(exc, MemoryError) else "stack"
        return f"ran out of {what}; the input is too large or too deeply nested", 2
    return (f"internal error {type(exc).__name__}: {one_line(str(exc))} (a bug in partpick: please report it with the input; "
            "PARTPICK_DEBUG=1 shows where)", 3)
