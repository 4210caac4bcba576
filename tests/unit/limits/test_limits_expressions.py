"""The expression language: names, units and dimensions checked at load time, located in the YAML file;
hostile input rejected without anything being executed."""

import builtins
import datetime
import os

import pytest
import yaml
from hypothesis import given, settings
from hypothesis import strategies as st

from checker.design import Design, Netlist, Part
from checker.errors import LimitError
from checker.limits import compile_limits, evaluate, load_limit_text

TODAY = datetime.date(2026, 1, 1)


def compile_text(text, designs):
    return compile_limits([load_limit_text(text, "limits.yaml")], designs)


def error_of(check_yaml, designs):
    """`check_yaml` is everything after `check:` (a scalar in any style, with its own newlines)."""
    text = "limits:\n  - id: the-limit\n    about: a test\n    check: " + check_yaml
    with pytest.raises(LimitError) as caught:
        compile_text(text, designs)
    return caught.value


# The same mistake, `3 A` compared with volts, written in every YAML scalar style:
# the error must point at the `<=` token inside the string (line, column in the file).
STYLES = [
    ("voltage(vbat) <= 3 A\n", 4, 26),
    ("'voltage(vbat) <= 3 A'\n", 4, 27),
    ('"voltage(vbat) <= 3 A"\n', 4, 27),
    (">\n      voltage(vbat)\n      <= 3 A\n", 6, 7),
    ("|\n      voltage(vbat) <= 3 A\n", 5, 21),
    ("voltage(vbat)\n      <= 3 A\n", 5, 7),
]


@pytest.mark.parametrize("check, line, column", STYLES)
def test_limits_mismatched_units_are_located_in_every_scalar_style(make, check, line, column):
    board, _ = make.divider_board()
    error = error_of(check, [board])
    assert (error.location.line, error.location.column) == (line, column)
    assert error.location.source_line[column - 1:].startswith("<=")
    assert "V" in error.message and "A" in error.message


@pytest.mark.parametrize("check, token", [
    ("voltage(nowhere) <= 1 V", "nowhere"),
    ("current(R9) <= 1 A", "R9"),
    ("power(R1) <= R2.ratng", "ratng"),
    ("voltage(mid) <= 1 V + 2 mA", "+"),
    ("R1.value <= 1 V", "<="),
    ("voltage(mid) * 2 mA <= 1 V", "<="),
    ("voltage(mid) in 1 V .. 2 A", "2 A"),
    ("min(1 V, 2 A) <= 1 V", "2 A"),
    ("sqrt(voltage(mid)) <= 1 V", "sqrt"),
    ("voltage(mid) ^ voltage(mid) <= 1 V", "voltage(mid) <="),
    ("voltage(mid) ^ 0.5 <= 1 V", "0.5"),
    ("voltage(mid) <= 1 Vx", "Vx"),
    ("voltage(mid) <= 1 V and 3 V", "3 V"),
    ("voltage(mid) + 1 V", "+"),
    ("not voltage(mid)", "voltage"),
    ("frobnicate(mid) <= 1 V", "frobnicate"),
    ("voltage(1 V) <= 1 V", "voltage"),
    ("current(R1.gate) <= 1 A", "gate"),
    ("voltage(mid) <= 1 V <= 2 V", "<= 2"),
    ("ambient * 2 <= 1 K", "*"),
    ("ambient <= 40 K", "<="),
    ("ambient + ambient <= 40 degC", "+"),
    ("mid <= 1 V", "mid"),
    ("R1 <= 1 kohm", "R1"),
    ("part.rating <= 1 W", "part"),
    ("R1.tol.x <= 1", "x"),
    ("R2.rating >= 1 W", "rating"),
    ("junction_temp(R1) <= 100 degC", "R1"),
    ("voltage(mid) <= 1 V +", ""),
])
def test_limits_errors_point_at_the_offending_token(make, check, token):
    board, _ = make.divider_board()
    error = error_of(check + "\n", [board])
    start = 12  # column of the check's first character: `    check: ` is 11 wide
    assert error.location.line == 4
    offset = error.location.column - start
    assert check[offset:].startswith(token) and (token or offset == len(check)), (error.message, check[offset:])


HOSTILE = [
    "__import__('os').system('x')",
    "part.__class__ <= 1",
    "().__class__.__bases__",
    'open("x")',
    "eval(1) <= 1",
    "exec(1) <= 1",
    "R1.__dict__ <= 1 W",
    "voltage(mid).__class__ <= 1 V",
    "[x for x in ()]",
    "lambda: 0",
    "1 V if 1 else 2 V",
    "voltage(mid) <= 1 V; import os",
    "R1.value.real <= 1 kohm",
]


@pytest.mark.parametrize("check", HOSTILE)
def test_limits_hostile_expressions_are_rejected_with_a_location(make, check, monkeypatch):
    calls = []
    for name in ("eval", "exec", "open", "compile"):
        monkeypatch.setattr(builtins, name, lambda *args, _name=name, **kw: calls.append(_name))
    monkeypatch.setattr(os, "system", lambda *args: calls.append("system"))
    board, _ = make.divider_board()
    text = yaml.safe_dump({"limits": [{"id": "the-limit", "about": "a test", "check": check}]}, sort_keys=False)
    with pytest.raises(LimitError) as caught:
        compile_limits([load_limit_text(text, "limits.yaml")], [board])
    monkeypatch.undo()
    assert caught.value.location is not None and caught.value.location.line == 4
    assert calls == []


def test_limits_hostile_where_is_rejected(make):
    board, _ = make.divider_board()
    text = ("limits:\n  - id: w\n    about: a\n    each: resistor\n"
            "    where: part.__class__ > 0\n    check: power(part) <= 1 W\n")
    with pytest.raises(LimitError) as caught:
        compile_text(text, [board])
    assert (caught.value.location.line, caught.value.location.column) == (5, 17)


def _board():
    """The divider of conftest, built here because hypothesis tests take no function-scoped fixtures."""
    parts = (Part("VBAT", "source", (("from", "vbat"), ("to", "gnd")), 3.3, "V"),
             Part("R1", "resistor", (("from", "vbat"), ("to", "mid")), 1e3, "ohm", props={"rating": 0.1, "tol": 0.01}),
             Part("R2", "resistor", (("from", "mid"), ("to", "gnd")), 2e3, "ohm", props={"tol": 0.01}))
    return Design("board", "board", "board.circuit", "gnd", parts,
                  (Netlist("board", "nominal", 298.15, "gnd", parts),))


BOARD = _board()


def compile_or_limit_error(check):
    """Compile `check`; anything but a located LimitError fails the test."""
    text = yaml.safe_dump({"limits": [{"id": "x", "about": "y", "check": check}]}, allow_unicode=True)
    try:
        compile_limits([load_limit_text(text, "limits.yaml")], [BOARD])
    except LimitError as error:
        assert error.location is not None


@settings(max_examples=300, deadline=None)
@given(st.text(max_size=80))
def test_limits_random_checks_raise_only_limit_errors(check):
    compile_or_limit_error(check)


@settings(max_examples=300, deadline=None)
@given(st.lists(st.sampled_from(
    ["voltage(", "current(", "power(", "junction_temp(", "R1", "R2", "mid", "vbat", ".", "value", "rating",
     "tol", "part", "ambient", ")", "(", " ", "1", "2.5", "V", "mA", "degC", "K", "%", "+", "-", "*", "/", "^",
     "<=", "<", ">=", ">", "in", "..", "and", "or", "not", "abs(", "min(", "max(", "sqrt(", ",", "0", "1e400"]),
    max_size=25))
def test_limits_random_token_soup_raises_only_limit_errors(pieces):
    compile_or_limit_error("".join(pieces))


def test_limits_properties_and_measures_compile(make):
    board, point = make.divider_board()
    checks = [
        "R1.value + R2.value in 2.9 kohm .. 3.1 kohm",
        "voltage(R1) + voltage(R2) >= voltage(vbat) - 1 mV",
        "current(R1.from) <= 2 mA and current(R1.to) >= -2 mA",
        "abs(power(VBAT)) <= max(10 mW, 2 * power(R2))",
        "sqrt(power(R2) * R2.value) <= 3 V",
        "voltage(mid) ^ 2 / R2.value <= R1.rating",
        "-20 degC < ambient and ambient - 25 degC <= 1 K",
        "R1.tol <= 1% and R1.tol >= 1 ppm",
        "(voltage(mid) <= 3 V) or not (voltage(mid) >= 1 V)",
    ]
    text = "limits:\n" + "".join(
        f"  - id: c{i}\n    about: check {i}\n    check: '{check}'\n" for i, check in enumerate(checks))
    findings, _ = evaluate(compile_text(text, [board]), {"board": [point]}, TODAY)
    assert [f.status for f in findings] == ["pass"] * len(checks)


def test_limits_division_by_zero_is_a_located_error(make):
    board, point = make.divider_board()
    text = "limits:\n  - id: d\n    about: a\n    check: voltage(mid) / (voltage(vbat) - 3.3 V) <= 1\n"
    with pytest.raises(LimitError) as caught:
        evaluate(compile_text(text, [board]), {"board": [point]}, TODAY)
    assert caught.value.location.column == 25 and "nominal" in caught.value.message


def test_limits_check_without_each_cannot_use_part(make):
    board, _ = make.divider_board()
    error = error_of("power(part) <= 1 W\n", [board])
    assert "each" in error.message and error.location.column == 18


def test_limits_multi_terminal_part_needs_a_pin(make):
    parts = [make.part("Q1", "bjt", pins=(("c", "col"), ("b", "base"), ("e", "gnd")), imax=0.1)]
    board = make.design(parts)
    assert "pin" in error_of("current(Q1) <= 1 A\n", [board]).message
    assert "pin" in error_of("voltage(Q1) <= 1 V\n", [board]).message
    compile_text("limits:\n  - id: q\n    about: a\n    check: current(Q1.c) <= Q1.imax\n", [board])
