"""The canonical layout of circuit files, as `nodegate fmt` writes them.

The rules are our own, chosen so that a pull-request diff shows one changed line per
changed value; docs/language.md, "Canonical layout (`nodegate fmt`)", states them.

The text is parsed first with the real parser, so a file that does not parse is
never rewritten and its error is the parser's own. Layout then works on the file's
tokens: only the whitespace between them and the spelling of units (`Ω` -> `ohm`,
`µ` -> `u`) change, never a token, never a line break inside a statement. Before
returning, the result is read again and must give the same tokens and comments.
"""

from __future__ import annotations

import bisect
import re
from dataclasses import dataclass

from lark import Token, Tree

from checker.errors import NodegateError
from checker.language.files import text_source
from checker.language.parser import parse_tree
from checker.language.source import Source

# The formatter reads the whole file with the grammar (about 10,000 lines a second): it takes
# hand-written files, not the generated ones the checker itself reads up to MAX_FILE_BYTES.
MAX_FORMAT_BYTES = 2 * 1024 * 1024

__all__ = ["format_circuit"]

INDENT = 4  # spaces: a block body, and a continuation that starts right after `(` or `:`
COMMENT_GAP = 2  # spaces between the longest code line of a group and its trailing comments

_PARTS = ("two_terminal", "pinned")  # grammar rules of the part statement (circuit.lark)
_UNIT_SPELLING = {"\u00b5": "u", "\u03bc": "u", "\u03a9": "ohm", "\u2126": "ohm"}
# Everything but units, which the parse tree pins down (a word after a number is a unit,
# and `10 V/ratio` divides by a name). NUMBER is the grammar's own pattern.
_SCAN = re.compile(r"""
    (?P<space>[ \t\f]+) | (?P<newline>\r?\n) | (?P<comment>\#[^\n]*) | (?P<string>"[^"\n]*")
  | (?P<number>(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][-+]?\d+)?) | (?P<word>[A-Za-z_][A-Za-z0-9_]*)
  | (?P<punct>[(),:={}+\-*/^.])""", re.VERBOSE)


@dataclass(frozen=True)
class _Token:
    kind: str  # "word", "number", "unit", "string" or "punct"
    text: str
    line: int  # 1-based line in the source
    pos: int  # offset in the source text


@dataclass(frozen=True)
class _Line:
    """One output line; trailing comments of one group share a column."""

    code: str
    comment: str | None = None
    group: int = 0


def format_circuit(text: str, path: str = "<text>") -> str:
    """The canonical text of a circuit file; the parser's located error when it does not parse.

    `path` is shown in error messages. Formatting is idempotent and keeps the design:
    the result elaborates to the same parts, values and cases.
    """
    source = text_source(text, path, MAX_FORMAT_BYTES)
    tree, tokens, comments = _read(source)
    layout = _Layout(tokens, comments)
    layout.scope([c for c in tree.children if isinstance(c, Tree)], 1, len(source.lines), 0)
    formatted = layout.text()
    _verify(tokens, comments, Source(path, formatted))
    return formatted


def _read(source: Source) -> tuple[Tree, list[_Token], dict[int, str]]:
    """The parse tree, the code tokens in order, and each line's comment (trailing blanks dropped)."""
    tree = parse_tree(source)
    units = _unit_spans(tree)
    # As the parser reads it: a final line end added, `\r` allowed before `\n` (circuit.lark, _NL).
    text, tokens, comments, line, pos = source.text + "\n", [], {}, 1, 0
    while pos < len(text):
        if pos in units:
            tokens.append(_Token("unit", _spell_unit(text[pos:units[pos]]), line, pos))
            pos = units[pos]
            continue
        match = _SCAN.match(text, pos)
        if match is None:
            raise RuntimeError(f"nodegate fmt cannot read parsed text at offset {pos}")
        kind = match.lastgroup
        if kind == "newline":
            line += 1
        elif kind == "comment":
            comments[line] = match.group().rstrip()
        elif kind != "space":
            tokens.append(_Token(kind, match.group(), line, pos))
        pos = match.end()
    return tree, tokens, comments


def _unit_spans(tree: Tree) -> dict[int, int]:
    """Start -> end offsets of every UNIT token; iterative, as expressions may nest deeply."""
    spans, stack = {}, [tree]
    while stack:
        for child in stack.pop().children:
            if isinstance(child, Tree):
                stack.append(child)
            elif isinstance(child, Token) and child.type == "UNIT":
                spans[child.start_pos] = child.end_pos
    return spans


def _spell_unit(unit: str) -> str:
    """The ASCII spelling: `µ`/`μ` -> `u`, `Ω`/`Ω` -> `ohm` (docs/language.md, Quantities)."""
    for symbol, ascii_form in _UNIT_SPELLING.items():
        unit = unit.replace(symbol, ascii_form)
    return unit


def _verify(tokens: list[_Token], comments: dict[int, str], formatted: Source) -> None:
    """Refuse, as a bug, any layout whose text reads back differently: a file is never corrupted."""
    try:
        _, after, after_comments = _read(formatted)
    except NodegateError as error:
        raise RuntimeError(f"nodegate fmt produced text that does not parse ({error.message})") from None
    if [(t.kind, t.text) for t in after] != [(t.kind, t.text) for t in tokens] or \
            list(after_comments.values()) != list(comments.values()):
        raise RuntimeError("nodegate fmt changed a token or a comment while laying out the file")


class _Layout:
    """Collects output lines scope by scope (the file, then each block body)."""

    def __init__(self, tokens: list[_Token], comments: dict[int, str]):
        self.tokens, self.comments = tokens, comments
        self.starts = [t.pos for t in tokens]
        self.code_lines = {t.line for t in tokens}
        self.lines: list[_Line] = []
        self.groups = 0

    def text(self) -> str:
        columns: dict[int, int] = {}
        for line in self.lines:
            if line.comment is not None:
                columns[line.group] = max(columns.get(line.group, 0), len(line.code) + COMMENT_GAP)
        out = [line.code if line.comment is None else line.code.ljust(columns[line.group]) + line.comment
               for line in self.lines]
        return "\n".join(out) + "\n" if out else ""

    def scope(self, statements: list[Tree], first: int, last: int, indent: int) -> None:
        """Statements with the comment and blank lines around them, from line `first` to `last`."""
        for run in _runs(_tidy(self._entries(statements, first, last))):
            if run[0] is None:
                self.lines.append(_Line(""))
            elif isinstance(run[0], int):
                self.lines.append(_Line(" " * indent + self.comments[run[0]]))
            elif run[0].data == "block":
                self._block(run[0], indent)
            else:
                self._group(run, indent)

    def _entries(self, statements: list[Tree], first: int, last: int) -> list[Tree | int | None]:
        """Statements, comment lines (their line number) and blank lines (None), in order."""
        found: list[Tree | int | None] = []
        line = first
        for tree in statements:
            found.extend(n if n in self.comments else None for n in range(line, tree.meta.line))
            found.append(tree)
            line = tree.meta.end_line + 1
        found.extend(n if n in self.comments else None for n in range(line, last + 1))
        return found

    def _tokens_of(self, tree: Tree) -> list[_Token]:
        low = bisect.bisect_left(self.starts, tree.meta.start_pos)
        return self.tokens[low:bisect.bisect_left(self.starts, tree.meta.end_pos)]

    def _new_group(self) -> int:
        self.groups += 1
        return self.groups

    def _block(self, tree: Tree, indent: int) -> None:
        tokens = self._tokens_of(tree)
        brace = next(i for i, t in enumerate(tokens) if t.text == "{")
        self._render(tokens[:brace + 1], indent, {}, self._new_group())
        body = [c for c in tree.children if isinstance(c, Tree) and c.data != "ports"]
        self.scope(body, tokens[brace].line + 1, tokens[-1].line - 1, indent + INDENT)
        self._render(tokens[-1:], indent, {}, self._new_group())

    def _group(self, trees: list[Tree], indent: int) -> None:
        """Consecutive parts (or cases) in aligned columns: kind, name, connection, then `:`."""
        group = self._new_group()
        statements = [self._tokens_of(t) for t in trees]
        if _family(trees[0]) == "part":
            ends = [_connection_end(tokens) for tokens in statements]
            kind = indent + max(len(t[0].text) for t in statements)
            name = kind + 1 + max(len(t[1].text) for t in statements)
            widths = [_width(t, 2, end) for t, end in zip(statements, ends) if t[2].line == t[end].line]
            connection = name + 1 + max(widths, default=0)
            for tokens, end in zip(statements, ends):
                pads = {0: kind, 1: name}
                if tokens[2].line == tokens[end].line:
                    pads[end] = connection
                self._render(tokens, indent, pads, group)
        elif _family(trees[0]) == "case":
            name = indent + len("case") + 1 + max(len(t[1].text) for t in statements)
            for tokens in statements:
                self._render(tokens, indent, {1: name}, group)
        else:
            self._render(statements[0], indent, {}, group)

    def _render(self, tokens: list[_Token], indent: int, pads: dict[int, int], group: int) -> None:
        """One statement; the user's line breaks stay, continuations aligned under their anchor.

        An anchor is the column of the first item after an open `(` or after the `:`
        that opens a property list; when that item starts the next line, it is the
        anchor's line indent plus INDENT. `pads[i]` is the column token `i` is padded to.
        """
        spaces = _separators(tokens)
        code, line_indent, anchors, depth = " " * indent, indent, [], 0
        for i, token in enumerate(tokens):
            if i and token.line > tokens[i - 1].line:
                self._end_line(code, tokens[i - 1].line, group)
                line_indent = _continuation(anchors, line_indent)
                self._comment_lines(tokens[i - 1].line + 1, token.line, line_indent)
                code = " " * line_indent
            else:
                code = code.ljust(pads.get(i - 1, 0)) + spaces[i]
            if anchors and anchors[-1][0] is None:
                anchors[-1][0] = len(code)
            code += token.text
            if token.text == "(":
                depth += 1
                anchors.append([None, line_indent])
            elif token.text == ")":
                depth -= 1
                anchors.pop()
            elif token.text == ":" and depth == 0:
                anchors.append([None, line_indent])
        self._end_line(code, tokens[-1].line, group)

    def _end_line(self, code: str, source_line: int, group: int) -> None:
        self.lines.append(_Line(code.rstrip(), self.comments.get(source_line), group))

    def _comment_lines(self, first: int, stop: int, indent: int) -> None:
        """Full-line comments inside a continued statement; blank lines there are dropped."""
        for number in range(first, stop):
            if number in self.comments and number not in self.code_lines:
                self.lines.append(_Line(" " * indent + self.comments[number]))


def _tidy(entries: list[Tree | int | None]) -> list[Tree | int | None]:
    """Runs of blank lines become one; none at the start or the end of a scope."""
    kept: list[Tree | int | None] = []
    for entry in entries:
        if entry is None and (not kept or kept[-1] is None):
            continue
        kept.append(entry)
    if kept and kept[-1] is None:
        kept.pop()
    return kept


def _runs(entries: list[Tree | int | None]) -> list[list]:
    """Entries one by one, except that neighbouring statements of one family form one run."""
    runs: list[list] = []
    for entry in entries:
        previous = runs[-1][0] if runs else None
        if isinstance(entry, Tree) and isinstance(previous, Tree) and _family(entry) \
                and _family(entry) == _family(previous):
            runs[-1].append(entry)
        else:
            runs.append([entry])
    return runs


def _family(tree: Tree) -> str | None:
    """Statements that align with their neighbours: parts with parts, cases with cases."""
    if tree.data in _PARTS:
        return "part"
    return "case" if tree.data == "case" else None


def _connection_end(tokens: list[_Token]) -> int:
    """Index of the last token of `from NET to NET` or of the pin map `( … )` (starting at index 2)."""
    if tokens[2].text == "from":
        return 5
    depth = 0
    for i in range(2, len(tokens)):
        depth += {"(": 1, ")": -1}.get(tokens[i].text, 0)
        if depth == 0:
            return i
    raise RuntimeError("a parsed pin map has no closing `)`")


def _width(tokens: list[_Token], first: int, last: int) -> int:
    """Columns taken by tokens[first..last] laid out on one line."""
    spaces = _separators(tokens)
    return len(tokens[first].text) + sum(len(spaces[i]) + len(tokens[i].text) for i in range(first + 1, last + 1))


def _continuation(anchors: list[list], line_indent: int) -> int:
    """The indent of a continuation line: the innermost anchor's column."""
    if not anchors:
        return line_indent + INDENT
    if anchors[-1][0] is None:
        anchors[-1][0] = anchors[-1][1] + INDENT
    return anchors[-1][0]


def _separators(tokens: list[_Token]) -> list[str]:
    """The space written before each token of a statement (the first gets none)."""
    spaces, depth = [""], 0
    for i in range(1, len(tokens)):
        depth += {"(": 1, ")": -1}.get(tokens[i - 1].text, 0)
        spaces.append(_space(tokens, i, depth))
    return spaces


def _space(tokens: list[_Token], i: int, depth: int) -> str:
    """Single spaces between tokens, except where the layout (docs/language.md) says none.

    None inside `( … )` edges, before `,`, around `.`, after a sign, around `^`, before
    a call's `(`, before a pin's `:`, and between a number and `%`. `^` after a unit
    keeps its spaces: `2 V ^ 2` is (2 V)², while `2 V^2` would be two volts squared.
    """
    before, token = tokens[i - 1], tokens[i]
    if token.text in (",", ")", ".") or before.text in ("(", "."):
        return ""
    if _sign(tokens, i - 1):
        return ""
    if "^" in (before.text, token.text):
        caret = i if token.text == "^" else i - 1
        return " " if tokens[caret - 1].kind == "unit" else ""
    if token.text == "(":
        called = before.kind == "word" and before.text != "at" and i != 2  # index 1 names a part or block
        return "" if called else " "
    if token.text == ":":
        return "" if depth else " "
    if token.kind == "unit" and token.text.startswith("%"):
        return ""
    return " "


def _sign(tokens: list[_Token], j: int) -> bool:
    """Whether tokens[j] is a unary `+` or `-`: it follows an operator, `(`, `,`, `=`, `:` or `at`."""
    if tokens[j].text not in ("+", "-"):
        return False
    before = tokens[j - 1]
    return (before.kind == "punct" and before.text != ")") or (before.kind == "word" and before.text == "at")
