"""A check split into its one-sided comparisons: the sides, the min/max formula, and that the formula
recombines to exactly the margin the margin rules give (RULES: `a <= b` -> b - a, `in` -> the nearer
end, `and` -> min, `or` -> max, `not` -> sign flipped)."""

from __future__ import annotations

import numpy as np
import pytest

from checker.analysis.stacked import stack_point
from checker.language import parse_design
from checker.limits import compile_limits, load_limit_text
from checker.limits.compiler import CaseValues
from checker.limits.sides import MAX_SIDES
from checker.solver import solve

# A bike-light driver of our own: a 6 V pack, a series resistor and an LED string modelled as resistors.
CIRCUIT = """circuit lamp "Bike lamp driver"
ground gnd
source V1 from vin to gnd : 6 V, tol = 5%
resistor R1 from vin to a : 100 ohm, tol = 5%
resistor R2 from a to b : 220 ohm, tol = 1%
resistor R3 from b to gnd : 150 ohm, tol = 1%
"""


def split_of(check: str):
    design = parse_design(CIRCUIT, "lamp.circuit")
    limits = load_limit_text(f"limits:\n  - id: x\n    about: x\n    check: {check}\n", "l.yaml")
    item = compile_limits([limits], [design]).limits[0].items[0]
    return item, solve(design.netlists[0])


FORMS = [
    ("voltage(a) <= 5 V", 1, True),
    ("voltage(a) in 4 V .. 5 V", 2, True),
    ("abs(voltage(a) - voltage(b)) <= 3 V", 2, True),
    ("abs(voltage(a) - 4.5 V) >= 10 mV", 2, False),
    ("max(voltage(a), voltage(b)) <= 5 V", 2, True),
    ("min(voltage(a), voltage(b)) <= 5 V", 2, False),
    ("not (voltage(a) > 5 V)", 1, True),
    ("not (voltage(a) in 4 V .. 5 V)", 2, False),
    ("voltage(a) >= 4 V and voltage(b) <= 3 V", 2, True),
    ("voltage(a) >= 5 V or voltage(b) <= 3 V", 2, False),
    ("power(R1) + power(R2) <= 100 mW", 1, True),
    ("abs(voltage(a)) + abs(voltage(b)) <= 9 V", 4, True),
    ("-2 * abs(voltage(a) - 5 V) >= -1 V", 2, True),
]


@pytest.mark.parametrize("check, sides, conjunctive", FORMS)
def test_sides_recombine_to_the_margin_of_the_rules(check, sides, conjunctive):
    item, point = split_of(check)
    split = item.split
    assert len(split.sides) == sides and split.conjunctive == conjunctive
    recombined = split.combine(split.margins(stack_point(point)))[0]
    assert recombined == pytest.approx(item.check(CaseValues(point)).margin, rel=1e-12, abs=1e-15)


def test_a_range_is_its_two_ends():
    item, _ = split_of("voltage(a) in 4 V .. 5 V")
    assert [side.text for side in item.split.sides] == ["voltage(a) >= 4 V", "voltage(a) <= 5 V"]


def test_not_flips_the_side_in_place():
    item, _ = split_of("not (voltage(a) <= 5 V)")
    assert [side.text for side in item.split.sides] == ["voltage(a) >= 5 V"]


@pytest.mark.parametrize("check, monotone", [
    ("voltage(a) - voltage(b) <= 1 V", True),
    ("current(R1) in 1 mA .. 20 mA", True),
    ("power(R1) <= 100 mW", False),
    ("voltage(a) / R1.value <= 20 mA", False),
    ("voltage(a) <= (ambient - 25 degC) * 10 mV/K + 5 V", True),
])
def test_only_affine_voltages_and_currents_against_constants_are_provable(check, monotone):
    item, _ = split_of(check)
    assert all(side.monotone for side in item.split.sides) == monotone


def test_mixed_units_rank_by_relative_margin():
    item, _ = split_of("voltage(a) <= 5 V and current(R1) <= 20 mA")
    assert item.split.mixed_units


def test_nested_abs_stays_bounded():
    # 2^8 sign combinations of eight abs terms: more than MAX_SIDES, so the sum is kept whole (exact).
    terms = " + ".join(["abs(voltage(a) - 4 V)"] * 8)
    item, point = split_of(f"{terms} <= 9 V")
    assert len(item.split.sides) <= MAX_SIDES
    recombined = item.split.combine(item.split.margins(stack_point(point)))[0]
    assert recombined == pytest.approx(item.check(CaseValues(point)).margin, rel=1e-12)


def test_sides_run_on_arrays_of_points():
    item, point = split_of("voltage(a) in 4 V .. 5 V")
    values = stack_point(point)
    margins = item.split.margins(values)
    assert margins.shape == (2, 1) and np.all(np.isfinite(margins))
