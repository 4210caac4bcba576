"""The vectorised evaluation of `each` limits (checker.limits.vector) against the scalar closures.

Differential: over generated checks, `where` filters, parts of several signatures, case
overrides, absent parts and operating points full of ties, zeros and signed zeros, the
engine's items and their outcomes (`CompiledLimit.outcomes`) must be exactly what compiling
and evaluating each item on its own gives (the path the engine took before): the same items,
the same Outcomes to the bit, the same rule error at the same place.
"""

from __future__ import annotations

import dataclasses
import datetime
from unittest import mock

import pytest
from hypothesis import HealthCheck, given, settings, strategies as st

from checker.design import OperatingPoint, PartResult
from checker.errors import LimitError
from checker.findings import Limit, Outcome
from checker.limits.compiler import CaseValues, DeclaredValues, NoMatch, Scope, compile_condition
from checker.limits.engine import CompiledLimit, _locator, _parse, _selected, compile_limit, evaluate
from checker.limits import LimitSet, engine

from conftest import ROOM, design, part

NUMBERS = [0.0, -0.0, 1.0, -1.0, 0.5, 2.0, 1e-3, 5e-3, 1e-6, 3.3, 1e300, -2.5]

# Typed pieces: (text, unit) with unit one of V, A, W, ohm, "" (plain) and T (an absolute temperature).
LEAVES = {
    "V": ["voltage(part)", "voltage(part.from)", "voltage(part.to, part.from)", "voltage(vin)", "part.vmax",
          "voltage(R0)", "1 V", "0 V", "3.3 V", "-2 V"],
    "A": ["current(part)", "current(part.to)", "current(R1)", "1 mA", "0 A", "-1 mA"],
    "W": ["power(part)", "part.rating", "power(R0)", "1 mW", "0 W"],
    "ohm": ["part.value", "R2.value", "1 kohm", "declared(part.value)", "preferred(part.value, part.tol)",
            "preferred(part.value, 1%)"],
    "": ["part.tol", "1%", "2", "0", "0.5", "declared(part.tol) * 2"],
    "T": ["ambient", "junction_temp(part)", "25 degC", "85 degC", "ambient + power(part) * 100 K/W"],
}
LITERAL = {"V": "0.5 V", "A": "0.2 mA", "W": "0.5 mW", "ohm": "100 ohm", "": "0.25", "T": "10 K"}


@st.composite
def numbers(draw, unit: str, depth: int = 0) -> str:
    leaf = st.sampled_from(LEAVES[unit])
    if depth >= 2:
        return draw(leaf)
    choice = draw(st.integers(0, 9))
    inner = numbers(unit, depth + 1)
    if choice < 4 or unit == "T" and choice > 5:
        return draw(leaf)
    if unit == "T":
        return f"{draw(inner)} {draw(st.sampled_from('+-'))} {LITERAL[unit]}"
    if choice == 4:
        return f"{draw(inner)} {draw(st.sampled_from('+-'))} {draw(inner)}"
    if choice == 5:
        return _call(draw, inner)
    if choice == 6:
        factor = draw(st.sampled_from(["2", "0.5", "-1", "part.tol", "(part.tol - 1%)"]))
        return f"{draw(inner)} {draw(st.sampled_from('*/'))} {factor}"
    if choice == 7 and unit == "":
        return draw(st.sampled_from([f"sqrt({draw(inner)})", f"({draw(inner)}) ^ 2", f"({draw(inner)}) ^ -1",
                                     f"({draw(inner)}) ^ 0.5", f"{draw(numbers('V', depth + 1))} / ("
                                     f"{draw(numbers('V', depth + 1))})"]))
    return f"-({draw(inner)})"


def _call(draw, inner) -> str:
    name = draw(st.sampled_from(["abs", "min", "max"]))
    if name == "abs":
        return f"abs({draw(inner)})"
    return f"{name}({draw(inner)}, {draw(inner)})"


@st.composite
def conditions(draw, depth: int = 0) -> str:
    choice = draw(st.integers(0, 6 if depth < 2 else 3))
    unit = draw(st.sampled_from(sorted(LEAVES)))
    if choice <= 2:
        op = draw(st.sampled_from(["<=", "<", ">=", ">"]))
        return f"{draw(numbers(unit))} {op} {draw(numbers(unit))}"
    if choice == 3:
        return f"{draw(numbers(unit))} in {draw(numbers(unit))} .. {draw(numbers(unit))}"
    if choice == 6:
        return f"not ({draw(conditions(depth + 1))})"
    op = "and" if choice == 4 else "or"
    return f"({draw(conditions(depth + 1))}) {op} ({draw(conditions(depth + 1))})"


WHERES = [None, "part.value >= 1 kohm", "part.rating > 0 W", "part.tol < 2% or part.value < 500 ohm",
          "1 / (part.tol - 1%) > 0", "sqrt(part.tol - 1%) >= 0", "declared(part.value) in 100 ohm .. 10 kohm"]


@st.composite
def boards(draw):
    """Resistors of several signatures (with and without `rating`, `theta_ja`), a tagged capacitor and
    case overrides; a part absent in one case."""
    count = draw(st.integers(5, 12))
    parts = []
    for index in range(count):
        props = {"tol": draw(st.sampled_from([0.01, 0.05, 0.01, 0.0]))}
        if draw(st.booleans()) or index < 3:
            props["rating"] = draw(st.sampled_from([0.001, 0.25, 0.0, 1e-3]))
        if draw(st.booleans()):
            props["vmax"] = draw(st.sampled_from([1.0, 50.0, 0.0]))
        if draw(st.integers(0, 3)) == 0:
            props["theta_ja"] = 100.0
        value = draw(st.sampled_from([100.0, 1000.0, 4700.0, 1000.0, 0.0, 1.1e3]))
        nets = ("vin", f"n{index}") if index % 2 == 0 else (f"n{index - 1}", "gnd")
        parts.append(part(f"R{index}", value=value, unit="ohm", nets=nets, tags=("t",) if index % 3 == 0 else (),
                          **props))
    parts.append(part("C1", kind="capacitor", value=1e-6, unit="F", nets=("vin", "gnd"), tags=("t",),
                      tol=0.1, vmax=10.0))
    absent = {"hot": (f"R{draw(st.integers(0, count - 1))}",)}
    changed = draw(st.sampled_from([p for p in parts if p.kind == "resistor"]))
    overrides = {"cold": {changed.name: dataclasses.replace(changed, value=2 * changed.value)}}
    return design(parts, cases=(("cold", 253.15), ("room", ROOM), ("hot", 358.15)), absent=absent,
                  overrides=overrides)


def points(board, draw_number):
    """One operating point per case, from drawn numbers (ties and signed zeros included)."""
    found = []
    for netlist in board.netlists:
        nets = {net: draw_number() for net in netlist.nets}
        nets[netlist.ground] = 0.0
        results = {}
        for p in netlist.parts:
            current = draw_number()
            results[p.name] = PartResult(draw_number(), {"from": current, "to": -current},
                                         nets[p.net("from")] - nets[p.net("to")], current)
        found.append(OperatingPoint(netlist, nets, results))
    return found


def _reference_items(limit: Limit, board) -> list:
    """The items as the engine compiled them one by one: [(part name, closure)] or the error."""
    check_tree, where_tree = _parse(limit)
    scope = Scope.of(board, _locator(limit.check, limit))
    where_scope = dataclasses.replace(scope, where=_locator(limit.where or "", limit), static=True)
    items = []
    for p in board.parts:
        if not _selected(p, limit.each):
            continue
        if where_tree is not None:
            try:
                if not compile_condition(where_tree, dataclasses.replace(where_scope, item=p))(
                        DeclaredValues(board)).holds:
                    continue
            except NoMatch:
                continue
        items.append((p.name, compile_condition(check_tree, dataclasses.replace(scope, item=p))))
    return items


def _error(error: LimitError) -> tuple:
    return type(error), error.message, str(error.location), error.notes


def _scalar(check, values):
    from checker.limits.compiler import Absent
    try:
        return check(values).outcome(values.case)
    except Absent:
        return None


def _same(outcome, expected) -> None:
    assert outcome == expected
    if outcome is not None:  # to the bit: signed zeros too, and every field an Outcome has
        assert repr(outcome) == repr(expected)
        assert set(vars(outcome)) == {f.name for f in dataclasses.fields(Outcome)}
        assert type(outcome.holds) is bool and type(outcome.value) is float


@settings(max_examples=300, deadline=None, suppress_health_check=list(HealthCheck))
@given(board=boards(), check=conditions(), where=st.sampled_from(WHERES),
       each=st.sampled_from(["resistor", "tag:t"]), data=st.data())
def test_arrays_give_the_closures_outcomes(board, check, where, each, data):
    limit = Limit(id="generated", about=None, check=check, each=each, where=where)
    with mock.patch.object(engine, "MIN_GROUP", 1):  # every signature as arrays, however few its items
        _differential(limit, board, data)


def _differential(limit: Limit, board, data) -> None:
    try:
        expected = _reference_items(limit, board)
    except LimitError as error:
        with pytest.raises(LimitError) as raised:
            compile_limit(limit, board)
        assert _error(raised.value) == _error(error)
        return
    compiled = compile_limit(limit, board)
    assert [item.part for item in compiled.items] == [name for name, _ in expected]
    draw_number = lambda: data.draw(st.sampled_from(NUMBERS))  # noqa: E731
    for point in points(board, draw_number):
        values = CaseValues(point)
        try:
            reference = [_scalar(closure, values) for _, closure in expected]
        except LimitError as error:
            with pytest.raises(LimitError) as raised:
                compiled.outcomes(CaseValues(point))
            assert _error(raised.value) == _error(error)
            continue
        found = compiled.outcomes(CaseValues(point))
        for outcome, wanted in zip(found, reference, strict=True):
            _same(outcome, wanted)


def test_many_items_are_evaluated_as_arrays():
    """Twenty resistors of one signature form one group: the arrays, not the closures, decide."""
    parts = [part(f"R{i}", value=1000.0 * (i + 1), unit="ohm", nets=("vin", "gnd"), rating=0.25, tol=0.01)
             for i in range(20)]
    board = design(parts)
    limit = Limit(id="power", about=None, check="power(part) <= part.rating and voltage(part) <= 5 V",
                  each="resistor")
    compiled = compile_limit(limit, board)
    assert len(compiled.groups) == 1 and len(compiled.groups[0].numbers) == 20
    assert all("check" not in vars(item) for item in compiled.items[1:])  # closures compiled on demand only
    point = OperatingPoint(board.netlists[0], {"gnd": 0.0, "vin": 5.0},
                           {p.name: PartResult(25.0 / p.value, {"from": 5.0 / p.value, "to": -5.0 / p.value},
                                               5.0, 5.0 / p.value) for p in parts})
    found = compiled.outcomes(CaseValues(point))
    assert found == [item.outcome(CaseValues(point)) for item in compiled.items]
    assert [o.holds for o in found] == [25.0 / (1000.0 * (i + 1)) <= 0.25 for i in range(20)]


def test_evaluate_raises_the_error_the_items_meet_first():
    """`evaluate` goes item by item through the cases: the rule error of the first item in its
    second case, not that of the second item in the first case."""
    parts = [part(f"R{i}", value=1000.0, unit="ohm", nets=("vin", "gnd"), tol=0.01) for i in range(6)]
    board = design(parts, cases=(("a", ROOM), ("b", ROOM)))
    limit = Limit(id="ratio", about=None, check="voltage(part) / current(part) <= 2 kohm", each="resistor")
    limit_set = LimitSet((compile_limit(limit, board),), ())
    ops = []
    for netlist, zero in zip(board.netlists, ("R1", "R0")):
        results = {p.name: PartResult(1e-3, {"from": 0.0 if p.name == zero else 1e-3, "to": 0.0}, 1.0,
                                      0.0 if p.name == zero else 1e-3) for p in netlist.parts}
        ops.append(OperatingPoint(netlist, {"gnd": 0.0, "vin": 1.0}, results))
    with pytest.raises(LimitError, match="case `b`"):
        evaluate(limit_set, {"board": ops}, datetime.date(2030, 1, 1))


def test_compiled_limits_keep_their_items_api():
    """Worst-case analysis reads `split` and `check` of every item: compiled on demand, cached."""
    parts = [part(f"R{i}", value=100.0, unit="ohm", rating=0.25) for i in range(5)]
    compiled = compile_limit(Limit(id="p", about=None, check="abs(power(part)) <= part.rating", each="resistor"),
                             design(parts))
    assert isinstance(compiled, CompiledLimit)
    item = compiled.items[3]
    assert item.split is item.split and len(item.split.sides) == 2
    assert item.check is item.check
