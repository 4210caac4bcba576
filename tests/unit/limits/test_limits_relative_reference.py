"""The reference scale of relative margins (docs/limits.md, "Relative margin"), worked by hand.

A window's margin is over its half-width, an absolute temperature's over the headroom from
the case's ambient to the bound, anything else over |bound| (|value| when the bound is 0);
`and`/`or`/`not` keep the deciding comparison's scale, and the sides worst-case analysis
ranks agree with the check at the same numbers.
"""

from __future__ import annotations

import json

import pytest

from checker.analysis.stacked import stack_point
from checker.cli import main
from checker.language import parse_design
from checker.limits import compile_limits, load_limit_text, margins
from checker.limits.compiler import CaseValues
from checker.solver import solve
from checker.units import AMPERE, KELVIN, VOLT

ZERO_CELSIUS = 273.15


def celsius(degrees: float) -> float:
    return degrees + ZERO_CELSIUS


# --- each rule, on the margin functions ------------------------------------------------------

def test_a_window_is_measured_against_its_half_width():
    # 3.5 V in 3.0 .. 3.6 V: margin 3.6 - 3.5 = 0.1 V, half-width 0.3 V, relative 33.3 %
    verdict = margins.in_range(3.5, 3.0, 3.6, VOLT, False)
    assert verdict.scale == pytest.approx(0.3) and verdict.relative == pytest.approx(1 / 3)


def test_the_centre_of_a_window_reads_one_hundred_percent():
    # 3.3 V in 3.0 .. 3.6 V: margin 0.3 V of the 0.3 V half-width
    assert margins.in_range(3.3, 3.0, 3.6, VOLT, False).relative == pytest.approx(1.0)


def test_an_absolute_temperature_is_measured_against_the_headroom_from_the_ambient():
    # 112 degC against 125 degC at 25 degC ambient: margin 13 K, headroom 100 K, relative 13 %
    verdict = margins.compare("<=", celsius(112), celsius(125), KELVIN, True, celsius(25))
    assert verdict.margin == pytest.approx(13.0) and verdict.scale == pytest.approx(100.0)
    assert verdict.relative == pytest.approx(0.13)


def test_a_temperature_window_is_still_measured_against_its_half_width():
    # 50 degC in -20 .. 60 degC at 25 degC ambient: margin 10 K, half-width 40 K, relative 25 %
    verdict = margins.in_range(celsius(50), celsius(-20), celsius(60), KELVIN, True, celsius(25))
    assert verdict.relative == pytest.approx(0.25)


def test_a_temperature_difference_is_measured_against_its_bound():
    # tj - ambient = 40 K against 50 K: not an absolute temperature, so 10 K of 50 K = 20 %
    assert margins.compare("<=", 40.0, 50.0, KELVIN, False, celsius(25)).relative == pytest.approx(0.2)


def test_anything_else_is_measured_against_the_bound():
    # 15 mA against 20 mA: margin 5 mA of 20 mA = 25 %
    assert margins.compare("<=", 0.015, 0.020, AMPERE, False).relative == pytest.approx(0.25)


# --- the fallbacks ---------------------------------------------------------------------------

def test_an_empty_window_falls_back_to_the_bound():
    # 2.0 V in 2.5 .. 2.5 V: margin -0.5 V, no half-width, so over |2.5 V|: -20 %
    verdict = margins.in_range(2.0, 2.5, 2.5, VOLT, False)
    assert verdict.scale == pytest.approx(2.5) and verdict.relative == pytest.approx(-0.2)


def test_an_empty_temperature_window_falls_back_to_the_headroom():
    # 90 degC in 85 .. 85 degC at 25 degC ambient: margin -5 K over the 60 K headroom
    verdict = margins.in_range(celsius(90), celsius(85), celsius(85), KELVIN, True, celsius(25))
    assert verdict.relative == pytest.approx(-5 / 60)


def test_a_bound_at_the_ambient_falls_back_to_kelvin():
    # 27 degC against 25 degC at 25 degC ambient: no headroom, so -2 K over 298.15 K
    verdict = margins.compare("<=", celsius(27), celsius(25), KELVIN, True, celsius(25))
    assert verdict.scale == pytest.approx(celsius(25)) and verdict.relative == pytest.approx(-2 / 298.15)


def test_without_an_ambient_a_temperature_falls_back_to_kelvin():
    # a `where` has no case: 150 degC against 125 degC is 25 K over 398.15 K
    verdict = margins.compare(">=", celsius(150), celsius(125), KELVIN, True, None)
    assert verdict.relative == pytest.approx(25 / 398.15)


def test_a_zero_bound_falls_back_to_the_value_and_zero_to_zero():
    # 2 V against 0 V: margin -2 V over |2 V| = -100 %; both 0: relative 0
    assert margins.compare("<=", 2.0, 0.0, VOLT, False).relative == pytest.approx(-1.0)
    assert margins.compare("<=", 0.0, 0.0, VOLT, False).relative == 0.0


# --- and, or, not keep the decider's scale (through the compiler) ----------------------------

def only_outcome(make, check):
    """The one outcome of `check` on the conftest divider: mid 2.2 V, current(R1) 1.1 mA."""
    board, point = make.divider_board()
    (finding,) = make.single(check, [board], {"board": [point]})
    (outcome,) = finding.outcomes
    return outcome


def test_and_keeps_the_scale_of_the_deciding_side(make):
    # window: 0.2 V over 0.5 V = 40 %; current: 0.1 mA over 1.2 mA = 8.3 %: the current decides
    outcome = only_outcome(make, "voltage(mid) in 2 V .. 3 V and current(R1) <= 1.2 mA")
    assert outcome.unit == "A" and outcome.relative == pytest.approx(0.1 / 1.2)


def test_or_ranks_by_the_new_scale_and_keeps_it(make):
    # window: 0.2 V over the 0.5 V half-width = 40 % (over |2 V| it would be 10 %);
    # current: 0.4 mA over 1.5 mA = 26.7 %: the window decides, with its half-width
    outcome = only_outcome(make, "voltage(mid) in 2 V .. 3 V or current(R1) <= 1.5 mA")
    assert outcome.unit == "V" and outcome.relative == pytest.approx(0.4)


def test_not_keeps_the_scale(make):
    # not (2.2 V in 2 .. 3 V): margin -0.2 V over the 0.5 V half-width = -40 %
    assert only_outcome(make, "not (voltage(mid) in 2 V .. 3 V)").relative == pytest.approx(-0.4)


def test_the_case_ambient_reaches_a_compiled_temperature_check(make):
    # R1 dissipates 1 W at 87 K/W: 112 degC at 25 degC ambient, 132 degC at 45 degC
    # room: 13 K of 100 K = 13 %; warm: -7 K of 80 K = -8.75 %
    board = make.design([make.part("R1", theta_ja=87.0)], cases=(("room", celsius(25)), ("warm", celsius(45))))
    points = [make.op(board, case, {"a": 10.0}, {"R1": (10.0, 0.1, 1.0)}) for case in ("room", "warm")]
    (finding,) = make.single("junction_temp(R1) <= 125 degC", [board], {"board": points})
    assert [o.relative for o in finding.outcomes] == [pytest.approx(0.13), pytest.approx(-7 / 80)]


# --- worst-case sides rank by the same scale -------------------------------------------------

HOT = """circuit hot "Hot resistor"
ground gnd
source   V1 from vin to gnd : 10 V, tol = 5%
resistor R1 from vin to gnd : 100 ohm, tol = 5%, rating = 2 W, theta_ja = 87 K/W
case room : ambient = 25 degC
"""


@pytest.mark.parametrize("check", [
    "junction_temp(R1) <= 125 degC and current(R1) <= 120 mA",
    "voltage(vin) in 9 V .. 11 V and current(R1) <= 101 mA",
    "voltage(vin) in 9 V .. 11 V or junction_temp(R1) <= 125 degC",
])
def test_sides_and_the_check_give_one_relative_margin(check):
    design = parse_design(HOT, "hot.circuit")
    limits = load_limit_text(f"limits:\n  - id: x\n    about: x\n    check: {check}\n", "l.yaml")
    item = compile_limits([limits], [design]).limits[0].items[0]
    point = solve(design.netlists[0])
    values = stack_point(point)
    split = item.split
    assert split.mixed_units
    keys = split.combine(split.keys(values, split.margins(values)))[0]
    assert keys == pytest.approx(item.check(CaseValues(point)).relative, rel=1e-12)


# --- through the command line ----------------------------------------------------------------

def test_the_json_report_gives_a_temperature_relative_to_its_headroom(tmp_path):
    # V1 puts 10 V across 100 ohm: 1 W at 87 K/W is 87 K over the ambient.
    # room (25 degC): 112 degC, margin 13 K of 100 K = 13 %; warm (45 degC): -7 K of 80 K = -8.75 %
    (tmp_path / "hot.circuit").write_text(HOT.replace(", tol = 5%", "") + "case warm : ambient = 45 degC\n",
                                          encoding="utf-8")
    (tmp_path / "limits.yaml").write_text(
        "limits:\n  - id: r1-junction\n    about: R1 stays below 125 degC\n"
        "    check: junction_temp(R1) <= 125 degC\n", encoding="utf-8")
    (tmp_path / "nodegate.yaml").write_text("circuits: [hot.circuit]\nlimits: [limits.yaml]\n", encoding="utf-8")
    assert main(["check", str(tmp_path), "--out", str(tmp_path / "out"), "--format", "json"]) == 1  # warm fails
    report = json.loads((tmp_path / "out" / "report.json").read_text(encoding="utf-8"))
    (finding,) = [f for f in report["findings"] if f["limit"] == "r1-junction"]
    relative = {o["case"]: o["relative"] for o in finding["outcomes"]}
    assert relative == {"room": pytest.approx(0.13), "warm": pytest.approx(-7 / 80)}
