"""What the command line shows on a terminal only: the progress line and colour.

Colour follows the NO_COLOR convention (no-color.org: set and not empty means no
colour) and appears only when the stream is a terminal; the progress line goes to
stderr, only on a terminal, and is wiped when the work is done.
"""

from __future__ import annotations

import os
import sys

__all__ = ["colour_enabled", "coloured_verdicts", "Progress", "progress"]

_ANSI = {"green": "\x1b[32m", "red": "\x1b[31m"}
_RESET = "\x1b[0m"


def colour_enabled(stream=None) -> bool:
    """Whether to colour what goes to ``stream`` (default stdout)."""
    stream = stream or sys.stdout
    return not os.environ.get("NO_COLOR") and hasattr(stream, "isatty") and stream.isatty()


def coloured_verdicts(text: str) -> str:
    """The words ' pass ' and ' FAIL ' of a table in green and red."""
    for word, colour in (("pass", "green"), ("FAIL", "red")):
        text = text.replace(f" {word} ", f" {_ANSI[colour]}{word}{_RESET} ")
    return text


class Progress:
    """``progress(done, total)`` rewrites one line on ``stream`` (nothing when ``stream``
    is None); :meth:`clear`, or leaving a ``with`` block, wipes it."""

    def __init__(self, what: str, stream) -> None:
        self.what = what
        self.stream = stream
        self.width = 0

    def __enter__(self) -> "Progress":
        return self

    def __exit__(self, *exc) -> bool:
        self.clear()
        return False

    def __call__(self, done: int, total: int) -> None:
        if self.stream is None:
            return
        line = f"{self.what}: {done}/{total}"
        self.width = max(self.width, len(line))
        self.stream.write(f"\r{line}")
        self.stream.flush()

    def clear(self) -> None:
        if self.width:
            self.stream.write("\r" + " " * self.width + "\r")
            self.stream.flush()
            self.width = 0


def progress(enabled: bool, what: str, stream=None) -> Progress:
    """A :class:`Progress` on stderr when ``enabled`` and stderr is a terminal, else a
    silent one."""
    stream = stream or sys.stderr
    shown = enabled and hasattr(stream, "isatty") and stream.isatty()
    return Progress(what, stream if shown else None)
