"""One exception hierarchy for every input problem, each carrying where it was found.

Stages raise these; only the command line (`checker.cli`) catches them, prints them
with `render` and turns them into exit code 2. Anything else escaping is a bug
(exit 3).
"""

from __future__ import annotations

import difflib
import re
from dataclasses import dataclass, field
from pathlib import Path


@dataclass(frozen=True, slots=True)
class Location:
    """A place in an input file; line and column are 1-based.

    `given_line` may carry the text of the line when the file is not on disk (text
    given in memory). A location made while reading a file instead keeps `text`, the
    whole text of that file shared by every location in it, and `line_start`, the
    offset where its line starts: copying the line into each location made a 200 KB
    one-line file of 100,000 values hold 20 GB. `source_line` cuts the line out only
    when asked; without either, `render` reads it from `path`. Slots keep each one small: a
    design holds one per part.
    """

    path: str
    line: int
    column: int = 1
    given_line: str | None = field(default=None, repr=False, compare=False)
    text: str | None = field(default=None, repr=False, compare=False)
    line_start: int = field(default=0, repr=False, compare=False)

    @property
    def source_line(self) -> str | None:
        """The text of the line (without its line end), or None when only `path` can tell."""
        if self.given_line is not None or self.text is None:
            return self.given_line
        end = self.text.find("\n", self.line_start)
        return self.text[self.line_start:end if end >= 0 else len(self.text)].rstrip("\r")

    def __str__(self) -> str:
        return f"{self.path}:{self.line}:{self.column}"

    def __reduce__(self):
        """Pickled (for worker processes) with its own line only, not the whole text of its file."""
        return Location, (self.path, self.line, self.column, self.source_line)


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


# Shown source lines are cut to this many characters around the column, so a
# minified or generated file cannot flood a CI log with one megabyte-long line.
SHOWN_WIDTH = 120
# Characters that would drive the terminal rather than print: C0/C1 controls other
# than tab and newline (escape sequences, carriage returns) and the bidirectional
# overrides that make text read differently from what it is. Input text that reaches
# reports (titles, `about`, `reason`) is refused when it holds one.
CONTROL_CHARACTER = re.compile("[\x00-\x08\x0b-\x1f\x7f-\x9f\u202a-\u202e\u2066-\u2069]")
# In a one-line message a newline is unprintable too; each is shown as one `?`, so columns stay right.
_UNPRINTABLE = re.compile(f"\n|{CONTROL_CHARACTER.pattern}")


def printable(text: str) -> str:
    """`text` safe to print on a terminal: control characters become `?`, tabs stay."""
    return _UNPRINTABLE.sub("?", text)


def _window(text: str, column: int) -> tuple[str, int]:
    """At most SHOWN_WIDTH characters of `text` around `column` (1-based), and the column within them."""
    if len(text) <= SHOWN_WIDTH:
        return text, column
    start = min(max(column - 1 - SHOWN_WIDTH // 2, 0), len(text) - SHOWN_WIDTH)
    shown = text[start:start + SHOWN_WIDTH]
    if start > 0:
        shown = "…" + shown[1:]
    if start + SHOWN_WIDTH < len(text):
        shown = shown[:-1] + "…"
    return shown, column - start


# The GitHub Actions runner reads every line of a step's output whose text, once leading
# and trailing whitespace is stripped, starts with `::` as a workflow command (an
# annotation, a masked value, a stopped command parser). Echoed input text is shown behind
# this visible marker when it would read as one, so a pull request cannot forge one.
COMMAND_MARKER = "| "


def uncommanding(line: str) -> str:
    """`line` behind COMMAND_MARKER when a CI runner would take it for a workflow command."""
    return COMMAND_MARKER + line if line.strip().startswith("::") else line


def render(error: NodegateError) -> str:
    """`path:line:col: error: message`, then the source line and a caret under the column.

    No line starts a workflow command (see `uncommanding`): a file's path begins the first
    line and its text the second, and both come from the pull request.
    """
    loc = error.location
    if loc is None:
        lines = [f"nodegate: error: {printable(error.message)}"]
    else:
        lines = [uncommanding(f"{printable(str(loc))}: error: {printable(error.message)}")]
        text = _source_line(loc)
        if text is not None:
            shown, column = _window(printable(text).expandtabs(1), loc.column)
            guarded = uncommanding(shown)
            lines.append(f"  {guarded}")
            lines.append("  " + " " * max(column - 1 + len(guarded) - len(shown), 0) + "^")
    lines.extend(f"  note: {printable(note)}" for note in error.notes)
    return "\n".join(lines)


def nearest(word: str, choices) -> str | None:
    """The choice most like a mistyped `word`, for "did you mean" hints; None when nothing is close."""
    found = difflib.get_close_matches(str(word), [str(c) for c in choices], n=1, cutoff=0.6)
    return found[0] if found else None


def did_you_mean(word: str, choices) -> tuple[str, ...]:
    """A one-note tuple `did you mean `x`?` when some choice is close, else ()."""
    close = nearest(word, choices)
    return (f"did you mean `{close}`?",) if close else ()


def shown_path(path: Path | str) -> str:
    """A path as messages show it: relative to the working folder when inside it, so that
    every error of one run (configuration, circuits, limits) names its file the same way."""
    try:
        return str(Path(path).relative_to(Path.cwd()))
    except ValueError:
        return str(path)
