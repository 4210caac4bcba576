"""Temperatures where the two languages meet, and `in`, `not` and strict comparisons at their edges.

A case's `ambient` is written in the circuit language and a limit's bound in the
limit language. Written alike they must be the very same float, or a check that sits
exactly on its bound flips on rounding. Margins follow RULES.md, "Margins".
"""

import datetime

import pytest
from hypothesis import given, strategies as st

from checker.errors import LimitError
from checker.language import parse_design
from checker.limits import compile_limits, evaluate, load_limit_text
from checker.limits.syntax import parse_expression

ZERO_CELSIUS = 273.15  # K, by definition of the Celsius scale (SI Brochure, 9th ed., 2019, 2.3.1)
BOARD = "circuit mast\nground gnd\nsource V from v to gnd : 5 V\nresistor R from v to gnd : 1 kohm\n"


def kelvin(celsius_text: str) -> float:
    """T/K = t/°C + 273.15 (SI Brochure, 9th ed., 2019, 2.3.1), computed apart from both parsers."""
    return float(celsius_text) + ZERO_CELSIUS


def outcomes(make, ambients: list[str], check: str):
    """Outcomes of `check` on a board with one case per ambient (circuit-language text)."""
    cases = "".join(f"case c{i} : ambient = {t}\n" for i, t in enumerate(ambients))
    design = parse_design(BOARD + cases)
    limit_set = compile_limits([load_limit_text(f'limits:\n  - id: t\n    check: "{check}"\n', "l.yaml")], [design])
    ops = {design.name: [make.op(design, n.case, {"v": 5.0}, {}) for n in design.netlists]}
    (finding,), _ = evaluate(limit_set, ops, datetime.date(2026, 1, 1))
    return finding.outcomes


@given(st.integers(min_value=0, max_value=2731))
def test_limits_review_negative_celsius_reads_alike_in_both_languages(tenths):
    text = f"-{tenths // 10}.{tenths % 10}"
    (written,) = parse_design(BOARD + f"case c : ambient = {text} degC\n").netlists
    bound = parse_expression(f"ambient >= {text} degC").right
    assert written.ambient == bound.value == kelvin(text)


@pytest.mark.parametrize("celsius", ["-17.4", "-40", "-0.1", "60", "125.6"])
def test_limits_review_checks_exactly_on_a_temperature_bound(make, celsius):
    at = [f"{celsius} degC"]
    (inclusive,) = outcomes(make, at, f"ambient >= {celsius} degC")
    (strict,) = outcomes(make, at, f"ambient > {celsius} degC")
    (ranged,) = outcomes(make, at, f"ambient in {celsius} degC .. 150 degC")
    (outside,) = outcomes(make, at, f"not (ambient in {celsius} degC .. 150 degC)")
    assert (inclusive.margin, inclusive.holds) == (0.0, True)
    assert (strict.margin, strict.holds) == (0.0, False)  # strict: holds only above zero
    assert (ranged.margin, ranged.holds, ranged.bound) == (0.0, True, kelvin(celsius))  # inclusive ends
    assert (outside.margin, outside.holds) == (0.0, False)  # `not` flips the sign of a zero margin


def test_limits_review_range_of_temperatures_takes_the_nearer_end(make):
    # ambient 300 K in -20 degC .. 60 degC: min(300 - 253.15, 333.15 - 300) = 33.15 K at the high end
    (inside,) = outcomes(make, ["300 K"], "ambient in -20 degC .. 60 degC")
    assert inside.absolute and inside.unit == "K"
    assert inside.bound == pytest.approx(kelvin("60"))
    assert inside.margin == pytest.approx(kelvin("60") - 300.0)
    assert inside.relative == pytest.approx((kelvin("60") - 300.0) / 40.0)  # over the window's half-width, 40 K


def test_limits_review_not_of_a_temperature_range_holds_outside(make):
    above, below, within = outcomes(make, ["70 degC", "-30 degC", "20 degC"], "not (ambient in -20 degC .. 60 degC)")
    assert (above.holds, above.margin, above.bound) == (True, pytest.approx(10.0), pytest.approx(kelvin("60")))
    assert (below.holds, below.margin, below.bound) == (True, pytest.approx(10.0), pytest.approx(kelvin("-20")))
    assert not within.holds and within.margin == pytest.approx(-40.0)


def test_limits_review_kelvin_is_a_difference_in_limits(make):
    # docs/limits.md: a temperature compares with degC; `300 K` in a limit is a difference.
    with pytest.raises(LimitError) as caught:
        outcomes(make, ["300 K"], "ambient <= 300 K")
    assert "temperature difference (K)" in caught.value.message
    assert caught.value.location.line == 3


@pytest.mark.parametrize("check, column", [
    ("voltage(v) <= 1 kV^999", 29),  # at the unit: 1000^999 V overflows a float (was an internal error)
    ("ambient + 5 degC >= 1 K", 21),  # at the `+`: two absolute temperatures do not add
])
def test_limits_review_bad_literals_and_sums_are_located(make, check, column):
    with pytest.raises(LimitError) as caught:
        outcomes(make, ["20 degC"], check)
    assert (caught.value.location.line, caught.value.location.column) == (3, column)


def test_limits_review_sum_error_reads_as_plain_words(make):
    with pytest.raises(LimitError) as caught:
        outcomes(make, ["20 degC"], "voltage(v) - current(R) <= 1 V")
    assert caught.value.message == "cannot subtract A from V"


def test_limits_review_duplicate_id_names_the_first_file_and_line():
    entry = "  - id: mast-range\n    check: voltage(v) <= 5 V\n"
    first = load_limit_text("limits:\n" + entry, "first.yaml")
    second = load_limit_text("limits:\n" + entry, "second.yaml")
    with pytest.raises(LimitError) as caught:
        compile_limits([first, second], [parse_design(BOARD)])
    assert caught.value.location.path == "second.yaml"
    assert caught.value.notes == ("first used in first.yaml at first.yaml:2:5",)
    with pytest.raises(LimitError) as caught:
        load_limit_text("limits:\n" + entry + entry, "one.yaml")
    assert caught.value.location.line == 4 and caught.value.notes == ("first used in one.yaml at one.yaml:2:5",)
