"""A check split into the one-sided comparisons that decide it, for tolerance analysis.

By the margin rules (docs/limits.md, "Margins") every check's margin is a min/max formula
over one-sided margins: `x in lo .. hi` is min(x − lo, hi − x), `and` is min, `or` is
max, `not` swaps the two. `abs`, `min` and `max` inside an expression split the same
way, pushed through `+`, `−` and multiplication by constants with their signs:
`abs(v) <= 20 mV` is min(20 mV − v, 20 mV + v); `min(a, b) <= c` is max(c − a, c − b).
A `Side` is one leaf: a measured quantity (`value`) against a `bound`, its margin
`orient * (bound − value)`. Worst-case analysis drives each side to its own extreme,
because at the centre of a range, the kink of `abs` or an interior extremum the
*margin* of the whole check has no first-order change, while each side does.

Side functions run on numpy arrays (one entry per point of the tolerance box) with
the same values object the scalar closures read (`checker.limits.compiler`); the
check itself was compiled (and so validated) first. `monotone` marks a side that is an
affine combination of net voltages and part currents against constants: in a linear
circuit such a side is linear-fractional in each element value (the bilinear theorem
of network functions; P. M. Lin, "Symbolic Network Analysis", Elsevier 1991, ch. 1 —
chapter from memory), hence monotone in each value, so its extremes over the box lie
on vertices.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Callable

import numpy as np

from checker.limits import margins
from checker.limits.compiler import Scope, _compile
from checker.limits.syntax import Binary, Call, Compare, InRange, Logic, Not, Num, Ref, Unary
from checker.limits.vocabulary import MEASURES, PRIMARY, WHOLE_FUNCTIONS

MAX_SIDES = 64
"""Splitting stops here: an expression with more `abs`/`min`/`max` combinations is one side
(still exact, only no longer split), so a hostile check cannot blow up the work."""

LINEAR_MEASURES = frozenset({"voltage", "current"})
MOVED_PROPERTIES = frozenset({PRIMARY, "vout"})  # what a tolerance moves (checker.analysis.tolerances)

_FLIP = {"min": "max", "max": "min"}


@dataclass(frozen=True)
class Leaf:
    """A smooth piece of a number: a numpy function of the values, its text, and whether it is
    a constant (`const`) or an affine combination of voltages and currents (`linear`)."""

    fn: Callable
    text: str
    linear: bool
    const: float | None = None


@dataclass(frozen=True)
class Node:
    """min or max over children (Leaf/Node for numbers, Side index/Node for conditions)."""

    op: str
    children: tuple


@dataclass(frozen=True)
class Reference:
    """What a side's relative margin is measured against, as for the whole comparison it came from
    (checker.limits.margins): the `window` (low and high ends, whole) of an `in` range, and whether
    it compares absolute temperatures (then the case's ambient sets the headroom)."""

    absolute: bool = False
    window: tuple[Leaf, Leaf] | None = None

    def scale(self, value, bound, values) -> np.ndarray:
        """The reference scale at every point, by the very rules of the scalar Verdict."""
        ambient = values.ambient if self.absolute else None
        if self.window is None:
            rule = np.vectorize(lambda v, b: margins.reference_scale(v, b, ambient), otypes=[float])
            return rule(value, bound)
        rule = np.vectorize(lambda lo, hi, v, b: margins.window_scale(lo, hi, v, b, ambient), otypes=[float])
        return rule(self.window[0].fn(values), self.window[1].fn(values), value, bound)


@dataclass(frozen=True)
class Side:
    """One one-sided comparison: margin = orient * (bound − value), orient +1 for `value <= bound`."""

    value: Leaf
    bound: Leaf
    orient: int
    reference: Reference = Reference()

    @property
    def monotone(self) -> bool:
        return self.value.linear and self.bound.linear

    @property
    def text(self) -> str:
        op = "<=" if self.orient > 0 else ">="
        return f"{self.value.text} {op} {self.bound.text}"

    def margin(self, values) -> np.ndarray:
        return self.orient * (np.asarray(self.bound.fn(values), float) - self.value.fn(values))

    def size(self, values) -> np.ndarray:
        """max(|value|, |bound|): what a change of this side is small against."""
        size = np.maximum(np.abs(np.asarray(self.bound.fn(values), float)), np.abs(self.value.fn(values)))
        return np.broadcast_to(size, _shape(values))  # a constant on both sides (`declared`) too

    def scale(self, values) -> np.ndarray:
        """The relative margin's denominator: at the point where this side decides, the same as the check's."""
        return self.reference.scale(self.value.fn(values), self.bound.fn(values), values)


@dataclass(frozen=True)
class Split:
    """A whole check: its sides and the min/max formula (`tree`, leaves are side indices) joining them."""

    sides: tuple[Side, ...]
    tree: object
    mixed_units: bool  # margins of different units are ranked by relative margin (as `and`/`or` do)

    @property
    def conjunctive(self) -> bool:
        """Only min nodes: the worst margin is the lowest of the sides' own worsts."""
        return "max" not in _ops(self.tree)

    def margins(self, values) -> np.ndarray:
        """(sides, points) margins of every side; NaN (a division by zero, say) counts as −inf."""
        with np.errstate(all="ignore"):
            rows = [np.broadcast_to(np.asarray(s.margin(values), float), _shape(values)) for s in self.sides]
        found = np.array(rows)
        return np.where(np.isnan(found), -np.inf, found)

    def keys(self, values, margins: np.ndarray) -> np.ndarray:
        """What ranks sides: the margin, or the relative margin when the check mixes units."""
        if not self.mixed_units:
            return margins
        with np.errstate(all="ignore"):
            scales = np.array([np.broadcast_to(np.asarray(s.scale(values), float), _shape(values))
                               for s in self.sides])
            relative = np.where(scales > 0, margins / np.where(scales > 0, scales, 1.0), 0.0)
        return np.where(np.isfinite(margins), relative, margins)

    def combine(self, side_keys: np.ndarray) -> np.ndarray:
        """The check's key at every point from the sides' keys (rows)."""
        return _combine(self.tree, side_keys)

    def lower_bound(self, side_lows: np.ndarray) -> float:
        """The lowest key the formula can reach when side i is never below side_lows[i]: min and
        max are monotone, so this bounds the check's worst from below (a proof when the lows are)."""
        return float(_combine(self.tree, side_lows[:, None])[0])


def _shape(values) -> tuple[int, ...]:
    return (getattr(values, "size", 1),)


def _ops(tree) -> set[str]:
    if isinstance(tree, Node):
        return {tree.op}.union(*(_ops(child) for child in tree.children))
    return set()


def _combine(tree, rows: np.ndarray) -> np.ndarray:
    if isinstance(tree, Node):
        parts = np.array([_combine(child, rows) for child in tree.children])
        return parts.min(axis=0) if tree.op == "min" else parts.max(axis=0)
    return rows[tree]


def split_check(tree, scope: Scope) -> Split:
    """The sides of a compiled check (`tree` as parsed, `scope` as it was compiled with)."""
    sides: list[Side] = []
    dims: set = set()
    formula = _condition(tree, scope, sides, dims)
    return Split(tuple(sides), formula, len(dims) > 1)


# --- conditions ----------------------------------------------------------------------------

def _condition(node, scope: Scope, sides: list[Side], dims: set):
    if isinstance(node, Logic):
        op = "min" if node.op == "and" else "max"
        return Node(op, (_condition(node.left, scope, sides, dims), _condition(node.right, scope, sides, dims)))
    if isinstance(node, Not):
        return _negate_condition(_condition(node.operand, scope, sides, dims), sides)
    if isinstance(node, Compare):
        unit = _unit_of(node.left, scope)
        dims.add(unit)
        value, bound = _fitting(_number(node.left, scope), _number(node.right, scope))
        return _pair(value, bound, 1 if node.op in ("<=", "<") else -1, sides, Reference(unit[1]))
    if isinstance(node, InRange):
        unit = _unit_of(node.value, scope)
        dims.add(unit)
        value, low_end, high_end = (_number(child, scope) for child in (node.value, node.low, node.high))
        reference = Reference(unit[1], (_whole(low_end), _whole(high_end)))
        low = _pair(*_fitting(value, low_end), -1, sides, reference)
        high = _pair(*_fitting(value, high_end), 1, sides, reference)
        return Node("min", (low, high))
    raise TypeError(f"not a condition: {type(node).__name__}")  # compile_condition rejected it already


def _unit_of(node, scope: Scope):
    typed = _compile(node, scope)
    return typed.dim, typed.absolute


def _negate_condition(formula, sides: list[Side]):
    """`not`: every side's margin changes sign, and min and max swap."""
    if isinstance(formula, Node):
        return Node(_FLIP[formula.op], tuple(_negate_condition(child, sides) for child in formula.children))
    side = sides[formula]  # every side belongs to one place in the formula: flip it there
    sides[formula] = replace(side, orient=-side.orient)
    return formula


def _fitting(value, bound) -> tuple:
    """Both sides of a comparison, the one with more pieces kept whole when the pairs would pass MAX_SIDES."""
    if len(_leaves(value)) * len(_leaves(bound)) <= MAX_SIDES:
        return value, bound
    return (_whole(value), bound) if len(_leaves(value)) >= len(_leaves(bound)) else (value, _whole(bound))


def _pair(value, bound, orient: int, sides: list[Side], reference: Reference):
    """The formula of orient * (bound − value) over the pieces of value and bound."""
    if isinstance(value, Node):  # the margin falls as value rises (orient +1)
        op = _FLIP[value.op] if orient > 0 else value.op
        return Node(op, tuple(_pair(child, bound, orient, sides, reference) for child in value.children))
    if isinstance(bound, Node):
        op = bound.op if orient > 0 else _FLIP[bound.op]
        return Node(op, tuple(_pair(value, child, orient, sides, reference) for child in bound.children))
    sides.append(Side(value, bound, orient, reference))
    return len(sides) - 1


# --- numbers -------------------------------------------------------------------------------

def _number(node, scope: Scope):
    """A numeric expression as a Leaf, or a min/max Node over Leaves."""
    if isinstance(node, Num):
        return _leaf_of(node, scope, node.unit and f"{node.number:g} {node.unit}" or f"{node.number:g}", True)
    if isinstance(node, Ref):
        moved = node.names[-1] in MOVED_PROPERTIES and node.names != ("ambient",)
        return _leaf_of(node, scope, node.text, not moved)
    if isinstance(node, Call) and node.name in MEASURES:
        text = f"{node.name}({', '.join(arg.text for arg in node.args)})"  # voltage(A, B) too: still net voltages
        return _leaf_of(node, scope, text, node.name in LINEAR_MEASURES)
    if isinstance(node, Call) and node.name in WHOLE_FUNCTIONS:
        texts = (getattr(_number(arg, scope), "text", "\u2026") for arg in node.args)
        return _leaf_of(node, scope, f"{node.name}({', '.join(texts)})", False)
    if isinstance(node, Call):
        args = [_number(arg, scope) for arg in node.args]
        if node.name in ("min", "max"):
            return _bounded(Node(node.name, tuple(args)))
        if node.name == "abs":
            return _bounded(Node("max", (args[0], _negate(args[0]))))
        return _map(args[0], np.sqrt, "sqrt({})")  # sqrt rises: it keeps min and max
    if isinstance(node, Unary):
        operand = _number(node.operand, scope)
        return operand if node.op == "+" else _negate(operand)
    if isinstance(node, Binary):
        return _binary(node, _number(node.left, scope), _number(node.right, scope))
    raise TypeError(f"not a number: {type(node).__name__}")


def _leaf_of(node, scope: Scope, text: str, linear: bool) -> Leaf:
    typed = _compile(node, scope)
    return Leaf(typed.fn, text, linear or typed.const is not None, typed.const)


def _negate(number):
    if isinstance(number, Node):
        return Node(_FLIP[number.op], tuple(_negate(child) for child in number.children))
    fn = number.fn
    const = None if number.const is None else -number.const
    return Leaf(lambda values: -fn(values), f"-({number.text})", number.linear, const)


def _map(number, function: Callable, template: str):
    """A rising function applied to every piece (the min/max structure is kept)."""
    if isinstance(number, Node):
        return Node(number.op, tuple(_map(child, function, template) for child in number.children))
    fn = number.fn
    return Leaf(lambda values: function(fn(values)), template.format(number.text), False)


def _binary(node: Binary, left, right):
    op = node.op
    if op in "+-":
        if op == "-":
            right = _negate(right)
        return _bounded(_sum(left, right, node.op))
    constant = right if op in "/^" else (left if _const(left) is not None else right)
    other = left if constant is right else right
    factor = _const(constant)
    if op in "*/" and factor is not None and factor != 0.0:
        scale = factor if op == "*" else 1.0 / factor
        return _scaled(other, scale, f"{factor:g}")
    return _leaf_op(_whole(left), _whole(right), op)


def _const(number) -> float | None:
    return number.const if isinstance(number, Leaf) else None


def _sum(left, right, op: str):
    if isinstance(left, Node):
        return Node(left.op, tuple(_sum(child, right, op) for child in left.children))
    if isinstance(right, Node):
        return Node(right.op, tuple(_sum(left, child, op) for child in right.children))
    a, b = left.fn, right.fn
    const = left.const + right.const if left.const is not None and right.const is not None else None
    return Leaf(lambda values: a(values) + b(values), f"{left.text} {op} {right.text}", left.linear and right.linear,
                const)


def _scaled(number, scale: float, text: str):
    if isinstance(number, Node):
        op = number.op if scale > 0 else _FLIP[number.op]
        return Node(op, tuple(_scaled(child, scale, text) for child in number.children))
    fn = number.fn
    const = None if number.const is None else number.const * scale
    return Leaf(lambda values: scale * fn(values), f"{text} * ({number.text})", number.linear, const)


_NUMPY_OPS = {"*": np.multiply, "/": np.divide, "^": np.power, "+": np.add, "-": np.subtract}


def _leaf_op(left: Leaf, right: Leaf, op: str) -> Leaf:
    """A product, quotient or power of two pieces: smooth, but no longer affine."""
    a, b, function = left.fn, right.fn, _NUMPY_OPS[op]
    return Leaf(lambda values: function(np.asarray(a(values), float), b(values)),
                f"({left.text}) {op} ({right.text})", False)


def _whole(number) -> Leaf:
    """A min/max formula evaluated as one piece (exact, no longer split)."""
    if isinstance(number, Leaf):
        return number
    pieces = _leaves(number)
    return Leaf(lambda values: _evaluate_number(number, values), _text(number), False,
                None if any(p.const is None for p in pieces) else _evaluate_number(number, None))


def _bounded(number):
    return number if len(_leaves(number)) <= MAX_SIDES else _whole(number)


def _leaves(number) -> list[Leaf]:
    if isinstance(number, Node):
        return [leaf for child in number.children for leaf in _leaves(child)]
    return [number]


def _evaluate_number(number, values):
    if isinstance(number, Node):
        parts = np.array([np.asarray(_evaluate_number(c, values), float) for c in number.children])
        return parts.min(axis=0) if number.op == "min" else parts.max(axis=0)
    return number.const if values is None else number.fn(values)


def _text(number) -> str:
    if isinstance(number, Node):
        return f"{number.op}({', '.join(_text(c) for c in number.children)})"
    return number.text
