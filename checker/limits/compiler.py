"""Compile a parsed check into closures, resolving every name and dimension before solving.

`compile_condition(tree, scope)` walks the syntax tree once for one circuit (and one
item of an `each` limit): names are looked up in the circuit's Design, dimensions are
checked, and the result is a function of the case's values returning a Verdict.
Nothing from the expression reaches Python beyond the measures and properties in
`vocabulary`; an error is a LimitError at the offending token.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable, Mapping

from checker.design import Design, OperatingPoint, Part
from checker.errors import LimitError, did_you_mean
from checker.limits import margins
from checker.limits.syntax import Binary, Call, Compare, InRange, Locator, Logic, Not, Num, Ref, Unary
from checker.limits.vocabulary import FUNCTIONS, MEASURES, PRIMARY, PROPERTIES, property_type
from checker.remedies.series import preferred_value
from checker.units import (
    AMPERE, DIMENSIONLESS, KELVIN, VOLT, WATT, Dim, dim_div, dim_mul, dim_name, dim_pow, parse_unit,
)


class Unresolved(LimitError):
    """A name this circuit does not have: the limit may still apply to another circuit."""


class NoMatch(Exception):
    """A `where` reads a property the part lacks: the part is not selected."""


class Absent(Exception):
    """A part or net the check reads is not fitted in this case: the case is skipped."""


class CaseValues:
    """One case's numbers as the compiled closures read them (built once per operating point)."""

    def __init__(self, op: OperatingPoint):
        self.case = op.case
        self.ambient = op.ambient  # K
        self.nets = op.nets
        self.results = op.parts
        self.parts = op.netlist.part_map
        self.cache: dict = {}  # arrays the vectorised checks read (checker.limits.vector), built once per case


class DeclaredValues:
    """The declared parts of a design, for `where` filters that run before any solving."""

    def __init__(self, design: Design):
        self.case = "(declared values)"
        self.ambient = None  # no case yet: a temperature's relative margin falls back to |bound|
        self.parts = design.part_map
        self.cache: dict = {}


@dataclass(frozen=True)
class Typed:
    """A compiled sub-expression: a number (SI, with dimension) or a condition (a Verdict)."""

    condition: bool
    fn: Callable
    dim: Dim = DIMENSIONLESS
    absolute: bool = False
    const: float | None = None  # known at compile time (literals only)


@dataclass(frozen=True)
class Scope:
    """What names mean while compiling one limit for one circuit and, for `each`, one item.

    `static` compiles a `where`: only properties and literals, and a missing property
    raises NoMatch instead of an error. Build the first with `Scope.of`, then vary
    `item`/`static` with `dataclasses.replace` (the name tables are shared).
    """

    design: Design
    parts: Mapping[str, Part]
    nets: frozenset[str]
    where: Locator
    item: Part | None = None
    static: bool = False

    @classmethod
    def of(cls, design: Design, where: Locator) -> "Scope":
        return cls(design, design.part_map, design.all_nets, where)

    def error(self, message: str, pos: int, notes: tuple[str, ...] = ()) -> LimitError:
        return self.where.error(message, pos, notes)

    def unresolved(self, ref: Ref, what: str, choices) -> Unresolved:
        if ref.names[0] == "part" and self.item is None:
            return Unresolved("`part` names the part being checked only in a limit with `each`",
                              self.where.at(ref.pos))
        notes = did_you_mean(ref.text, choices)
        return Unresolved(f"no {what} `{ref.text}` in circuit `{self.design.name}`", self.where.at(ref.pos), notes)

    def find_part(self, ref: Ref) -> tuple[str, Part, int] | None:
        """The longest leading part of `ref` naming a part (or `part`, the item): name, Part, segments used."""
        if ref.names[0] == "part" and self.item is not None:
            return self.item.name, self.item, 1
        for count in range(len(ref.names), 0, -1):
            name = ".".join(ref.names[:count])
            if name in self.parts:
                return name, self.parts[name], count
        return None


def compile_condition(tree, scope: Scope) -> Callable[[object], margins.Verdict]:
    """The closure of a whole check or where: values of one case -> Verdict. LimitError if it is not a condition."""
    typed = _compile(tree, scope)
    if not typed.condition:
        raise scope.error("a check must be a condition, such as `voltage(out) <= 3.3 V`", tree.pos)
    return typed.fn


def _compile(node, scope: Scope) -> Typed:
    return _RULES[type(node)](node, scope)


def _number(node, scope: Scope, role: str) -> Typed:
    typed = _compile(node, scope)
    if typed.condition:
        raise scope.error(f"{role} needs a number, not a condition", node.pos)
    return typed


def _condition(node, scope: Scope, role: str) -> Typed:
    typed = _compile(node, scope)
    if not typed.condition:
        raise scope.error(f"{role} joins conditions, and this is a number", node.pos)
    return typed


def _describe(typed: Typed) -> str:
    if typed.absolute:
        return "a temperature (degC)"
    if typed.dim == KELVIN:
        return "a temperature difference (K)"
    return dim_name(typed.dim)


# --- numbers ---------------------------------------------------------------------------

def _num(node: Num, scope: Scope) -> Typed:
    value = node.value
    return Typed(False, lambda values: value, node.dim, node.absolute, const=value)


def _unary(node: Unary, scope: Scope) -> Typed:
    operand = _number(node.operand, scope, f"`{node.op}`")
    if node.op == "+":
        return operand
    if operand.absolute:
        raise scope.error("a temperature in degC cannot be negated; subtract it from another temperature", node.pos)
    fn = operand.fn
    const = None if operand.const is None else -operand.const
    return Typed(False, lambda values: -fn(values), operand.dim, const=const)


def _binary(node: Binary, scope: Scope) -> Typed:
    left = _number(node.left, scope, f"`{node.op}`")
    right = _number(node.right, scope, f"`{node.op}`")
    if node.op in "+-":
        dim, absolute = _sum_type(node, left, right, scope)
    elif node.op == "^":
        return _power(node, left, right, scope)
    else:
        if left.absolute or right.absolute:
            raise scope.error(f"a temperature in degC cannot be used with `{node.op}`; "
                              "subtract another temperature first (`T - 25 degC`)", node.pos)
        dim = (dim_mul if node.op == "*" else dim_div)(left.dim, right.dim)
        absolute = False
    return Typed(False, _arith(node, left.fn, right.fn, scope), dim, absolute, _fold(node.op, left, right))


def _sum_type(node: Binary, left: Typed, right: Typed, scope: Scope) -> tuple[Dim, bool]:
    """Dimension of `left ± right`; temperatures in degC follow the affine rules of checker.units."""
    if left.dim != right.dim:
        joined = "add {} to {}" if node.op == "+" else "subtract {} from {}"
        raise scope.error("cannot " + joined.format(_describe(right), _describe(left)), node.pos)
    if left.absolute and right.absolute:
        if node.op == "+":
            raise scope.error("two temperatures in degC cannot be added; add a difference in K", node.pos)
        return KELVIN, False
    if right.absolute and node.op == "-":
        raise scope.error("cannot subtract a temperature in degC from a difference in K", node.pos)
    return left.dim, left.absolute or right.absolute


def _fold(op: str, left: Typed, right: Typed) -> float | None:
    if left.const is None or right.const is None:
        return None
    try:
        return _OPS[op](left.const, right.const)
    except (ArithmeticError, ValueError):
        return None


_OPS = {"+": lambda a, b: a + b, "-": lambda a, b: a - b, "*": lambda a, b: a * b,
        "/": lambda a, b: a / b, "^": math.pow}


def _arith(node: Binary, left: Callable, right: Callable, scope: Scope) -> Callable:
    """The closure of one operator; division by zero and overflow become errors at the operator."""
    op, where = _OPS[node.op], scope.where

    def run(values):
        try:
            return op(left(values), right(values))
        except ZeroDivisionError:
            raise where.error(f"division by zero in case `{values.case}`", node.pos) from None
        except (OverflowError, ValueError):
            raise where.error(f"`{node.op}` has no real result in case `{values.case}`", node.pos) from None
    return run


def _power(node: Binary, base: Typed, exponent: Typed, scope: Scope) -> Typed:
    """`base ^ exponent`: the exponent is a plain number known when the file loads."""
    if exponent.const is None or exponent.dim != DIMENSIONLESS:
        raise scope.error("an exponent must be a plain number such as `2` or `-1`", node.right.pos)
    if base.absolute:
        raise scope.error("a temperature in degC cannot be raised to a power", node.pos)
    power = exponent.const
    if base.dim != DIMENSIONLESS and power != int(power):
        raise scope.error(f"{dim_name(base.dim)} can only be raised to a whole power", node.right.pos)
    dim = dim_pow(base.dim, int(power)) if base.dim != DIMENSIONLESS else DIMENSIONLESS
    return Typed(False, _arith(node, base.fn, exponent.fn, scope), dim, const=_fold("^", base, exponent))


# --- names -----------------------------------------------------------------------------

def _ref(node: Ref, scope: Scope) -> Typed:
    if node.names == ("ambient",):
        if scope.static:
            raise scope.error("`where` chooses parts before any case is solved; it cannot read `ambient`", node.pos)
        return Typed(False, lambda values: values.ambient, KELVIN, True)
    found = scope.find_part(node)
    if found is None:
        if node.text in scope.nets:
            raise scope.error(f"`{node.text}` is a net; its voltage is `voltage({node.text})`", node.pos)
        raise scope.unresolved(node, "part", scope.parts)
    name, part, used = found
    if used == len(node.names):
        raise scope.error(f"`{node.text}` is a part; write `{node.text}.{PRIMARY}` for its value, "
                          f"or a measure such as `power({node.text})`", node.pos)
    if used < len(node.names) - 1:
        raise scope.error(f"`{node.names[used]}` has no `.{node.names[used + 1]}`", node.positions[used + 1])
    return _property(name, part, node.names[used], node.positions[used], scope)


def _property(name: str, part: Part, prop: str, pos: int, scope: Scope) -> Typed:
    """A property of a part, read from the case's own part so that case overrides count."""
    if prop == PRIMARY:
        if part.value is None or part.value_unit is None:
            raise scope.error(f"part `{name}` ({part.kind}) has no primary value", pos)
        _, dim, absolute = parse_unit(part.value_unit)
        return Typed(False, lambda values: _read(values, name).value, dim, absolute)
    if prop not in PROPERTIES:
        raise scope.error(f"unknown property `{prop}`", pos, did_you_mean(prop, (*PROPERTIES, PRIMARY)))
    kind_type = property_type(part.kind, prop)
    if kind_type is None or prop not in part.props:
        if scope.static:
            raise NoMatch(name)
        raise scope.error(f"part `{name}` ({part.kind}) has no property `{prop}`", pos, _property_notes(part, scope))
    dim, absolute = kind_type

    def read(values):
        try:
            return _read(values, name).props[prop]
        except KeyError:
            raise Absent(name) from None
    return Typed(False, read, dim, absolute)


def _property_notes(part: Part, scope: Scope) -> tuple[str, ...]:
    notes = [f"its properties: {', '.join(sorted(part.props)) or 'none'}"]
    if part.location is not None:
        notes.append(f"the part is declared at {part.location}")
    if scope.item is not None:
        notes.append("choose the parts this limit applies to with `where`")
    return tuple(notes)


def _read(values, name: str) -> Part:
    try:
        return values.parts[name]
    except KeyError:
        raise Absent(name) from None


# --- functions and measures ------------------------------------------------------------

def _call(node: Call, scope: Scope) -> Typed:
    if node.name in MEASURES:
        if scope.static:
            raise scope.error(f"`where` chooses parts before any case is solved; it cannot read `{node.name}`", node.pos)
        return _measure(node, scope)
    if node.name not in FUNCTIONS:
        raise scope.error(f"unknown function `{node.name}`", node.pos,
                          did_you_mean(node.name, FUNCTIONS + MEASURES)
                          + (f"functions: {', '.join(FUNCTIONS + MEASURES)}",))
    if node.name == "declared":
        return _declared(node, scope)
    args = [_number(arg, scope, f"`{node.name}`") for arg in node.args]
    if node.name == "preferred":
        return _preferred(node, args, scope)
    if node.name in ("min", "max"):
        return _extreme(node, args, scope)
    if len(args) != 1:
        raise scope.error(f"`{node.name}` takes one argument", node.pos)
    return (_abs if node.name == "abs" else _sqrt)(node, args[0], scope)


def _extreme(node: Call, args: list[Typed], scope: Scope) -> Typed:
    if len(args) < 2:
        raise scope.error(f"`{node.name}` takes two or more arguments", node.pos)
    first = args[0]
    for arg, tree in zip(args[1:], node.args[1:]):
        if (arg.dim, arg.absolute) != (first.dim, first.absolute):
            raise scope.error(f"`{node.name}` mixes {_describe(first)} and {_describe(arg)}", tree.pos)
    pick, fns = (min if node.name == "min" else max), [arg.fn for arg in args]
    consts = [arg.const for arg in args]
    const = pick(consts) if None not in consts else None
    return Typed(False, lambda values: pick(fn(values) for fn in fns), first.dim, first.absolute, const)


def _abs(node: Call, arg: Typed, scope: Scope) -> Typed:
    if arg.absolute:
        raise scope.error("`abs` of a temperature in degC means nothing; take it of a difference", node.pos)
    fn = arg.fn
    return Typed(False, lambda values: abs(fn(values)), arg.dim, const=None if arg.const is None else abs(arg.const))


def _sqrt(node: Call, arg: Typed, scope: Scope) -> Typed:
    if arg.absolute or any(exponent % 2 for exponent in arg.dim):
        raise scope.error(f"`sqrt` of {_describe(arg)} has no unit", node.pos)
    fn, where = arg.fn, scope.where

    def run(values):
        number = fn(values)
        if number < 0:
            raise where.error(f"`sqrt` of a negative number in case `{values.case}`", node.pos)
        return math.sqrt(number)
    return Typed(False, run, tuple(e // 2 for e in arg.dim))


def _preferred(node: Call, args: list[Typed], scope: Scope) -> Typed:
    """`preferred(X, TOL)`: X snapped to the nearest value of the IEC 60063 series made for tolerance TOL
    (docs/remedies.md); X itself when it is on that series."""
    if len(args) != 2:
        raise scope.error("`preferred` takes a value and a tolerance: `preferred(part.value, part.tol)`", node.pos)
    value, tol = args
    if value.absolute:
        raise scope.error("`preferred` of a temperature in degC means nothing", node.pos)
    if tol.dim != DIMENSIONLESS:
        raise scope.error(f"a tolerance is a plain fraction (`part.tol`, `5%`), not {_describe(tol)}",
                          node.args[1].pos)
    fx, ft = value.fn, tol.fn
    const = None if value.const is None or tol.const is None else preferred_value(value.const, tol.const)
    return Typed(False, lambda values: preferred_value(fx(values), ft(values)), value.dim, const=const)


def _declared(node: Call, scope: Scope) -> Typed:
    """`declared(X)`: X with every part at its declared value (no case override, no tolerance), a
    constant known when the file loads; X may read part properties and numbers only."""
    if len(node.args) != 1:
        raise scope.error("`declared` takes one argument, such as `declared(part.value)`", node.pos)
    if not _declared_only(node.args[0]):
        raise scope.error("`declared` reads part properties and numbers only, not a measure or `ambient`", node.pos)
    arg = _number(node.args[0], scope, "`declared`")
    value = arg.fn(DeclaredValues(scope.design))
    return Typed(False, lambda values: value, arg.dim, arg.absolute, const=value)


def _declared_only(node) -> bool:
    if isinstance(node, Call):
        return node.name not in MEASURES and all(_declared_only(arg) for arg in node.args)
    if isinstance(node, Ref):
        return node.names != ("ambient",)
    return all(_declared_only(child) for child in (getattr(node, "left", None), getattr(node, "right", None),
                                                    getattr(node, "operand", None)) if child is not None)


def _measure(node: Call, scope: Scope) -> Typed:
    """A measure of names: one name, or for `voltage` two (a difference, so headroom rules need no subtraction)."""
    arity = (1, 2) if node.name == "voltage" else (1,)
    if len(node.args) not in arity or not all(isinstance(arg, Ref) for arg in node.args):
        usage = ("a net, a part or a pin, or two nets or pins: `voltage(NAME)`, `voltage(A, B)`"
                 if node.name == "voltage" else f"one net or part name: `{node.name}(NAME)`")
        raise scope.error(f"`{node.name}` takes {usage}", node.pos)
    if len(node.args) == 2:
        return _voltage_between(node, scope)
    return _MEASURES[node.name](node.args[0], scope)


def _measured_part(ref: Ref, scope: Scope, measure: str) -> tuple[str, Part, str | None]:
    """The part a measure reads, and the pin for `current(PART.PIN)` or `voltage(PART.PIN)`."""
    found = scope.find_part(ref)
    if found is None:
        raise scope.unresolved(ref, "part", scope.parts)
    name, part, used = found
    pin_names = [pin for pin, _ in part.pins]
    if used == len(ref.names):
        if not part.two_terminal:
            raise scope.error(f"`{measure}` of `{name}` needs a pin: it has pins {', '.join(pin_names)}", ref.pos,
                              (f"write `{measure}({name}.PIN)`",))
        return name, part, None
    pin = ".".join(ref.names[used:])
    if pin not in pin_names:
        raise scope.error(f"part `{name}` has no pin `{pin}`", ref.positions[used],
                          did_you_mean(pin, pin_names) + (f"its pins: {', '.join(pin_names)}",))
    return name, part, pin


def _result(values, name: str):
    try:
        return values.results[name]
    except KeyError:
        raise Absent(name) from None


def _voltage(ref: Ref, scope: Scope) -> Typed:
    """voltage(NET), voltage(PART.PIN): volts to ground; voltage(PART): across a two-terminal part, from -> to."""
    return Typed(False, _volts(ref, scope, across=True), VOLT)


def _voltage_between(node: Call, scope: Scope) -> Typed:
    """voltage(A, B) = voltage(A) - voltage(B) for nets or pins: a regulator's headroom, a transistor's V_DS.

    Still a difference of net voltages, so worst-case analysis treats it as linear (`sides`).
    """
    high, low = (_volts(ref, scope, across=False) for ref in node.args)
    return Typed(False, lambda values: high(values) - low(values), VOLT)


def _volts(ref: Ref, scope: Scope, across: bool) -> Callable:
    """The reader of a net's or a pin's volts to ground; with `across`, also of a two-terminal part's voltage.

    A pin reads the net its part connects it to (cases never rewire), and only in cases
    where the part is fitted, like every other measure of a part.
    """
    if ref.text in scope.nets and not (ref.names[0] == "part" and scope.item is not None):
        return _net_volts(ref.text)
    if scope.find_part(ref) is None:
        raise scope.unresolved(ref, "net or part", scope.nets | scope.parts.keys())
    name, part, pin = _measured_part(ref, scope, "voltage")
    if pin is not None:
        return _pin_volts(name, dict(part.pins)[pin])
    if not across:
        raise scope.error(f"`{ref.text}` is a part: `voltage(A, B)` takes nets or pins", ref.pos,
                          (f"write `voltage({ref.text}.PIN, ...)` or `voltage({ref.text})` for the voltage across it",))
    return lambda values: _result(values, name).voltage


def _pin_volts(name: str, net: str) -> Callable:
    read_net = _net_volts(net)

    def read(values):
        _result(values, name)  # raises Absent where the part is not fitted
        return read_net(values)
    return read


def _net_volts(net: str) -> Callable:
    def read(values):
        try:
            return values.nets[net]
        except KeyError:
            raise Absent(net) from None
    return read


def _current(ref: Ref, scope: Scope) -> Typed:
    """current(PART): through a two-terminal part, from -> to; current(PART.PIN): into that pin."""
    name, _, pin = _measured_part(ref, scope, "current")
    if pin is None:
        return Typed(False, lambda values: _result(values, name).current, AMPERE)
    return Typed(False, lambda values: _result(values, name).pins[pin], AMPERE)


def _power_of(ref: Ref, scope: Scope) -> Typed:
    found = scope.find_part(ref)
    if found is None or found[2] != len(ref.names):
        raise scope.unresolved(ref, "part", scope.parts)
    name = found[0]
    return Typed(False, lambda values: _result(values, name).power, WATT)


def _junction(ref: Ref, scope: Scope) -> Typed:
    """T_J = T_A + P * theta_JA (JEDEC JESD51-2A, 2008: the definition of theta_JA), in kelvin."""
    power = _power_of(ref, scope)
    name, part, _ = scope.find_part(ref)
    theta = _property(name, part, "theta_ja", ref.pos, scope).fn
    read_power = power.fn
    return Typed(False, lambda values: values.ambient + read_power(values) * theta(values), KELVIN, True)


_MEASURES: Mapping[str, Callable] = {"voltage": _voltage, "current": _current, "power": _power_of,
                                     "junction_temp": _junction}


# --- conditions ------------------------------------------------------------------------

def _finite(where: Locator, pos: int, values, *numbers: float) -> None:
    if not all(math.isfinite(number) for number in numbers):
        raise where.error(f"the comparison meets a number that is not finite in case `{values.case}`", pos)


def _compare(node: Compare, scope: Scope) -> Typed:
    left = _number(node.left, scope, f"`{node.op}`")
    right = _number(node.right, scope, f"`{node.op}`")
    if (left.dim, left.absolute) != (right.dim, right.absolute):
        raise scope.error(f"`{node.op}` compares {_describe(left)} with {_describe(right)}", node.pos,
                          ("both sides of a comparison need the same unit",))
    op, a, b, dim, absolute, where = node.op, left.fn, right.fn, left.dim, left.absolute, scope.where

    def run(values):
        x, y = a(values), b(values)
        _finite(where, node.pos, values, x, y)
        return margins.compare(op, x, y, dim, absolute, values.ambient)
    return Typed(True, run, dim, absolute)


def _in_range(node: InRange, scope: Scope) -> Typed:
    parts = [_number(child, scope, "`in`") for child in (node.value, node.low, node.high)]
    value = parts[0]
    for typed, tree in zip(parts[1:], (node.low, node.high)):
        if (typed.dim, typed.absolute) != (value.dim, value.absolute):
            raise scope.error(f"`in` checks {_describe(value)} against {_describe(typed)}", tree.pos,
                              ("the value and both ends of a range need the same unit",))
    x, lo, hi, where = (*(typed.fn for typed in parts), scope.where)

    def run(values):
        numbers = x(values), lo(values), hi(values)
        _finite(where, node.pos, values, *numbers)
        if numbers[1] > numbers[2]:  # a range no value can be in: its ends are swapped
            raise where.error(f"the range's low end is above its high end in case `{values.case}`; "
                              "write `LOW .. HIGH`", node.low.pos)
        return margins.in_range(*numbers, value.dim, value.absolute, values.ambient)
    return Typed(True, run, value.dim, value.absolute)


def _logic(node: Logic, scope: Scope) -> Typed:
    left = _condition(node.left, scope, f"`{node.op}`").fn
    right = _condition(node.right, scope, f"`{node.op}`").fn
    join = margins.both if node.op == "and" else margins.either
    return Typed(True, lambda values: join(left(values), right(values)))


def _not(node: Not, scope: Scope) -> Typed:
    operand = _condition(node.operand, scope, "`not`").fn
    return Typed(True, lambda values: margins.negate(operand(values)))


_RULES: Mapping[type, Callable] = {
    Num: _num, Ref: _ref, Call: _call, Unary: _unary, Binary: _binary,
    Compare: _compare, InRange: _in_range, Logic: _logic, Not: _not,
}
