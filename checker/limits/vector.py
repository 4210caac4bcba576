"""A check compiled once for many items of an `each` limit, evaluated as numpy arrays.

`checker.limits.compiler` turns a check into a closure of one case's values for one item;
run item by item that costs microseconds per outcome. Here the same syntax tree is
compiled once for a group of items that share a *signature* (kind, whether and in what
unit they have a primary value, the names of their properties, their pins): every name
then resolves the same way and every dimension is the same, so the scalar compile of the
group's first item (which the engine always does, so that every rule error shows at its
token) validates the whole group. The program reads, per case, one array per quantity
(`part.value`, `power(part)`, ...) over the group's items and follows the very rules of
`checker.limits.margins` elementwise, so its numbers are the scalar closures' to the bit:
the same IEEE operations in the same order, Python's `min`/`max` tie rules, `math.pow`
for `^`, and `preferred_value` itself for `preferred`.

Whatever the scalar closure would not simply compute is *trouble*: a part absent in the
case, a division by zero, `sqrt` of a negative number, a `^` without a real result, a
comparison meeting a number that is not finite, a range with swapped ends. An item in
trouble is evaluated by its scalar closure instead (`CompiledItem.outcome`), which skips
it or raises the rule error exactly as before; so is every item of a case in which a
named part or net the check reads is absent. The proof that both paths agree is the
differential test in tests/unit/limits/test_limits_vector.py.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable, Sequence

import numpy as np

from checker.design import Part
from checker.limits import margins
from checker.limits.compiler import Absent, DeclaredValues, Scope, _compile, _volts
from checker.limits.syntax import Binary, Call, Compare, InRange, Logic, Not, Num, Ref, Unary
from checker.limits.vocabulary import PRIMARY
from checker.remedies.series import preferred_value
from checker.units import Dim, display_symbol


def signature(part: Part) -> tuple:
    """What compiling a check for `part` as the item depends on, besides its name and numbers."""
    return (part.kind, part.value is None, part.value_unit, frozenset(part.props), tuple(pin for pin, _ in part.pins))


class Env:
    """One case's values (a CaseValues or DeclaredValues) seen from a group of items; collects trouble."""

    def __init__(self, values, parts: Sequence[Part], names: tuple[str, ...] | None = None):
        self.values = values
        self.names = names or tuple(part.name for part in parts)
        self.n = len(parts)
        self.ambient = values.ambient
        self.trouble = np.zeros(self.n, bool)

    def _cached(self, key, build: Callable):
        cache = self.values.cache
        found = cache.get((self.names, key))
        if found is None:
            found = cache[(self.names, key)] = build()
        return found

    def full(self, number: float) -> np.ndarray:
        return np.full(self.n, number, float)

    def flag(self, mask: np.ndarray) -> None:
        self.trouble |= mask

    def _gather(self, rows: list, read: Callable) -> tuple[np.ndarray, np.ndarray]:
        """read(row) for each row, NaN and a True in the missing mask where the row or the number is missing."""
        numbers = [None if row is None else read(row) for row in rows]
        missing = np.array([number is None for number in numbers], bool)
        found = np.array([math.nan if number is None else number for number in numbers], float)
        return found, missing

    def item_parts(self) -> list:
        parts = self.values.parts
        return self._cached("parts", lambda: [parts.get(name) for name in self.names])

    def item_results(self) -> list:
        results = self.values.results

        def build():
            return [results[name] if name in results else None for name in self.names]
        return self._cached("results", build)

    def item_property(self, prop: str) -> np.ndarray:
        """`part.value` or `part.PROP` of every item, read from the case's own part."""
        if prop == PRIMARY:
            read = _primary
        else:
            def read(part):
                return part.props.get(prop)
        found, missing = self._cached(("property", prop), lambda: self._gather(self.item_parts(), read))
        self.flag(missing)
        return found

    def item_measure(self, what: str) -> np.ndarray:
        """`power`, `voltage` (across) or `current` of every item's result; ("pin", PIN) for a pin's current."""
        if isinstance(what, tuple):
            pin = what[1]

            def read(result):
                return result.pins.get(pin)
        else:
            def read(result):
                return getattr(result, what)
        found, missing = self._cached(("measure", what), lambda: self._gather(self.item_results(), read))
        self.flag(missing)
        return found

    def item_pin_volts(self, nets: tuple[str, ...]) -> np.ndarray:
        """The volts of the net each item's pin is on, where the item is fitted."""
        volts = self.values.nets

        def build():
            rows = self.item_results()
            found = [None if row is None else volts.get(net) for row, net in zip(rows, nets)]
            return (np.array([math.nan if v is None else v for v in found], float),
                    np.array([v is None for v in found], bool))
        found, missing = self._cached(("pin volts", nets), build)
        self.flag(missing)
        return found


def _primary(part: Part):
    return part.value


@dataclass(frozen=True)
class Arrays:
    """A condition's verdict at every item: the scalar Verdict's fields as arrays, the unit as an
    index into the program's `units`."""

    margin: np.ndarray
    value: np.ndarray
    bound: np.ndarray
    holds: np.ndarray
    unit: np.ndarray
    scale: np.ndarray

    def relative(self) -> np.ndarray:
        nonzero = self.scale != 0
        with np.errstate(all="ignore"):
            return np.where(nonzero, self.margin / np.where(nonzero, self.scale, 1.0), 0.0)


class Program:
    """A check (or `where`) compiled for the items `parts`, which share one signature; `scope` is the
    scope of the first of them (its scalar compile validated the tree)."""

    def __init__(self, tree, scope: Scope, parts: Sequence[Part]):
        self.parts = tuple(parts)
        self.names = tuple(part.name for part in self.parts)
        self.units: list[tuple[Dim, bool]] = []
        self.symbols: list[str] = []
        self.declared_trouble = np.zeros(len(self.parts), bool)
        self._fn = _Compiler(self, scope).condition(tree)

    def unit(self, dim: Dim, absolute: bool) -> int:
        key = (dim, absolute)
        if key not in self.units:
            self.units.append(key)
            self.symbols.append(display_symbol(dim))
        return self.units.index(key)

    def run(self, values) -> tuple[Arrays, np.ndarray] | None:
        """The verdicts at `values` and the trouble mask; None when a named part or net is absent."""
        env = Env(values, self.parts, self.names)
        try:
            with np.errstate(all="ignore"):
                found = self._fn(env)
        except Absent:
            return None
        return found, env.trouble | self.declared_trouble


class _Compiler:
    """The rules of `checker.limits.compiler`, on arrays; no validation (the scalar compile did it)."""

    def __init__(self, program: Program, scope: Scope):
        self.program, self.scope = program, scope

    # --- conditions ---

    def condition(self, node) -> Callable:
        if isinstance(node, Compare):
            return self._compare(node)
        if isinstance(node, InRange):
            return self._in_range(node)
        if isinstance(node, Logic):
            return self._logic(node)
        if isinstance(node, Not):
            operand = self.condition(node.operand)

            def negate(env):
                a = operand(env)
                return Arrays(-a.margin, a.value, a.bound, ~a.holds, a.unit, a.scale)
            return negate
        raise TypeError(f"not a condition: {type(node).__name__}")  # the scalar compile rejected it

    def _typed(self, node) -> tuple[Dim, bool]:
        typed = _compile(node, self.scope)
        return typed.dim, typed.absolute

    def _compare(self, node: Compare) -> Callable:
        left, right = self.number(node.left), self.number(node.right)
        dim, absolute = self._typed(node.left)
        unit, below, strict = self.program.unit(dim, absolute), node.op in ("<=", "<"), node.op in ("<", ">")

        def run(env):
            x, y = left(env), right(env)
            env.flag(~(np.isfinite(x) & np.isfinite(y)))
            margin = y - x if below else x - y
            holds = margin > 0 if strict else margin >= 0
            scale = _reference_scale(x, y, env.ambient if absolute else None)
            return Arrays(margin, x, y, holds, np.full(env.n, unit), scale)
        return run

    def _in_range(self, node: InRange) -> Callable:
        value, low, high = (self.number(child) for child in (node.value, node.low, node.high))
        dim, absolute = self._typed(node.value)
        unit = self.program.unit(dim, absolute)

        def run(env):
            x, lo, hi = value(env), low(env), high(env)
            env.flag(~(np.isfinite(x) & np.isfinite(lo) & np.isfinite(hi)) | (lo > hi))
            above, below = x - lo, hi - x
            nearer_low = above <= below
            bound, margin = np.where(nearer_low, lo, hi), np.where(nearer_low, above, below)
            half = (hi - lo) / 2
            scale = np.where(half > 0, half, _reference_scale(x, bound, env.ambient if absolute else None))
            return Arrays(margin, x, bound, margin >= 0, np.full(env.n, unit), scale)
        return run

    def _logic(self, node: Logic) -> Callable:
        left, right = self.condition(node.left), self.condition(node.right)
        conjunction = node.op == "and"

        def run(env):
            a, b = left(env), right(env)
            same = a.unit == b.unit
            ka = np.where(same, a.margin, a.relative())
            kb = np.where(same, b.margin, b.relative())
            if conjunction:  # (ka, a.holds) <= (kb, b.holds), as Python compares tuples
                first = np.where(ka == kb, a.holds <= b.holds, ka <= kb)
                holds = a.holds & b.holds
            else:
                first = np.where(ka == kb, a.holds >= b.holds, ka >= kb)
                holds = a.holds | b.holds
            return Arrays(*(np.where(first, getattr(a, name), getattr(b, name))
                            for name in ("margin", "value", "bound")), holds,
                          np.where(first, a.unit, b.unit), np.where(first, a.scale, b.scale))
        return run

    # --- numbers ---

    def number(self, node) -> Callable:
        if isinstance(node, Num):
            value = node.value
            return lambda env: env.full(value)
        if isinstance(node, Unary):
            operand = self.number(node.operand)
            return operand if node.op == "+" else (lambda env: -operand(env))
        if isinstance(node, Binary):
            return self._binary(node)
        if isinstance(node, Ref):
            return self._ref(node)
        if isinstance(node, Call):
            return self._call(node)
        raise TypeError(f"not a number: {type(node).__name__}")

    def _binary(self, node: Binary) -> Callable:
        left, right, op = self.number(node.left), self.number(node.right), node.op
        if op == "^":
            exponent = _compile(node.right, self.scope).const

            def power(env):
                base = left(env)
                found = np.empty(env.n)
                for i, number in enumerate(base.tolist()):
                    try:
                        found[i] = math.pow(number, exponent)
                    except (OverflowError, ValueError):
                        found[i] = math.nan
                        env.trouble[i] = True
                return found
            return power
        if op == "/":
            def divide(env):
                a, b = left(env), right(env)
                env.flag(b == 0)
                return a / b
            return divide
        function = {"+": np.add, "-": np.subtract, "*": np.multiply}[op]
        return lambda env: function(left(env), right(env))

    def _item(self, ref_names: tuple[str, ...]) -> bool:
        return ref_names[0] == "part" and self.scope.item is not None

    def _ref(self, node: Ref) -> Callable:
        if node.names == ("ambient",):
            return lambda env: env.full(env.ambient)
        used = self.scope.find_part(node)[2]
        prop = node.names[used]
        if self._item(node.names):
            return lambda env: env.item_property(prop)
        read = _compile(node, self.scope).fn
        return lambda env: env.full(read(env.values))

    def _call(self, node: Call) -> Callable:
        if node.name in ("voltage", "current", "power", "junction_temp"):
            return self._measure(node)
        if node.name == "declared":
            return self._declared(node)
        args = [self.number(arg) for arg in node.args]
        if node.name in ("min", "max"):
            smaller = node.name == "min"

            def extreme(env):
                found = args[0](env)
                for arg in args[1:]:  # Python's min/max: a later argument wins only when strictly beyond
                    other = arg(env)
                    found = np.where(other < found if smaller else other > found, other, found)
                return found
            return extreme
        if node.name == "abs":
            return lambda env: np.abs(args[0](env))
        if node.name == "sqrt":
            def root(env):
                number = args[0](env)
                env.flag(number < 0)
                return np.sqrt(number)
            return root
        return self._preferred(*args)

    @staticmethod
    def _preferred(value: Callable, tol: Callable) -> Callable:
        known: dict = {}  # (value, tol) -> the snapped value, kept across cases: the values rarely change

        def snap(env):
            found = np.empty(env.n)
            if len(known) > 100_000:
                known.clear()
            for i, pair in enumerate(zip(value(env).tolist(), tol(env).tolist())):
                if pair not in known:
                    try:
                        known[pair] = preferred_value(*pair)
                    except (ArithmeticError, ValueError):
                        known[pair] = None
                number = known[pair]
                if number is None:
                    env.trouble[i] = True
                found[i] = math.nan if number is None else number
            return found
        return snap

    def _declared(self, node: Call) -> Callable:
        """A constant per item, computed now from the declared parts; an item whose constant the
        arrays cannot give exactly is left to its scalar closure."""
        values = DeclaredValues(self.scope.design)
        env = Env(values, self.program.parts)
        with np.errstate(all="ignore"):
            try:
                found = self.number(node.args[0])(env)
                trouble = env.trouble | ~np.isfinite(found)
            except Absent:  # not for declared parts; kept for safety: every item then runs scalar
                found, trouble = env.full(math.nan), np.ones(env.n, bool)
        self.program.declared_trouble |= trouble
        return lambda env: found

    def _measure(self, node: Call) -> Callable:
        name = node.name
        if name == "voltage" and len(node.args) == 2:
            high, low = (self._volts(ref, across=False) for ref in node.args)
            return lambda env: high(env) - low(env)
        ref = node.args[0]
        if name == "voltage":
            return self._volts(ref, across=True)
        item = self._item(ref.names)
        if name == "junction_temp":
            power = self._power(ref)
            theta = self._ref(Ref((*ref.names, "theta_ja"), (*ref.positions, ref.positions[-1])))
            return lambda env: env.ambient + power(env) * theta(env)
        if name == "power":
            return self._power(ref)
        found = self.scope.find_part(ref)
        pin = ".".join(ref.names[found[2]:]) or None
        if item:
            what = "current" if pin is None else ("pin", pin)
            return lambda env: env.item_measure(what)
        read = _compile(node, self.scope).fn
        return lambda env: env.full(read(env.values))

    def _power(self, ref: Ref) -> Callable:
        if self._item(ref.names):
            return lambda env: env.item_measure("power")
        read = _compile(Call("power", (ref,), ref.pos), self.scope).fn
        return lambda env: env.full(read(env.values))

    def _volts(self, ref: Ref, across: bool) -> Callable:
        if not self._item(ref.names):
            read = _volts(ref, self.scope, across)
            return lambda env: env.full(read(env.values))
        pin = ".".join(ref.names[1:])
        if not pin:
            return lambda env: env.item_measure("voltage")
        nets = tuple(dict(part.pins)[pin] for part in self.program.parts)
        return lambda env: env.item_pin_volts(nets)


def _reference_scale(value: np.ndarray, bound: np.ndarray, ambient: float | None) -> np.ndarray:
    """margins.reference_scale elementwise."""
    size = np.abs(bound)
    plain = np.where(size != 0, size, np.abs(value))  # `abs(bound) or abs(value)`
    if ambient is None:
        return plain
    headroom = np.abs(bound - ambient)
    return np.where(headroom > margins.NO_HEADROOM * size, headroom, plain)
