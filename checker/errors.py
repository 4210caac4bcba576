"""One exception hierarchy for every input problem, each carrying where it was found.

Stages raise these; only the command line (`checker.cli`) catches them, prints them
with `render` and turns them into exit code 2. Anything else escaping is a bug
(exit 3).
"""

from __future__ import annotations

import difflib
from dataclasses import dataclass
from pathlib import Path


@dataclass(frozen=True)
class Location:
    """A place in an input file; line and column are 1-based.

    `source_line` may carry the text of the line when the file is not on disk
    (text given in memory); otherwise `render` reads it from `path`.
    """

    path: str
    line: int
    column: int = 1
    source_line: str | None = None

    def __str__(self) -> str:
        return f"{self.path}:{self.line}:{self.column}"


class NodegateError(Exception):
    """Input that cannot be checked. Exit code 2 at the command line."""

    kind = "error"

    def __init__(self, message: str, location: Location | None = None, notes: tuple[str, ...] = ()):
        super().__init__(message)
        self.message = message
        self.location = location
        self.notes = tuple(notes)


class CircuitSyntaxError(NodegateError):
    """Text that does not follow the grammar of a circuit file."""


class UnitError(NodegateError):
    """A quantity with the wrong dimension, or an operation mixing dimensions."""


class DesignError(NodegateError):
    """A well-formed file describing an impossible design: unknown names, wrong pins, `use` cycles."""


class NoSolutionError(NodegateError):
    """A circuit with no DC operating point: floating nets, source loops, cut sets, no convergence."""


class ConfigError(NodegateError):
    """A problem in `nodegate.yaml`."""


class LimitError(NodegateError):
    """A problem in a limits file or a `check` expression."""


def _source_line(location: Location) -> str | None:
    if location.source_line is not None:
        return location.source_line
    try:
        with open(Path(location.path), encoding="utf-8", errors="replace") as handle:
            for number, line in enumerate(handle, start=1):
                if number == location.line:
                    return line.rstrip("\r\n")
    except OSError:
        return None
    return None


def render(error: NodegateError) -> str:
    """`path:line:col: error: message`, then the source line and a caret under the column."""
    loc = error.location
    if loc is None:
        lines = [f"nodegate: error: {error.message}"]
    else:
        lines = [f"{loc}: error: {error.message}"]
        text = _source_line(loc)
        if text is not None:
            shown = text.expandtabs(1)
            lines.append(f"  {shown}")
            lines.append("  " + " " * max(loc.column - 1, 0) + "^")
    lines.extend(f"  note: {note}" for note in error.notes)
    return "\n".join(lines)



def nearest(word: str, choices) -> str | None:
    """The choice most like a mistyped `word`, for "did you mean" hints; None when nothing is close."""
    found = difflib.get_close_matches(str(word), [str(c) for c in choices], n=1, cutoff=0.6)
    return found[0] if found else None


def did_you_mean(word: str, choices) -> tuple[str, ...]:
    """A one-note tuple `did you mean `x`?` when some choice is close, else ()."""
    close = nearest(word, choices)
    return (f"did you mean `{close}`?",) if close else ()
