"""The one error family of partpick.

Every error a user can cause is a :class:`PartpickError`; the CLI turns it into a
single line on stderr and exit code 2 (bad input) or 1 (no design meets the spec).
Subclasses also derive from the matching built-in so library callers can catch
``ValueError`` as usual.
"""

from __future__ import annotations

__all__ = [
    "PartpickError",
    "InputError",
    "UnitError",
    "SpecError",
    "CatalogError",
    "StockError",
    "InfeasibleError",
]


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
        what = f"'{self.field}' " if self.field else ""
        return f"{where}{what}{self.message}"

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
