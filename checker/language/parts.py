"""One part statement to a `Part`, checked against the kind table (`checker.kinds`).

Shared with cases: the same functions check a primary value or a property whether
it is declared on the part or overridden by a case. Absent properties are left
absent; the devices fill their defaults.
"""

from __future__ import annotations

from lark import Tree

from checker.design import Part
from checker.errors import DesignError, Location, NodegateError, UnitError, did_you_mean
from checker.kinds import KINDS, VALUE_UNITS, Kind
from checker.language.expressions import Scope, dim_text, evaluate
from checker.language.syntax import Expr, Name, PartStatement, Prop
from checker.units import DIMENSIONLESS, Dim, dim_name, parse_unit


def unknown_kind(kind: Name, blocks) -> DesignError:
    notes = did_you_mean(kind.text, [*KINDS, *blocks]) or (f"part kinds: {', '.join(KINDS)}",)
    return DesignError(f"unknown part kind `{kind.text}`", kind.location, notes)


def ordered_nets(statement: PartStatement, pins: tuple[str, ...], what: str) -> tuple[Name, ...]:
    """The nets of `statement` in the order of `pins`; every pin exactly once."""
    listing = f"{what} has pins ({', '.join(pins)})"
    given: dict[str, Name] = {}
    for pin, net in statement.pins:
        if pin.text in given:
            raise DesignError(f"pin `{pin.text}` is connected twice", pin.location, (listing,))
        if pin.text not in pins:
            raise DesignError(f"{what} has no pin `{pin.text}`", pin.location, did_you_mean(pin.text, pins) + (listing,))
        given[pin.text] = net
    missing = [pin for pin in pins if pin not in given]
    if missing:
        raise DesignError(f"pin {', '.join(f'`{p}`' for p in missing)} not connected",
                          statement.name.location, (listing,))
    if pins == ("from", "to") and given["from"].text == given["to"].text:
        raise DesignError(f"both ends of this {what.split()[-1]} are on net `{given['to'].text}`, so it does nothing",
                          given["to"].location, ("a two-terminal part joins two different nets",))
    return tuple(given[pin] for pin in pins)


def check_form(statement: PartStatement, kind: Kind) -> None:
    """Two-terminal kinds use `from NET to NET`; the others `(PIN: NET, ...)`."""
    if kind.two_terminal and not statement.two_terminal:
        raise DesignError(f"a {kind.name} is written `{kind.name} NAME from NET to NET`", statement.kind.location)
    if statement.two_terminal and not kind.two_terminal:
        pins = ", ".join(f"{p}: NET" for p in kind.pins)
        raise DesignError(f"a {kind.name} is written `{kind.name} NAME ({pins})`", statement.kind.location)


def build_part(statement: PartStatement, kind: Kind, name: str, nets: tuple[str, ...], scope: Scope,
               net_names: tuple[Name, ...] = ()) -> Part:
    """A Part in SI from its statement, with value, flags, properties and tags checked; `net_names`
    are the net tokens as written, in pin order, whose places the part keeps (`Part.spots`)."""
    value = unit = None
    spots = {pin: net.location for pin, net in zip(kind.pins, net_names)}
    flags, tags, props, at = set(), set(), {}, {}
    for index, prop in enumerate(statement.props):
        word = prop.value.bare_word() if prop.key is None else None
        if word is not None and word in kind.flags:
            flags = add_flag(kind, flags, word, prop.location)
        elif prop.key is None and index == 0:
            value, unit = primary_value(kind, prop.value, scope)
            spots["value"] = prop.value.location
        elif prop.key is None:
            raise DesignError("only the first item may be the part's value; write `KEY = VALUE`", prop.location)
        elif prop.key.text == "tag":
            tags.add(tag_word(prop))
        else:
            if prop.key.text in props:
                raise DesignError(f"`{prop.key.text}` is given twice", prop.key.location)
            props[prop.key.text], condition = property_value(kind, prop.key, prop.value, prop.at, scope)
            spots[prop.key.text] = prop.value.location
            if condition is not None:
                at[prop.key.text] = condition
    part = Part(name, kind.name, tuple(zip(kind.pins, nets)), value, unit, frozenset(flags),
                props, at, frozenset(tags), statement.name.location, spots)
    check_complete(kind, part, statement.name.location)
    return part


def add_flag(kind: Kind, flags: set[str], word: str, location: Location) -> set[str]:
    if flags:
        raise DesignError(f"a {kind.name} takes one of {' or '.join(kind.flags)}, not both", location)
    return {word}


def tag_word(prop: Prop) -> str:
    word = prop.value.bare_word()
    if word is None or prop.at is not None:
        raise DesignError("a tag is one word: `tag = WORD`", prop.value.location)
    return word


def primary_value(kind: Kind, expr: Expr, scope: Scope) -> tuple[float, str]:
    """The part's value in SI and its unit name ("ohm", "V", ...), checked against the kind."""
    if not kind.values:
        takes = f"takes {' or '.join(kind.flags)}" if kind.flags else "has no value"
        raise DesignError(f"a {kind.name} {takes}; other items are `KEY = VALUE`", expr.location)
    quantity = evaluate(expr, scope)
    if quantity.dim not in kind.values or quantity.absolute:
        expected = " or ".join(VALUE_UNITS[d] for d in kind.values)
        got = "has no unit" if dim_text(quantity) == "dimensionless" else f"in {dim_text(quantity)}"
        raise UnitError(f"{kind.name} value {got}; expected {expected}", expr.location)
    return quantity.value, VALUE_UNITS[quantity.dim]


def property_value(kind: Kind, key: Name, value: Expr, at: Expr | None, scope: Scope) -> tuple[float, float | None]:
    """A property's SI value (kelvin for temperatures) and its test condition, if written `at`."""
    spec = kind.prop(key.text)
    if spec is None:
        raise DesignError(f"a {kind.name} has no property `{key.text}`", key.location,
                          did_you_mean(key.text, kind.prop_names())
                          + (f"{kind.name} properties: {', '.join(kind.prop_names())}",))
    number = _checked(evaluate(value, scope), spec.dim, spec.temperature, f"`{key.text}`", value)
    if spec.at is None:
        if at is not None:
            raise DesignError(f"`{key.text}` takes no test condition (`at`)", at.location)
        return number, None
    if at is None:
        raise DesignError(f"`{key.text}` needs its test condition: `{key.text} = VALUE at {dim_name(spec.at)}`",
                          value.location)
    return number, _checked(evaluate(at, scope), spec.at, False, f"the test condition of `{key.text}`", at)


def _checked(quantity, dim, temperature: bool, what: str, expr: Expr) -> float:
    if quantity.dim == dim and (temperature or not quantity.absolute):
        return quantity.value
    expected = "a temperature (degC or K)" if temperature else dim_name(dim)
    if dim == DIMENSIONLESS and not temperature:
        expected = "a plain number, %, or ppm"
    got = "has no unit" if dim_text(quantity) == "dimensionless" else f"is in {dim_text(quantity)}"
    slip = _divided_unit(expr, dim)
    if slip is not None:
        raise UnitError(f"{what} {slip[0]}; expected {expected}", expr.location, (slip[1],))
    raise UnitError(f"{what} {got}; expected {expected}", expr.location)


def _divided_unit(expr: Expr, dim: Dim) -> tuple[str, str] | None:
    """`1/4 W` reads as 1 / (4 W), in 1/W: what it came out as and how to write the intended
    value, in the unit as the user wrote it (the SI base units would hide the slip). The
    message names tokens only, so `nodegate fmt` never changes it; the note quotes the source.

    Only for a plain number divided by a number with the expected unit; None otherwise.
    """
    tree = expr.tree
    if tree.data != "div" or not isinstance(tree.children[1], Tree) or tree.children[1].data != "quantity":
        return None
    left, (number, unit) = tree.children[0], tree.children[1].children
    if unit is None or parse_unit(str(unit))[1] != dim:
        return None
    try:
        numerator = evaluate(Expr(left, expr.source), {})
    except NodegateError:  # names or deeper slips: the plain message says enough
        return None
    if numerator.dim != DIMENSIONLESS or numerator.absolute:
        return None
    numerator_text = expr.source.text[left.meta.start_pos:left.meta.end_pos]
    if left.data not in ("quantity", "ref", "call"):
        numerator_text = f"({numerator_text})"
    came_out = f"is in 1/{unit}: the `/` divides by the whole `{number} {unit}`"
    return came_out, f"write `{numerator.value / float(number):.4g} {unit}` or `({numerator_text}/{number}) {unit}`"


def check_complete(kind: Kind, part: Part, location: Location) -> None:
    """What the kind requires: a value, one flag word, required and non-conflicting properties."""
    if kind.values and part.value is None:
        units = " or ".join(VALUE_UNITS[d] for d in kind.values)
        raise DesignError(f"{kind.name} `{part.name}` needs a value in {units}", location)
    if kind.flags and not part.flags:
        raise DesignError(f"{kind.name} `{part.name}` needs {' or '.join(kind.flags)}", location)
    for name in kind.required:
        if name not in part.props:
            raise DesignError(f"{kind.name} `{part.name}` needs `{name}`", location)
    for first, second in kind.exclusive:
        if first in part.props and second in part.props:
            raise DesignError(f"{kind.name} `{part.name}` takes `{first}` or `{second}`, not both", location)
