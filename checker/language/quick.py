"""A fast path for the commonest statement: a two-terminal part on one line.

Parsing every line with the grammar costs about 100 µs a line, far more than solving the
circuit. Most lines of a large circuit are plain parts such as
`resistor RH1_2 from g1 to g2 : 100 ohm, tol = 1%`, and these are read here with one
regular expression instead. The grammar (`circuit.lark`) stays the definition of the
language: a line is taken here only when

- it stands where a new top-level statement starts (no `(` open, outside a `block`, and the
  line before did not end with `,` or `:`), and
- the whole line matches `LINE` below, a strict subset of the grammar's `two_terminal`
  rule whose tokens are the grammar's own terminals (no keyword where a name stands, the
  same NUMBER and UNIT patterns matched without backtracking).

Every other line is parsed by lark in a copy of the file where the taken lines are blanked
with spaces, so lines, columns and offsets stay those of the file. When that parse fails the
whole file is parsed again by lark alone, so every error is exactly the grammar's.
`QuickPart.tree` rebuilds the lark tree of a taken line: the statement records of the slow
path come from it, and tests/unit/language/test_language_quick.py checks, over generated and
mutated files, that both paths give the same trees, designs and errors.
"""

from __future__ import annotations

import io
import re
from collections.abc import Mapping

from lark import Token, Tree
from lark.tree import Meta

from checker.errors import CircuitSyntaxError, DesignError, Location
from checker.language.parser import parse_tree
from checker.language.source import Source
from checker.language.syntax import Statement, statements, Builder

# The grammar reads about 2,500 lines a second here and holds about 9 KB a line while it does:
# the text it reads for one circuit (all its files) is bounded apart from the quick lines.
MAX_GRAMMAR_BYTES = 8 * 2 ** 20

_WS = r"[\t \f]"
_KEYWORDS = "circuit|ground|let|use|block|case|from|to|at|absent|starts|ambient"
_NAME = rf"(?!(?:{_KEYWORDS})(?![A-Za-z0-9_]))[A-Za-z_][A-Za-z0-9_]*+"
# circuit.lark's NUMBER and UNIT with `\d` written [0-9] (a line with another digit goes to lark),
# each matched atomically as lark's lexer matches one terminal.
_NUMBER = r"(?>(?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)(?:[eE][-+]?[0-9]+)?)"
_SYMBOL = r"[A-Za-z\u00b5\u03bc\u03a9\u2126]"
_UNIT = (rf"(?!(?:{_KEYWORDS})(?![A-Za-z0-9_\u00b5\u03bc\u03a9\u2126]))"
         rf"(?>(?:%|{_SYMBOL}[A-Za-z0-9_\u00b5\u03bc\u03a9\u2126]*)(?:\^-?[0-9]+)?"
         r"(?:[*\/][pnu\u00b5\u03bcmkMGT]?(?:V|A|W|ohm|\u03a9|\u2126|S|F|H|K|s|ppm)(?:\^-?[0-9]+)?)*"
         r"(?![A-Za-z0-9_\u00b5\u03bc\u03a9\u2126]))")


def _value(tag: str) -> str:
    """A quantity (`-20 degC`, `4.7uF`, `5%`) or a name, each part in a group named after `tag`."""
    return (rf"(?:(?P<{tag}neg>-{_WS}*)?(?P<{tag}num>{_NUMBER})(?:{_WS}*(?P<{tag}unit>{_UNIT}))?"
            rf"|(?P<{tag}ref>{_NAME}))")


# `KEY = VALUE [at VALUE]` or a bare `VALUE` (where lark reads a following `at` as a unit).
_ITEM = rf"(?:(?P<key>{_NAME}){_WS}*={_WS}*)?{_value('v')}(?(key)(?:{_WS}+at{_WS}+{_value('a')})?)"
ITEM = re.compile(_ITEM)
# The line's shape; its items (no `#` can stand in them) are then read by ITEM one after another
# (`_items`), which must account for every character of them.
LINE = re.compile(
    rf"{_WS}*(?P<kind>{_NAME}){_WS}+(?P<name>{_NAME}){_WS}+from{_WS}+(?P<a>{_NAME}){_WS}+to{_WS}+(?P<b>{_NAME})"
    rf"(?:{_WS}*:{_WS}*(?P<items>[^#\n]*?))?{_WS}*(?:#[^\n]*)?")
# What moves the state between lines: strings, comments and the structural characters.
_STRUCTURE = re.compile(r'"[^"\n]*"|#|[(){},:]|[^\t \f]')
_SEPARATOR = re.compile(rf"{_WS}*,{_WS}*")


class QuickPart:
    """One part line read without the grammar: the groups of `LINE` and where the line starts."""

    __slots__ = ("kind", "name", "net_from", "net_to", "items", "line", "start", "columns", "source")

    def __init__(self, match: re.Match, line: int, start: int, shared: dict):
        kind, self.name, net_from, net_to, items = match.group("kind", "name", "a", "b", "items")
        # one string for each kind, net and item list however often it is written: the line itself is not kept
        self.kind, self.net_from, self.net_to = (shared.setdefault(kind, kind), shared.setdefault(net_from, net_from),
                                                 shared.setdefault(net_to, net_to))
        self.items = items if items is None else shared.setdefault(items, items)
        self.line, self.start = line, start
        # 1-based columns of kind, name, from net, to net, items
        columns = (match.start("kind") + 1, match.start("name") + 1, match.start("a") + 1,
                   match.start("b") + 1, match.start("items") + 1)
        self.columns = shared.setdefault(columns, columns)
        self.source: Source | None = None

    def column(self, item: re.Match, group: str) -> int:
        """The 1-based column in the line of a group of one of `parsed_items`."""
        return self.columns[4] + item.start(group)

    def at(self, column: int) -> Location:
        """The place of `column` (1-based) on this line."""
        return Location(self.source.path, self.line, column, None, self.source.text, self.start)

    @property
    def location(self) -> Location:
        return self.at(self.columns[0])

    def statement(self):
        """The PartStatement the grammar path makes of this line."""
        return Builder(self.source).statement(self.tree())

    def parsed_items(self) -> list[re.Match]:
        """The items after `:`, each an `ITEM` match over `items` (see `column`)."""
        return [] if self.items is None else _items(self.items)

    def tree(self) -> Tree:
        """The lark tree the grammar gives for this line (`two_terminal`), positions included."""
        tokens = [self._token("NAME", value, column)
                  for value, column in zip((self.kind, self.name, self.net_from, self.net_to), self.columns)]
        props = None
        if self.items is not None:
            props = _tree("props", [self._prop(item) for item in self.parsed_items()])
        return _tree("two_terminal", [*tokens, props])

    def _token(self, kind: str, value: str, column: int) -> Token:
        start = self.start + column - 1
        return Token(kind, value, start, self.line, column, self.line, column + len(value), start + len(value))

    def _prop(self, item: re.Match) -> Tree:
        value = self._expr(item, "v")
        if item.group("key") is None:
            return _tree("bare", [value])
        key = self._token("NAME", item.group("key"), self.column(item, "key"))
        if item.group("anum") is None and item.group("aref") is None:
            return _tree("assign", [key, value])
        return _tree("assign_at", [key, value, self._expr(item, "a")])

    def _expr(self, item: re.Match, tag: str) -> Tree:
        if item.group(tag + "ref") is not None:
            return _tree("ref", [self._token("NAME", item.group(tag + "ref"), self.column(item, tag + "ref"))])
        number = self._token("NUMBER", item.group(tag + "num"), self.column(item, tag + "num"))
        unit = item.group(tag + "unit")
        quantity = _tree("quantity", [number, None if unit is None else
                                      self._token("UNIT", unit, self.column(item, tag + "unit"))])
        if item.group(tag + "neg") is None:
            return quantity
        return _tree("neg", [quantity], self._token("MINUS", "-", self.column(item, tag + "neg")))


def _items(text: str) -> list[re.Match] | None:
    """`ITEM, ITEM, ...` read from the whole of `text`; None when anything else stands in it."""
    found, position, end = [], 0, len(text)
    while True:
        item = ITEM.match(text, position)
        if item is None:
            return None
        found.append(item)
        position = item.end()
        if position == end:
            return found
        separator = _SEPARATOR.match(text, position)
        if separator is None:
            return None
        position = separator.end()


class Spots(Mapping):
    """`Part.spots` of a quick line: the Location of each item, made only when one is asked for
    (a design of a million parts would otherwise hold millions of them)."""

    __slots__ = ("_line", "_keys", "_columns")

    def __init__(self, line: Location, keys: tuple[str, ...], columns: tuple[int, ...]):
        self._line, self._keys, self._columns = line, keys, columns

    def __getitem__(self, key: str) -> Location:
        try:
            column = self._columns[self._keys.index(key)]
        except ValueError:
            raise KeyError(key) from None
        line = self._line
        return Location(line.path, line.line, column, line.given_line, line.text, line.line_start)

    def __iter__(self):
        return iter(self._keys)

    def __len__(self) -> int:
        return len(self._keys)

    def __repr__(self) -> str:
        return repr(dict(self))


def _tree(data: str, children: list, first: Token | None = None) -> Tree:
    """A tree whose position spans its children, as lark's propagate_positions sets it; `first`
    is a token the tree drops but starts at (the `-` of `neg`)."""
    kept = [child for child in children if child is not None]
    meta = Meta()
    first, last = first or kept[0], kept[-1]
    first = first.meta if isinstance(first, Tree) else first
    last = last.meta if isinstance(last, Tree) else last
    meta.line, meta.column, meta.start_pos = first.line, first.column, first.start_pos
    meta.end_line, meta.end_column, meta.end_pos = last.end_line, last.end_column, last.end_pos
    meta.empty = False
    return Tree(data, children, meta)


class OverBudget(Exception):
    """More text than the grammar may read (`MAX_GRAMMAR_BYTES`); `line` is where it ran out."""

    def __init__(self, line: int):
        super().__init__(line)
        self.line = line


def split(text: str, budget: int | None = None) -> tuple[str, list[QuickPart], int]:
    """The text with the quick lines blanked, those lines read, and the characters left to the
    grammar on lines with a statement; OverBudget past `budget` of them. See the module docstring."""
    pieces: list[str] = []
    quick: list[QuickPart] = []
    shared: dict = {}  # strings and column tuples met before, and blank lines by length
    readable: dict[str, bool] = {}  # item lists met before: whether ITEM reads them
    depth = braces = slow = 0
    continued = False
    start = 0
    match_line = LINE.fullmatch
    for number, line in enumerate(io.StringIO(text, newline="\n"), start=1):  # one line at a time
        end = len(line) - 1 if line.endswith("\n") else len(line)
        if not (depth or braces or continued):
            found = match_line(line, 0, end)
            items = None if found is None else found.group("items")
            if items is not None and items not in readable:  # read once for every line repeating them
                readable[items] = _items(items) is not None
            if found is not None and (items is None or readable[items]):
                quick.append(QuickPart(found, number, start, shared))
                blank = (end, len(line))
                pieces.append(shared.get(blank) or shared.setdefault(blank, " " * end + line[end:]))
                start += len(line)
                continue
        pieces.append(line)
        start += len(line)
        counted = False
        for token in _STRUCTURE.finditer(line, 0, end):
            mark = token.group()
            if mark == "#":
                break
            if not counted:  # a line holding a statement (blank and comment lines are one token)
                counted, slow = True, slow + end
                if budget is not None and slow > budget:
                    raise OverBudget(number)
            if mark == "(":
                depth += 1
            elif mark == ")":
                depth = max(depth - 1, 0)
            elif mark == "{":
                braces += 1
            elif mark == "}":
                braces = max(braces - 1, 0)
            continued = mark in (",", ":")
    if not quick:
        return text, quick, slow
    return "".join(pieces), quick, slow


def read(source: Source, budget: int = MAX_GRAMMAR_BYTES) -> tuple[list[Statement | QuickPart], int]:
    """The statements of a file in order, quick lines as QuickPart (see the module docstring), and
    the characters of it the grammar read; a DesignError when they would be more than `budget`."""
    try:
        blanked, quick, size = split(source.text, budget)
    except OverBudget as over:
        raise DesignError(f"more than {MAX_GRAMMAR_BYTES // 2 ** 20} MiB of statements other than one-line parts "
                          "(blocks, lets, cases, parts with pins or on several lines) for one circuit",
                          source.at_position(over.line, 1)) from None
    if not quick:
        return statements(parse_tree(source), source), size
    try:
        tree = parse_tree(Source(source.path, blanked))
    except CircuitSyntaxError:
        tree = parse_tree(source)  # raises the grammar's own error, with its own context
        return statements(tree, source), size  # (never reached while the blanking is sound)
    slow = statements(tree, source)
    for part in quick:
        part.source = source
    merged: list[Statement | QuickPart] = []
    index = 0
    for statement in slow:
        line = statement.location.line
        while index < len(quick) and quick[index].line < line:
            merged.append(quick[index])
            index += 1
        merged.append(statement)
    merged.extend(quick[index:])
    return merged, size
