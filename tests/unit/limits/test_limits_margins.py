"""Margins exactly as RULES.md "Margins" defines them, for every operator.

The divider of conftest has voltage(mid) = 2.2 V and current(R1) = 1.1 mA (Ohm's law:
3.3 V across 1 kohm + 2 kohm); expected margins below are worked by hand from the
RULES.md formulas.
"""

import pytest
from hypothesis import given
from hypothesis import strategies as st

from checker.limits import margins
from checker.units import VOLT

CASES = [
    # check, margin, value, bound, holds
    ("voltage(mid) <= 3 V", 0.8, 2.2, 3.0, True),          # b - a
    ("voltage(mid) <= 2.2 V", 0.0, 2.2, 2.2, True),        # inclusive at zero margin
    ("voltage(mid) < 2.2 V", 0.0, 2.2, 2.2, False),        # strict: needs margin > 0
    ("voltage(mid) < 2.5 V", 0.3, 2.2, 2.5, True),
    ("voltage(mid) >= 2.5 V", -0.3, 2.2, 2.5, False),      # a - b
    ("voltage(mid) >= 2.2 V", 0.0, 2.2, 2.2, True),
    ("voltage(mid) > 2 V", 0.2, 2.2, 2.0, True),
    ("voltage(mid) > 2.2 V", 0.0, 2.2, 2.2, False),
    ("voltage(mid) in 2 V .. 3 V", 0.2, 2.2, 2.0, True),   # min(x - lo, hi - x), nearer end is the bound
    ("voltage(mid) in 1 V .. 2.5 V", 0.3, 2.2, 2.5, True),
    ("voltage(mid) in 2.5 V .. 3 V", -0.3, 2.2, 2.5, False),
    ("voltage(mid) in 2.2 V .. 2.2 V", 0.0, 2.2, 2.2, True),
    ("voltage(mid) <= 3 V and voltage(mid) >= 2 V", 0.2, 2.2, 2.0, True),    # the smaller
    ("voltage(mid) <= 2 V and voltage(mid) >= 2 V", -0.2, 2.2, 2.0, False),
    ("voltage(mid) <= 2 V or voltage(mid) >= 2.5 V", -0.2, 2.2, 2.0, False),  # the larger
    ("voltage(mid) <= 2 V or voltage(mid) <= 3 V", 0.8, 2.2, 3.0, True),
    ("not voltage(mid) <= 2 V", 0.2, 2.2, 2.0, True),       # sign flipped
    ("not voltage(mid) >= 2 V", -0.2, 2.2, 2.0, False),
    ("not voltage(mid) <= 2.2 V", 0.0, 2.2, 2.2, False),    # not (x <= b) is x > b: strict
    ("not (voltage(mid) <= 2 V or voltage(mid) >= 2.5 V)", 0.2, 2.2, 2.0, True),
    ("voltage(mid) < 2.2 V and voltage(mid) <= 2.2 V", 0.0, 2.2, 2.2, False),  # tie: the failing side decides
    ("voltage(mid) < 2.2 V or voltage(mid) <= 2.2 V", 0.0, 2.2, 2.2, True),    # tie: the holding side decides
    ("-voltage(mid) >= -3 V", 0.8, -2.2, -3.0, True),
]


@pytest.mark.parametrize("check, margin, value, bound, holds", CASES)
def test_limits_margin_of_every_operator(make, check, margin, value, bound, holds):
    board, point = make.divider_board()
    (finding,) = make.single(check, [board], {"board": [point]})
    (outcome,) = finding.outcomes
    assert outcome.margin == pytest.approx(margin, abs=1e-12)
    assert (outcome.value, outcome.bound) == (pytest.approx(value), pytest.approx(bound))
    assert outcome.holds is holds and outcome.unit == "V" and not outcome.absolute
    assert finding.status == ("pass" if holds else "fail")


def test_limits_margin_across_units_is_decided_by_relative_margin(make):
    board, point = make.divider_board()
    # volts: 0.8 V of 3 V (26.7 %); amps: -0.1 mA of 1 mA (-10 %): the current decides.
    (finding,) = make.single("voltage(mid) <= 3 V and current(R1) <= 1 mA", [board], {"board": [point]})
    (outcome,) = finding.outcomes
    assert outcome.unit == "A" and outcome.margin == pytest.approx(-1e-4) and not outcome.holds
    assert outcome.relative == pytest.approx(-0.1)


def test_limits_relative_margin_scales():
    assert margins.relative_margin(1.0, margins.reference_scale(2.0, -4.0)) == 0.25  # over |bound|
    assert margins.relative_margin(-0.5, margins.reference_scale(2.0, 0.0)) == -0.25  # bound 0: over |value|
    assert margins.relative_margin(0.0, margins.reference_scale(0.0, 0.0)) == 0.0


def test_limits_temperature_outcomes_are_absolute_kelvin(make):
    board, point = make.divider_board()
    (finding,) = make.single("ambient <= 30 degC", [board], {"board": [point]})
    (outcome,) = finding.outcomes
    assert outcome.absolute and outcome.unit == "K"
    assert outcome.value == pytest.approx(298.15) and outcome.margin == pytest.approx(5.0)
    assert outcome.relative == pytest.approx(1.0)  # 5 K of the 5 K from the 25 degC ambient to the bound


finite = st.floats(min_value=-1e6, max_value=1e6, allow_nan=False)


@given(finite, finite)
def test_limits_margin_compare_matches_the_definition(a, b):
    for op, margin, holds in (("<=", b - a, b - a >= 0), ("<", b - a, b - a > 0),
                              (">=", a - b, a - b >= 0), (">", a - b, a - b > 0)):
        verdict = margins.compare(op, a, b, VOLT, False)
        assert verdict.margin == margin and verdict.holds is holds


@given(finite, finite, finite)
def test_limits_margin_range_matches_the_definition(x, lo, hi):
    verdict = margins.in_range(x, lo, hi, VOLT, False)
    assert verdict.margin == min(x - lo, hi - x)
    assert verdict.holds is (lo <= x <= hi)


@given(finite, finite, finite, finite)
def test_limits_margin_logic_matches_the_definition(a, b, c, d):
    left, right = margins.compare("<=", a, b, VOLT, False), margins.compare(">=", c, d, VOLT, False)
    assert margins.both(left, right).margin == min(b - a, c - d)
    assert margins.either(left, right).margin == max(b - a, c - d)
    assert margins.both(left, right).holds is (b >= a and c >= d)
    assert margins.either(left, right).holds is (b >= a or c >= d)
    assert margins.negate(left).margin == -(b - a) and margins.negate(left).holds is (b < a)
