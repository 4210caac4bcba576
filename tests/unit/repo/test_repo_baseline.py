"""Marking findings against the base revision, and the exit-code policy of `--fail-on`.

The expected values are the definitions in checker/repo/baseline.py's table and in
docs/ci.md ("One verdict", checker/verdict.py), applied by hand to small hand-built findings.
"""

from __future__ import annotations

import datetime

import pytest
from hypothesis import given
from hypothesis import strategies as st

from checker.errors import ConfigError
from checker.findings import Finding, Findings, Limit, Outcome, Waiver, WaiverNote
from checker.repo.baseline import compare
from checker.verdict import Policy, judge

LIMITS = {
    "led": Limit(id="led-current", about="Status LED current", check="current(LED) in 5 mA .. 15 mA"),
    "res": Limit(id="res-power", about="Resistor dissipation", check="power(part) <= 50% * part.rating",
                 each="resistor"),
    "hdr": Limit(id="ldo-headroom", about="Regulator headroom", check="x >= y", severity="warning"),
}


def finding(limit: str, status: str, margins: tuple[float, ...], item: str | None = None,
            circuit: str = "bike_light", unit: str = "A") -> Finding:
    outcomes = tuple(Outcome(case=f"case{i}", value=0.0, bound=0.0, margin=m, relative=m, unit=unit,
                             holds=m >= 0) for i, m in enumerate(margins))
    return Finding(limit=LIMITS[limit], circuit=circuit, item=item, outcomes=outcomes, status=status)


def findings(*items: Finding, notes: tuple[WaiverNote, ...] = ()) -> Findings:
    return Findings(findings=items, circuits=(), waiver_notes=notes)


def by_key(result: Findings) -> dict[tuple[str, str, str], Finding]:
    return {f.key: f for f in result.findings}


def test_new_unchanged_and_fixed() -> None:
    head = findings(
        finding("led", "fail", (-0.002, 0.001)),             # held on base, fails now -> new
        finding("res", "fail", (-0.01,), item="R1", unit="W"),  # failed on base too -> unchanged
        finding("res", "pass", (0.02,), item="R2", unit="W"),   # failed on base, holds now -> fixed
        finding("res", "pass", (0.03,), item="R3", unit="W"),   # held on both -> unchanged
        finding("hdr", "warn", (-0.1,), unit="V"),           # not on base -> new
    )
    base = findings(
        finding("led", "pass", (0.004, 0.003)),
        finding("res", "fail", (-0.02, -0.005), item="R1", unit="W"),
        finding("res", "fail", (-0.001,), item="R2", unit="W"),
        finding("res", "pass", (0.03,), item="R3", unit="W"),
        finding("res", "fail", (-0.2,), item="R9", unit="W"),  # part removed by the change -> fixed
    )
    result = compare(head, base, "origin/main")
    marks = {key: (f.change, f.base_margin) for key, f in by_key(result).items()}
    assert marks == {
        ("led-current", "bike_light", ""): ("new", 0.003),
        ("res-power", "bike_light", "R1"): ("unchanged", -0.02),
        ("res-power", "bike_light", "R2"): ("fixed", -0.001),
        ("res-power", "bike_light", "R3"): ("unchanged", 0.03),
        ("ldo-headroom", "bike_light", ""): ("new", None),
    }
    assert result.base_ref == "origin/main"
    fixed = {f.key: (f.change, f.base_margin, f.outcomes) for f in result.fixed}
    assert fixed == {
        ("res-power", "bike_light", "R2"): ("fixed", -0.001, base.findings[2].outcomes),
        ("res-power", "bike_light", "R9"): ("fixed", -0.2, base.findings[4].outcomes),
    }


def test_order_and_other_fields_are_kept() -> None:
    head = findings(finding("res", "fail", (-1.0,), item="R2", unit="W"), finding("led", "pass", (1.0,)))
    result = compare(head, None, "HEAD~1")
    assert [f.key for f in result.findings] == [f.key for f in head.findings]
    assert all(f.outcomes == h.outcomes and f.status == h.status
               for f, h in zip(result.findings, head.findings))


def test_no_base_means_everything_is_new() -> None:
    head = findings(finding("led", "fail", (-1.0,)), finding("res", "pass", (1.0,), item="R1"))
    result = compare(head, None, "main")
    assert [(f.change, f.base_margin) for f in result.findings] == [("new", None), ("new", None)]
    assert result.fixed == ()


def test_waived_counts_as_not_holding() -> None:
    # Adding a waiver accepts a failure; it neither fixes it nor makes it new.
    head = findings(finding("res", "waived", (-0.01,), item="R1", unit="W"))
    base = findings(finding("res", "fail", (-0.01,), item="R1", unit="W"))
    result = compare(head, base, "main")
    assert result.findings[0].change == "unchanged"
    assert result.fixed == ()


def test_identity_includes_circuit() -> None:
    head = findings(finding("led", "fail", (-1.0,), circuit="weather_station"))
    base = findings(finding("led", "fail", (-1.0,), circuit="bike_light"))
    result = compare(head, base, "main")
    assert result.findings[0].change == "new"
    assert [f.circuit for f in result.fixed] == ["bike_light"]


def test_base_margin_needs_the_same_unit() -> None:
    # The check was rewritten from a current to a voltage: margins are not comparable.
    head = findings(finding("led", "fail", (-0.5,), unit="V"))
    base = findings(finding("led", "fail", (-0.001,), unit="A"))
    assert compare(head, base, "main").findings[0].base_margin is None


STATUSES = st.sampled_from(["pass", "fail", "warn", "waived"])


@given(st.dictionaries(st.sampled_from(["R1", "R2", "R3", "R4"]), STATUSES),
       st.dictionaries(st.sampled_from(["R1", "R2", "R3", "R4"]), STATUSES))
def test_every_base_failure_is_accounted_for(head_map: dict[str, str], base_map: dict[str, str]) -> None:
    # Every base finding that does not hold is either still failing now (unchanged) or fixed.
    head = findings(*(finding("res", s, (1.0 if s == "pass" else -1.0,), item=k) for k, s in head_map.items()))
    base = findings(*(finding("res", s, (1.0 if s == "pass" else -1.0,), item=k) for k, s in base_map.items()))
    result = compare(head, base, "main")
    marks = {f.item: f.change for f in result.findings}
    fixed_items = {f.item for f in result.fixed}
    for item, status in base_map.items():
        if status != "pass":
            still = head_map.get(item) not in (None, "pass")
            assert (marks[item] == "unchanged") if still else (item in fixed_items)
    for item, status in head_map.items():
        assert (marks[item] == "new") == (status != "pass" and base_map.get(item, "pass") == "pass"
                                          or item not in base_map)


WAIVER = Waiver(limit="res-power", reason="pulsed heater", until=datetime.date(2026, 1, 1), part="R_HEAT")


@pytest.mark.parametrize("statuses, changes, notes, fail_on, strict, code", [
    ((), (), (), "any", False, 0),
    (("pass", "waived"), ("new", "new"), (), "any", False, 0),
    (("fail",), ("unchanged",), (), "any", False, 1),
    (("fail",), ("unchanged",), (), "new", False, 0),
    (("fail",), ("new",), (), "new", False, 1),
    (("fail",), (None,), (), "new", False, 1),           # no --base: nothing can be excused
    (("warn",), ("new",), (), "any", False, 0),
    (("warn",), ("new",), (), "any", True, 1),
    (("warn",), ("unchanged",), (), "new", True, 0),
    (("warn",), ("new",), (), "new", True, 1),
    (("pass",), ("unchanged",), ("expired",), "any", False, 1),
    (("pass",), ("unchanged",), ("expired",), "new", False, 1),
    (("pass",), ("unchanged",), ("unused",), "any", False, 0),
    (("pass",), ("unchanged",), ("unused",), "any", True, 1),
    (("pass",), ("unchanged",), ("unused",), "new", True, 1),
])
def test_exit_code_policy(statuses, changes, notes, fail_on, strict, code) -> None:
    items = tuple(Finding(limit=LIMITS["res"], circuit="bike_light", item=f"R{i}", status=s, change=c,
                          outcomes=(Outcome("nominal", 0.0, 0.0, -1.0, -1.0, "W", holds=False),))
                  for i, (s, c) in enumerate(zip(statuses, changes)))
    result = findings(*items, notes=tuple(WaiverNote(WAIVER, problem) for problem in notes))
    verdict = judge(result, Policy(fail_on, strict))
    assert (verdict.exit_code, verdict.passed) == (code, code == 0)


def test_unknown_fail_on_is_a_config_error() -> None:
    with pytest.raises(ConfigError, match="fail-on"):
        Policy("sometimes")
