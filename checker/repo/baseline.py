"""Compare a check with the same check on the base revision (the exit policy is `checker.verdict`).

A finding is identified across revisions by `Finding.key` (limit id, circuit, item).
A finding *holds* when its status is "pass"; "fail", "warn" and "waived" all mean
the limit does not hold (a waiver accepts a failure, it does not remove it, so
adding or removing a waiver does not make a failure new or fixed).

| on the base          | now: holds  | now: does not hold |
|----------------------|-------------|--------------------|
| absent (or no base)  | new         | new                |
| holds                | unchanged   | new                |
| does not hold        | fixed       | unchanged          |

Base failures whose finding is gone now (limit, part or circuit removed) are fixed
too. `Findings.fixed` lists every fixed finding as it was on the base, so a report
can show them without looking at the head findings.
"""

from __future__ import annotations

from dataclasses import replace

from checker.findings import Finding, Findings


def _holds(finding: Finding) -> bool:
    return finding.status == "pass"


def _unit(finding: Finding) -> str | None:
    """The unit of a finding's margins, from an outcome with an operating point (one without may
    carry none); None when no outcome has one."""
    return next((outcome.unit for outcome in finding.outcomes if not outcome.error), None)


def _base_margin(head: Finding, base: Finding) -> float | None:
    """The base's worst margin, when it is in the same unit as the head's (a rewritten check may not be).

    It is −inf when the base had no operating point there (`Outcome.error`); reports show that in
    words and give no margin change, as none can be computed against it.
    """
    if not base.outcomes or not head.outcomes:
        return None
    units = {_unit(head), _unit(base)} - {None}
    return base.worst.margin if len(units) <= 1 else None


def _change(head: Finding, base: Finding | None) -> str:
    if base is None:
        return "new"
    if _holds(base):
        return "unchanged" if _holds(head) else "new"
    return "fixed" if _holds(head) else "unchanged"


def _marked(head: Finding, base: Finding | None) -> Finding:
    margin = None if base is None else _base_margin(head, base)
    return replace(head, change=_change(head, base), base_margin=margin)


def compare(head: Findings, base: Findings | None, base_ref: str) -> Findings:
    """`head` with every finding marked new/fixed/unchanged against `base` (None: no base to compare)."""
    by_key = {} if base is None else {finding.key: finding for finding in base.findings}
    marked = tuple(_marked(finding, by_key.get(finding.key)) for finding in head.findings)
    now_holding = {finding.key for finding in marked if _holds(finding)}
    now_present = {finding.key for finding in marked}
    fixed = tuple(
        replace(finding, change="fixed", base_margin=finding.worst.margin if finding.outcomes else None)
        for finding in by_key.values()
        if not _holds(finding) and (finding.key in now_holding or finding.key not in now_present)
    )
    return replace(head, findings=marked, fixed=fixed, base_ref=base_ref)

