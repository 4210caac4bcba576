"""Building findings: each/where/tag selection, cases, severities, absent parts, several circuits, waivers."""

import datetime

import pytest

from checker.errors import LimitError
from checker.findings import CircuitResult
from checker.limits import CaseValues, check_findings, compile_limits, evaluate, evaluate_limits

TODAY = datetime.date(2026, 3, 1)
COLD, HOT = 253.15, 333.15  # K: -20 degC and 60 degC


@pytest.fixture
def heater(make):
    """Two cases; R_HEAT runs hot (0.2 W of 0.25 W), R_SENSE cool; C1 has no rating; R_OPT absent when hot."""
    parts = [
        make.part("R_HEAT", nets=("vbat", "gnd"), value=20.0, unit="ohm", rating=0.25, tags=("hot",)),
        make.part("R_SENSE", nets=("vbat", "sense"), value=1e3, unit="ohm", rating=0.1),
        make.part("R_OPT", nets=("sense", "gnd"), value=1e3, unit="ohm"),
        make.part("C1", "capacitor", ("vbat", "gnd"), 1e-6, "F", vmax=6.3),
    ]
    board = make.design(parts, cases=(("cold", COLD), ("hot", HOT)), absent={"hot": ("R_OPT",)})
    cold = make.op(board, "cold", {"vbat": 2.0, "sense": 1.0},
                   {"R_HEAT": (2.0, 0.1, 0.2), "R_SENSE": (1.0, 1e-3, 1e-3), "R_OPT": (1.0, 1e-3, 1e-3),
                    "C1": (2.0, 0.0, 0.0)})
    hot = make.op(board, "hot", {"vbat": 2.4, "sense": 2.4},
                  {"R_HEAT": (2.4, 0.12, 0.288), "R_SENSE": (0.0, 0.0, 0.0), "C1": (2.4, 0.0, 0.0)})
    return board, {"board": [cold, hot]}


def run(make, text, board_ops, today=TODAY):
    board, ops = board_ops
    return evaluate_limits([make.limits(text)], [board], ops, today)


def by_item(findings):
    return {f.item: f for f in findings}


POWER = """\
limits:
  - id: resistor-power
    about: resistors within rating
    each: resistor
    where: part.rating > 0 W
    check: power(part) <= part.rating
"""


def test_limits_each_where_selects_parts_with_the_property(make, heater):
    findings, notes = run(make, POWER, heater)
    found = by_item(findings)
    assert set(found) == {"R_HEAT", "R_SENSE"}  # R_OPT has no rating: where does not match
    assert found["R_HEAT"].status == "fail" and found["R_SENSE"].status == "pass"
    assert [o.case for o in found["R_HEAT"].outcomes] == ["cold", "hot"]
    assert found["R_HEAT"].worst.margin == pytest.approx(0.25 - 0.288)  # rating - power, hot case
    assert found["R_HEAT"].item_location.line == 3 and notes == ()


def test_limits_each_tag_selects_tagged_parts(make, heater):
    text = POWER.replace("each: resistor", "each: tag:hot")
    assert [f.item for f in run(make, text, heater)[0]] == ["R_HEAT"]


def test_limits_each_kind_other_than_resistor(make, heater):
    text = ("limits:\n  - id: cap\n    about: caps\n    each: capacitor\n"
            "    check: abs(voltage(part)) <= 60% * part.vmax\n")
    (finding,) = run(make, text, heater)[0]
    assert finding.item == "C1" and finding.worst.margin == pytest.approx(0.6 * 6.3 - 2.4)


def test_limits_check_reading_a_missing_property_names_the_part(make, heater):
    text = POWER.replace("    where: part.rating > 0 W\n", "")
    with pytest.raises(LimitError) as caught:
        run(make, text, heater)
    assert "R_OPT" in caught.value.message and caught.value.location.line == 5


def test_limits_cases_selects_cases_and_unknown_case_is_an_error(make, heater):
    findings, _ = run(make, POWER + "    cases: [cold]\n", heater)
    assert by_item(findings)["R_HEAT"].status == "pass"
    assert {o.case for f in findings for o in f.outcomes} == {"cold"}
    with pytest.raises(LimitError) as caught:
        run(make, POWER + "    cases: [cold, warm]\n", heater)
    assert (caught.value.location.line, caught.value.location.column) == (7, 19)


def test_limits_severity_warning_gives_warn(make, heater):
    findings, _ = run(make, POWER + "    severity: warning\n", heater)
    assert by_item(findings)["R_HEAT"].status == "warn"


def test_limits_absent_part_skips_that_case(make, heater):
    text = "limits:\n  - id: opt\n    about: optional part\n    check: current(R_OPT) <= 2 mA\n"
    (finding,) = run(make, text, heater)[0]
    assert [o.case for o in finding.outcomes] == ["cold"]
    text = "limits:\n  - id: opt\n    about: optional part\n    check: R_OPT.value <= 2 kohm\n"
    (finding,) = run(make, text, heater)[0]
    assert [o.case for o in finding.outcomes] == ["cold"]  # properties of an absent part too


def test_limits_case_overrides_are_read_per_case(make):
    resistor = make.part("R1", nets=("a", "gnd"), value=1e3, unit="ohm", tol=0.01)
    board = make.design([resistor], cases=(("a", 298.15), ("b", 298.15)),
                        overrides={"b": {"R1": make.part("R1", nets=("a", "gnd"), value=1e3, unit="ohm", tol=0.05)}})
    ops = {"board": [make.op(board, c, {"a": 1.0}, {"R1": (1.0, 1e-3, 1e-3)}) for c in ("a", "b")]}
    (finding,) = make.single("R1.tol <= 2%", [board], ops)
    assert [o.holds for o in finding.outcomes] == [True, False]


WAIVED = POWER + """\
waivers:
  - limit: resistor-power
    part: R_HEAT
    reason: heater pulses at 5 % duty
    until: 2026-03-01
"""


def test_limits_active_waiver_waives_and_lasts_through_its_date(make, heater):
    findings, notes = run(make, WAIVED, heater)
    finding = by_item(findings)["R_HEAT"]
    assert finding.status == "waived" and finding.waiver.part == "R_HEAT" and notes == ()


def test_limits_expired_waiver_does_not_waive(make, heater):
    findings, notes = run(make, WAIVED, heater, today=TODAY + datetime.timedelta(days=1))
    assert by_item(findings)["R_HEAT"].status == "fail"
    assert [n.problem for n in notes] == ["expired"]


def test_limits_unused_waiver_is_noted(make, heater):
    findings, notes = run(make, WAIVED.replace("part: R_HEAT", "part: R_SENSE"), heater)
    assert by_item(findings)["R_HEAT"].status == "fail"
    assert [(n.problem, n.waiver.part) for n in notes] == [("unused", "R_SENSE")]


def test_limits_waiver_narrowed_by_case(make, heater):
    covering = WAIVED + "    case: hot\n"
    findings, notes = run(make, covering, heater)
    assert by_item(findings)["R_HEAT"].status == "waived" and notes == ()
    # R_HEAT fails only when hot; a waiver for the cold case covers nothing.
    findings, notes = run(make, WAIVED + "    case: cold\n", heater)
    assert by_item(findings)["R_HEAT"].status == "fail" and [n.problem for n in notes] == ["unused"]


def test_limits_failure_in_a_case_the_waiver_does_not_cover_still_fails(make, heater):
    text = POWER.replace("<= part.rating", "<= 50% * part.rating") + WAIVED[len(POWER):] + "    case: hot\n"
    findings, notes = run(make, text, heater)  # 0.2 W > 0.125 W when cold too
    assert by_item(findings)["R_HEAT"].status == "fail" and notes == ()  # the waiver was used (hot)


def test_limits_waiver_errors_are_located(make, heater):
    with pytest.raises(LimitError) as caught:
        run(make, WAIVED.replace("limit: resistor-power", "limit: resistor-pwr"), heater)
    assert (caught.value.location.line, caught.value.location.column) == (8, 12)
    assert any("resistor-power" in note for note in caught.value.notes)
    with pytest.raises(LimitError) as caught:
        run(make, WAIVED + "    case: warm\n", heater)
    assert caught.value.location.line == 12


def test_limits_several_circuits_an_unbound_limit_must_resolve_in_every_circuit(make, heater):
    board, ops = heater
    other = make.design([make.part("R9", nets=("rail", "gnd"), value=10.0, unit="ohm")], name="other")
    ops = {**ops, "other": [make.op(other, "nominal", {"rail": 1.0}, {"R9": (1.0, 0.1, 0.1)})]}
    text = "limits:\n  - id: rail\n    about: rail\n    check: voltage(rail) <= 1.5 V\n"
    with pytest.raises(LimitError) as caught:
        evaluate_limits([make.limits(text)], [board, other], ops, TODAY)
    assert "fails to resolve in `board`" in caught.value.message
    assert any("`circuits: [other]`" in note for note in caught.value.notes)
    (finding,) = evaluate_limits([make.limits(text + "    circuits: [other]\n")], [board, other], ops, TODAY)[0]
    assert finding.circuit == "other"
    text = "limits:\n  - id: rail\n    about: rail\n    check: voltage(rail) <= voltage(nowhere)\n"
    with pytest.raises(LimitError) as caught:
        evaluate_limits([make.limits(text)], [board, other], ops, TODAY)
    assert caught.value.location.column == 37  # at `nowhere`
    findings, _ = evaluate_limits([make.limits(POWER)], [board, other], ops, TODAY)
    assert {f.circuit for f in findings} == {"board"}  # R9 has no rating


def test_limits_duplicate_ids_across_files_are_errors(make, heater):
    board, _ = heater
    with pytest.raises(LimitError) as caught:
        compile_limits([make.limits(POWER), make.limits(POWER, "second.yaml")], [board])
    assert caught.value.location.path == "second.yaml"


def test_limits_check_findings_builds_the_whole_result(make, heater):
    board, ops = heater
    circuits = [CircuitResult("board", "board", "board.circuit", tuple(ops["board"]))]
    result = check_findings([make.limits(POWER)], [board], circuits, TODAY)
    assert [f.item for f in result.failures] == ["R_HEAT"] and result.circuits == tuple(circuits)


def test_limits_compiled_items_evaluate_one_case_at_a_time(make, heater):
    board, ops = heater
    limit_set = compile_limits([make.limits(POWER)], [board])
    item = next(i for c in limit_set.limits for i in c.items if i.part == "R_HEAT")
    outcome = item.outcome(CaseValues(ops["board"][1]), corner="R_HEAT.tol+")
    assert outcome.corner == "R_HEAT.tol+" and outcome.margin == pytest.approx(0.25 - 0.288)
    assert evaluate(limit_set, {}, TODAY) == ((), ())
