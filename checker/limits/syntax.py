"""Parse a `check` or `where` string into a small syntax tree, never through Python's eval.

The grammar is `expr.lark` (LALR, contextual lexer). Every node keeps `pos`, the
offset of its deciding token in the string, so that later errors (unknown names,
mismatched units) can point at that token in the YAML file.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from pathlib import Path

import lark

from checker.errors import LimitError, Location
from checker.larkcache import cached_lark
from checker.units import Dim, Quantity, quantity

MAX_LENGTH = 2000  # characters in one expression
MAX_DEPTH = 60  # nesting of the syntax tree


@dataclass(frozen=True)
class Num:
    """A literal: the number as written (a leading `-` folded in), its unit text and its SI quantity.

    The written form is kept so that `-20 degC` converts as -20 + 273.15 K, the very
    float the circuit language makes of the same text (`checker.units.quantity`).
    """

    number: float
    unit: str
    quantity: Quantity
    pos: int

    @property
    def value(self) -> float:
        """SI value; kelvin for temperatures written in degC."""
        return self.quantity.value

    @property
    def dim(self) -> Dim:
        return self.quantity.dim

    @property
    def absolute(self) -> bool:
        return self.quantity.absolute


@dataclass(frozen=True)
class Ref:
    """A dotted name: `vbat`, `R1`, `DIV.RA.tol`, `part.rating`, `ambient`; `positions` per segment."""

    names: tuple[str, ...]
    positions: tuple[int, ...]

    @property
    def pos(self) -> int:
        return self.positions[0]

    @property
    def text(self) -> str:
        return ".".join(self.names)


@dataclass(frozen=True)
class Call:
    name: str
    args: tuple
    pos: int


@dataclass(frozen=True)
class Unary:
    op: str  # "+" | "-"
    operand: object
    pos: int


@dataclass(frozen=True)
class Binary:
    op: str  # "+" "-" "*" "/" "^"
    left: object
    right: object
    pos: int  # the operator


@dataclass(frozen=True)
class Compare:
    op: str  # "<=" "<" ">=" ">"
    left: object
    right: object
    pos: int


@dataclass(frozen=True)
class InRange:
    value: object
    low: object
    high: object
    pos: int  # the `in`


@dataclass(frozen=True)
class Logic:
    op: str  # "and" | "or"
    left: object
    right: object
    pos: int


@dataclass(frozen=True)
class Not:
    operand: object
    pos: int


_GRAMMAR = Path(__file__).with_name("expr.lark")
_PARSER = cached_lark(_GRAMMAR.read_text(encoding="utf-8"), "expr", parser="lalr", lexer="contextual",
                      propagate_positions=True, maybe_placeholders=True)

_NUMBER = re.compile(r"(\d+(?:\.\d+)?|\.\d+)(?:[eE][+-]?\d+)?")

_EXPECTED = {
    "OR": "`or`", "AND": "`and`", "NOT": "`not`", "IN": "`in`", "RANGE": "`..`",
    "COMPARE": "a comparison (`<=`, `<`, `>=`, `>`)", "ADD_OP": "`+` or `-`", "MUL_OP": "`*` or `/`",
    "POW": "`^`", "LPAR": "`(`", "RPAR": "`)`", "COMMA": "`,`", "DOT": "`.`",
    "NAME": "a name", "QUANTITY": "a number", "$END": "the end of the expression",
}


class Locator:
    """Turns an offset inside an expression string into a Location in its file."""

    def __init__(self, text: str, fallback: Location | None):
        self.text = text
        self.fallback = fallback

    def at(self, offset: int) -> Location | None:
        located = getattr(self.text, "location_at", None)
        if located is not None:
            return located(offset)
        if self.fallback is None:
            return None
        return Location(self.fallback.path, self.fallback.line, self.fallback.column + offset,
                        self.fallback.source_line)

    def error(self, message: str, offset: int, notes: tuple[str, ...] = ()) -> LimitError:
        return LimitError(message, self.at(offset), notes)


class _Build(lark.Transformer):
    """One method per grammar rule: lark tree -> the frozen nodes above."""

    def __init__(self, where: Locator):
        super().__init__()
        self.where = where

    def start(self, children):
        return children[0]

    def number(self, children):
        token = children[0]
        text = str(token)
        number_text = _NUMBER.match(text).group(0)
        unit = text[len(number_text):].strip()
        return self.literal(float(number_text), unit, token.start_pos, token.start_pos + text.find(unit))

    def literal(self, number: float, unit: str, pos: int, unit_pos: int) -> Num:
        """A Num in SI; LimitError at the unit when it is not one, at the number when it is too large."""
        try:
            found = quantity(number, unit)
        except ValueError as exc:
            raise self.where.error(str(exc), unit_pos) from None
        except OverflowError:
            raise self.where.error(f"the unit `{unit}` is too large to represent", unit_pos) from None
        if not abs(found.value) < 1e300:
            raise self.where.error("number too large", pos)
        return Num(number, unit, found, pos)

    def ref(self, children):
        names = tuple(str(t) for t in children if t.type == "NAME")
        return Ref(names, tuple(t.start_pos for t in children if t.type == "NAME"))

    def call(self, children):
        name, _, args, _ = children
        return Call(str(name), tuple(args.children) if args is not None else (), name.start_pos)

    def group(self, children):
        return children[1]

    def args(self, children):
        return lark.Tree("args", [c for c in children if not isinstance(c, lark.Token)])

    def sign(self, children):
        op, operand = children
        if isinstance(operand, Num) and op == "-":  # fold: `-20 degC` is 253.15 K, not -(293.15 K)
            return self.literal(-operand.number, operand.unit, op.start_pos, op.start_pos)
        return Unary(str(op), operand, op.start_pos)

    def arith(self, children):
        left, op, right = children
        return Binary(str(op), left, right, op.start_pos)

    def compare(self, children):
        left, op, right = children
        return Compare(str(op), left, right, op.start_pos)

    def in_range(self, children):
        value, op, low, _, high = children
        return InRange(value, low, high, op.start_pos)

    def logic(self, children):
        left, op, right = children
        return Logic(str(op), left, right, op.start_pos)

    def negate(self, children):
        op, operand = children
        return Not(operand, op.start_pos)


def parse_expression(text: str, fallback: Location | None = None) -> object:
    """Parse `text` into a syntax tree; LimitError at the offending character otherwise.

    `text` is best a `LocatedStr` from the YAML loader, so that errors point into the
    file; `fallback` locates a plain string (offsets are added to its column).
    """
    where = Locator(text, fallback)
    if len(text) > MAX_LENGTH:
        raise where.error(f"expression longer than {MAX_LENGTH} characters", MAX_LENGTH)
    if not text.strip():
        raise where.error("empty expression", 0)
    try:
        tree = _PARSER.parse(str(text))
    except lark.exceptions.UnexpectedInput as exc:
        raise _syntax_error(exc, str(text), where) from None
    _check_depth(tree, where)
    try:
        return _Build(where).transform(tree)
    except lark.exceptions.VisitError as exc:  # lark wraps what a rule method raises
        if isinstance(exc.orig_exc, LimitError):
            raise exc.orig_exc from None
        raise


def _check_depth(tree: lark.Tree, where: Locator) -> None:
    """Refuse trees deeper than MAX_DEPTH before any recursive pass walks them."""
    stack = [(tree, 1)]
    while stack:
        node, depth = stack.pop()
        if depth > MAX_DEPTH:
            start = getattr(node.meta, "start_pos", 0) if not node.meta.empty else 0
            raise where.error(f"expression nests deeper than {MAX_DEPTH} levels", start)
        stack.extend((child, depth + 1) for child in node.children if isinstance(child, lark.Tree))


def _syntax_error(exc: lark.exceptions.UnexpectedInput, text: str, where: Locator) -> LimitError:
    """A readable LimitError at the character where parsing stopped."""
    if isinstance(exc, lark.exceptions.UnexpectedCharacters):
        offset = exc.pos_in_stream
        return where.error(f"unexpected character `{text[offset]}`", offset, _expected(exc.allowed))
    if isinstance(exc, lark.exceptions.UnexpectedToken):
        token = exc.token
        if token.type == "$END":
            return where.error("the expression ends too early", len(text.rstrip()), _expected(exc.expected))
        offset = token.start_pos
        if token.type == "NAME" and _after_number(text, offset):
            return where.error(f"unknown unit `{token}`", offset)
        if token.type in ("COMPARE", "IN"):
            return where.error(f"unexpected `{token}`: comparisons do not chain", offset,
                               ("join them with `and`: `a <= b and b <= c`",))
        return where.error(f"unexpected `{token}`", offset, _expected(exc.expected))
    return where.error("the expression ends too early", len(text.rstrip()))


def _after_number(text: str, offset: int) -> bool:
    """True when the name at `offset` follows a number directly, i.e. it was meant as a unit."""
    before = text[:offset].rstrip()
    return bool(before) and (before[-1].isdigit() or before[-1] == ".")


def _expected(names) -> tuple[str, ...]:
    words = sorted({_EXPECTED.get(name, name) for name in names or ()})
    return (f"expected {', '.join(words)}",) if words else ()
