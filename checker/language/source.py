"""The text of one input file and how to point into it.

Every Location made here carries the file's text and where its line starts, so errors
render the same whether the text came from disk or from memory. The text is split into
lines only when a message needs a line by number.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

from checker.errors import Location


@dataclass(frozen=True)
class Source:
    """One file's text (line ends normalised to `\\n`) and the path shown in messages."""

    path: str
    text: str

    @cached_property
    def lines(self) -> tuple[str, ...]:
        return tuple(self.text.split("\n"))

    def at_position(self, line: int, column: int) -> Location:
        """A 1-based line and column, clamped into the file."""
        line = min(max(line, 1), len(self.lines))
        return Location(self.path, line, max(column, 1), self.lines[line - 1])

    def at(self, item) -> Location:
        """The start of a lark Token, or of a Tree (through its meta)."""
        holder = getattr(item, "meta", item)
        try:
            line, column, start = holder.line, holder.column, holder.start_pos
        except AttributeError:  # a tree without position (lark's empty meta)
            return self.at_position(1, 1)
        return Location(self.path, line, column, None, self.text, start - column + 1)

    def end(self) -> Location:
        """Just after the last character of the last non-blank line."""
        for number in range(len(self.lines), 0, -1):
            if self.lines[number - 1].strip():
                return self.at_position(number, len(self.lines[number - 1]) + 1)
        return self.at_position(1, 1)
