"""Parse trees to statement records, one small function per grammar rule.

Expressions stay lark trees (wrapped with their Source in `Expr`) and are evaluated
later, in the scope where they are used (a block's let values differ per instance).
Only statements are walked here, so a long expression never recurses in Python.
"""

from __future__ import annotations

from dataclasses import dataclass

from lark import Token, Tree

from checker.errors import CONTROL_CHARACTER, CircuitSyntaxError, DesignError, Location
from checker.kinds import KINDS
from checker.language.source import Source


@dataclass(frozen=True)
class Name:
    text: str
    location: Location


@dataclass(frozen=True)
class Expr:
    tree: Tree
    source: Source

    @property
    def location(self) -> Location:
        return self.source.at(self.tree)

    def bare_word(self) -> str | None:
        """The name when the expression is a single word (`npn`, `open`, a let name)."""
        if self.tree.data == "ref":
            return str(self.tree.children[0])
        return None


@dataclass(frozen=True)
class Prop:
    """`VALUE`, `KEY = VALUE` or `KEY = VALUE at CONDITION` in a property list."""

    key: Name | None
    value: Expr
    at: Expr | None
    location: Location


@dataclass(frozen=True)
class Circuit:
    name: Name
    title: str | None
    location: Location


@dataclass(frozen=True)
class Ground:
    net: Name
    location: Location


@dataclass(frozen=True)
class Let:
    name: Name
    value: Expr
    location: Location


@dataclass(frozen=True)
class Use:
    path: str
    location: Location


@dataclass(frozen=True)
class PartStatement:
    """A part or block instance; `pins` is ((pin, net), ...), from/to for the two-terminal form."""

    kind: Name
    name: Name
    two_terminal: bool
    pins: tuple[tuple[Name, Name], ...]
    props: tuple[Prop, ...]
    location: Location


@dataclass(frozen=True)
class Block:
    name: Name
    ports: tuple[Name, ...]
    body: tuple[Let | PartStatement, ...]
    location: Location


@dataclass(frozen=True)
class Override:
    """One item of a case: `target` is the dotted path (empty for `ambient`); `start` marks
    `NET starts at VALUE`, which picks the stable state nearest that voltage."""

    target: tuple[Name, ...]
    value: Expr | None
    at: Expr | None
    absent: bool
    location: Location
    start: bool = False


@dataclass(frozen=True)
class Case:
    name: Name
    overrides: tuple[Override, ...]
    location: Location


Statement = Circuit | Ground | Let | Use | PartStatement | Block | Case

# Reserved words (docs/language.md, "Names"): these never name a let, part, net, port, block or case.
RESERVED = frozenset(KINDS) | {"circuit", "ground", "let", "use", "block", "case",
                               "from", "to", "absent", "ambient", "starts"}


def declared(name: Name, what: str) -> str:
    """A name being declared, checked against the reserved words."""
    if name.text in RESERVED:
        raise DesignError(f"`{name.text}` is a reserved word and cannot name a {what}", name.location)
    return name.text


def statements(tree: Tree, source: Source) -> list[Statement]:
    """The statements of a parsed file, in order."""
    return [Builder(source).statement(child) for child in tree.children if isinstance(child, Tree)]


class Builder:
    """Dispatch by rule name: `statement` calls the method named like the grammar rule."""

    def __init__(self, source: Source):
        self.source = source

    def statement(self, tree: Tree) -> Statement:
        return getattr(self, tree.data)(tree, self.source.at(tree))

    def name(self, token: Token) -> Name:
        return Name(str(token), self.source.at(token))

    def expr(self, tree: Tree) -> Expr:
        return Expr(tree, self.source)

    def string(self, token: Token) -> str:
        """A title's text; control characters (terminal escapes, bidirectional overrides) are refused,
        since titles are printed in reports. (A `use` path with one names no file and fails as such.)"""
        found = CONTROL_CHARACTER.search(str(token))
        if found is not None:
            where = self.source.at_position(token.line, token.column + found.start())
            raise CircuitSyntaxError(f"a string holds the control character U+{ord(found.group()):04X}", where)
        return str(token)[1:-1]

    def circuit(self, tree: Tree, location: Location) -> Circuit:
        name, title = tree.children
        return Circuit(self.name(name), self.string(title) if title is not None else None, location)

    def ground(self, tree: Tree, location: Location) -> Ground:
        return Ground(self.name(tree.children[0]), location)

    def let(self, tree: Tree, location: Location) -> Let:
        name, value = tree.children
        return Let(self.name(name), self.expr(value), location)

    def use(self, tree: Tree, location: Location) -> Use:
        return Use(str(tree.children[0])[1:-1], self.source.at(tree.children[0]))

    def block(self, tree: Tree, location: Location) -> Block:
        name, ports, *body = tree.children
        names = tuple(self.name(t) for t in ports.children if isinstance(t, Token))
        return Block(self.name(name), names, tuple(self.statement(t) for t in body), location)

    def two_terminal(self, tree: Tree, location: Location) -> PartStatement:
        kind, name, net_from, net_to, props = tree.children
        pins = ((Name("from", self.source.at(net_from)), self.name(net_from)),
                (Name("to", self.source.at(net_to)), self.name(net_to)))
        return PartStatement(self.name(kind), self.name(name), True, pins, self.props(props), location)

    def pinned(self, tree: Tree, location: Location) -> PartStatement:
        kind, name, pins, props = tree.children
        pairs = tuple((self.name(p.children[0]), self.name(p.children[1]))
                      for p in pins.children if isinstance(p, Tree))
        return PartStatement(self.name(kind), self.name(name), False, pairs, self.props(props), location)

    def props(self, tree: Tree | None) -> tuple[Prop, ...]:
        if tree is None:
            return ()
        return tuple(self.prop(item) for item in tree.children)

    def prop(self, tree: Tree) -> Prop:
        location = self.source.at(tree)
        if tree.data == "bare":
            return Prop(None, self.expr(tree.children[0]), None, location)
        key, value, *at = tree.children
        return Prop(self.name(key), self.expr(value), self.expr(at[0]) if at else None, location)

    def case(self, tree: Tree, location: Location) -> Case:
        name, *items = tree.children
        overrides = tuple(self.override(item) for item in items if isinstance(item, Tree))
        return Case(self.name(name), overrides, location)

    def override(self, tree: Tree) -> Override:
        location = self.source.at(tree)
        if tree.data == "set_ambient":
            return Override((), self.expr(tree.children[0]), None, False, location)
        target = tuple(self.name(t) for t in tree.children[0].children)
        if tree.data == "set_absent":
            return Override(target, None, None, True, location)
        if tree.data == "set_start":
            return Override(target, self.expr(tree.children[1]), None, False, location, start=True)
        value, *at = tree.children[1:]
        return Override(target, self.expr(value), self.expr(at[0]) if at else None, False, location)
