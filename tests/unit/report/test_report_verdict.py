"""The one verdict (checker/verdict.py): its headline and reasons under each policy.

Expected words follow docs/ci.md, "One verdict"; the findings are built by hand.
"""

from __future__ import annotations

import datetime

from checker.findings import Finding, Findings, Limit, Outcome, Waiver, WaiverNote
from checker.verdict import Policy, judge

ERROR = Limit(id="fan-current", about="Fan current", check="current(M1) <= 0.5 A")
WARNING = Limit(id="fan-headroom", about="Fan headroom", check="x >= y", severity="warning")
WAIVER = Waiver(limit="fan-current", reason="bench unit", until=datetime.date(2030, 1, 1))


def finding(limit: Limit, status: str, change: str | None, item: str) -> Finding:
    outcome = Outcome("nominal", 0.0, 0.0, -1.0 if status != "pass" else 1.0, -0.1, "A", holds=status == "pass")
    return Finding(limit=limit, circuit="fan", item=item, outcomes=(outcome,), status=status, change=change)


def findings(*items: Finding, notes: tuple[str, ...] = (), base: str | None = "main") -> Findings:
    return Findings(findings=items, circuits=(), base_ref=base,
                    waiver_notes=tuple(WaiverNote(WAIVER, problem) for problem in notes))


OLD_FAILURES = findings(finding(ERROR, "fail", "unchanged", "M1"), finding(ERROR, "fail", "unchanged", "M2"),
                        finding(WARNING, "warn", "new", "M3"))


def test_any_counts_every_failure():
    verdict = judge(OLD_FAILURES)
    assert (verdict.passed, verdict.exit_code, verdict.headline) == (False, 1, "2 limits fail")


def test_new_with_old_failures_only_passes_and_says_how_many_remain():
    verdict = judge(OLD_FAILURES, Policy("new"))
    assert (verdict.passed, verdict.exit_code, verdict.reasons) == (True, 0, ())
    assert verdict.headline == "this change adds no failure; 2 existing failures remain"


def test_strict_names_the_warning_that_fails():
    verdict = judge(OLD_FAILURES, Policy("new", strict=True))
    assert (verdict.passed, verdict.headline) == (False, "1 new warning fails under --strict")
    assert not verdict.counts(OLD_FAILURES.findings[0]) and verdict.counts(OLD_FAILURES.findings[2])


def test_every_reason_is_listed_most_serious_first():
    verdict = judge(findings(finding(ERROR, "fail", None, "M1"), finding(WARNING, "warn", None, "M2"),
                             notes=("expired", "unused"), base=None), Policy(strict=True))
    assert verdict.reasons == ("1 limit fails", "1 warning fails under --strict", "1 waiver has expired",
                               "1 unused waiver fails under --strict")


def test_passing_headlines():
    assert judge(findings()).headline == "no limits to check"
    assert judge(findings(finding(ERROR, "pass", None, "M1"))).headline == "the 1 limit holds"
    assert judge(findings(finding(ERROR, "pass", None, "M1"), finding(WARNING, "warn", None, "M2"))).headline \
        == "no limit fails"
