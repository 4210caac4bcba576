"""Evaluating expressions to SI quantities with checked dimensions.

`+ - * / ^`, `min max abs sqrt`, let names and quantities with units. Dimensions
must agree where physics says so; a mistake is a UnitError at the offending
operand. Temperatures written in degC are absolute (affine): they may be offset by
a difference in K or subtracted from each other (giving K), nothing else
(see `checker.units`).
"""

from __future__ import annotations

import math
from typing import Mapping

from lark import Tree

from checker.errors import DesignError, Location, UnitError, did_you_mean
from checker.language.syntax import Expr
from checker.units import (
    DIMENSIONLESS, PREFIXES, SPELLINGS, UNITS, UNPREFIXED, Quantity, dim_div, dim_mul, dim_name, dim_pow, quantity,
)

MAX_DEPTH = 100  # operators nested in one expression; deeper is an error, never a RecursionError

Scope = Mapping[str, Quantity]

# Other spellings of the micro sign and the ohm sign (NFKC equivalents) -> units.py's.
_FUNCTIONS = ("abs", "max", "min", "sqrt")
_ALL_UNITS = sorted({*UNITS, "degC"} | {p + u for p in PREFIXES for u in UNITS if u not in UNPREFIXED})


def evaluate(expr: Expr, scope: Scope) -> Quantity:
    """The value of `expr` with names looked up in `scope` (SI value, dimension)."""
    _check_depth(expr)
    return _Evaluator(expr, scope).value(expr.tree)


def dim_text(quantity: Quantity) -> str:
    """How a dimension reads in a message: `V`, `dimensionless`, `degC`."""
    return "degC" if quantity.absolute else dim_name(quantity.dim)


def _check_depth(expr: Expr) -> None:
    stack = [(expr.tree, 1)]
    while stack:
        node, depth = stack.pop()
        if depth > MAX_DEPTH:
            raise UnitError(f"expression nested more than {MAX_DEPTH} operators deep", expr.source.at(node))
        stack.extend((child, depth + 1) for child in node.children if isinstance(child, Tree))


class _Evaluator:
    """One method per expression rule of circuit.lark."""

    def __init__(self, expr: Expr, scope: Scope):
        self.source, self.scope = expr.source, scope

    def at(self, node) -> Location:
        return self.source.at(node)

    def value(self, node: Tree) -> Quantity:
        result = getattr(self, node.data)(node)
        if not math.isfinite(result.value):
            raise UnitError("the value is too large to represent", self.at(node))
        return result

    def quantity(self, node: Tree, sign: float = 1.0) -> Quantity:
        number, unit = node.children
        symbol = "" if unit is None else str(unit).translate(SPELLINGS)
        try:
            return quantity(sign * float(number), symbol)
        except ValueError as error:
            raise UnitError(str(error), self.at(unit), did_you_mean(symbol, _ALL_UNITS)) from None
        except OverflowError:
            raise UnitError(f"the unit `{symbol}` is too large to represent", self.at(unit)) from None

    def ref(self, node: Tree) -> Quantity:
        token = node.children[0]
        if str(token) in self.scope:
            return self.scope[str(token)]
        raise DesignError(f"`{token}` is not defined", self.at(token), _undefined_notes(str(token), self.scope))

    def neg(self, node: Tree) -> Quantity:
        child = node.children[0]
        if child.data == "quantity":  # `-20 degC` is a temperature, not minus 20 degC
            return self.quantity(child, -1.0)
        operand = self.value(child)
        self.no_celsius(operand, child, "negate")
        return Quantity(-operand.value, operand.dim)

    def pos(self, node: Tree) -> Quantity:
        return self.value(node.children[0])

    def add(self, node: Tree) -> Quantity:
        left, right = (self.value(c) for c in node.children)
        if left.dim != right.dim or (left.absolute and right.absolute):
            raise UnitError(f"cannot add {dim_text(right)} to {dim_text(left)}", self.at(node.children[1]))
        return Quantity(left.value + right.value, left.dim, left.absolute or right.absolute)

    def sub(self, node: Tree) -> Quantity:
        left, right = (self.value(c) for c in node.children)
        if left.dim != right.dim or (right.absolute and not left.absolute):
            raise UnitError(f"cannot subtract {dim_text(right)} from {dim_text(left)}",
                            self.at(node.children[1]))
        return Quantity(left.value - right.value, left.dim, left.absolute and not right.absolute)

    def mul(self, node: Tree) -> Quantity:
        left, right = self.plain_operands(node, "multiply")
        return Quantity(left.value * right.value, dim_mul(left.dim, right.dim))

    def div(self, node: Tree) -> Quantity:
        left, right = self.plain_operands(node, "divide")
        if right.value == 0:
            raise DesignError("division by zero", self.at(node.children[1]))
        return Quantity(left.value / right.value, dim_div(left.dim, right.dim))

    def pow(self, node: Tree) -> Quantity:
        base, exponent = self.plain_operands(node, "raise")
        if exponent.dim != DIMENSIONLESS:
            raise UnitError(f"an exponent has no unit; got {dim_text(exponent)}", self.at(node.children[1]))
        whole = float(exponent.value).is_integer()
        if base.dim != DIMENSIONLESS and not whole:
            raise UnitError("a quantity with a unit takes only whole powers", self.at(node.children[1]))
        if base.value < 0 and not whole:
            raise DesignError("a negative number has no fractional power", self.at(node.children[0]))
        try:
            value = base.value ** exponent.value
        except (OverflowError, ZeroDivisionError):
            raise UnitError("the value is too large to represent", self.at(node)) from None
        dim = dim_pow(base.dim, int(exponent.value)) if base.dim != DIMENSIONLESS else DIMENSIONLESS
        return Quantity(value, dim)

    def call(self, node: Tree) -> Quantity:
        name, *args = node.children
        if str(name) not in _FUNCTIONS:
            notes = did_you_mean(str(name), _FUNCTIONS) or (f"functions: {', '.join(_FUNCTIONS)}",)
            raise DesignError(f"unknown function `{name}`", self.at(name), notes)
        values = [self.value(arg) for arg in args]
        return getattr(self, "call_" + str(name))(name, args, values)

    def call_min(self, name, args, values) -> Quantity:
        return self.extreme(name, args, values, min)

    def call_max(self, name, args, values) -> Quantity:
        return self.extreme(name, args, values, max)

    def extreme(self, name, args, values, pick) -> Quantity:
        if len(values) < 2:
            raise DesignError(f"`{name}` takes two or more values", self.at(name))
        for arg, value in zip(args[1:], values[1:]):
            if (value.dim, value.absolute) != (values[0].dim, values[0].absolute):
                raise UnitError(f"`{name}` needs values of one unit; got {dim_text(values[0])} and {dim_text(value)}",
                              self.at(arg))
        return pick(values, key=lambda q: q.value)

    def call_abs(self, name, args, values) -> Quantity:
        (value,) = self.one_argument(name, args, values)
        return Quantity(abs(value.value), value.dim)

    def call_sqrt(self, name, args, values) -> Quantity:
        (value,) = self.one_argument(name, args, values)
        if any(exponent % 2 for exponent in value.dim):
            raise UnitError(f"the square root of {dim_text(value)} has no unit", self.at(args[0]))
        if value.value < 0:
            raise DesignError("the square root of a negative value", self.at(args[0]))
        return Quantity(math.sqrt(value.value), tuple(e // 2 for e in value.dim))

    def one_argument(self, name, args, values) -> list[Quantity]:
        if len(values) != 1:
            raise DesignError(f"`{name}` takes one value", self.at(name))
        self.no_celsius(values[0], args[0], f"take `{name}` of")
        return values

    def plain_operands(self, node: Tree, verb: str) -> tuple[Quantity, Quantity]:
        left, right = (self.value(c) for c in node.children)
        for child, operand in zip(node.children, (left, right)):
            self.no_celsius(operand, child, verb)
        return left, right

    def no_celsius(self, operand: Quantity, node, verb: str) -> None:
        if operand.absolute:
            raise UnitError(f"cannot {verb} a temperature in degC; use a difference in K",
                            self.at(node))


def _undefined_notes(name: str, scope: Scope) -> tuple[str, ...]:
    if name in UNITS or name == "degC":
        return ("a unit follows its number: `0.02 V^-1`, `1 kohm`",)
    return did_you_mean(name, scope)
