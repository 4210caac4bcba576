"""Waivers: which failing outcomes are accepted, and which waivers have expired or matched nothing.

A waiver names a limit, optionally a part and a case that narrow it, a reason
and an end date, and optionally `circuits`, which narrows it the same way
(docs/limits.md, "Waivers"). A failure in a case the waiver does not cover still fails.
An expired waiver waives nothing and is reported (exit 1); a waiver that matched
no failing outcome is reported as unused (a warning).
"""

from __future__ import annotations

import dataclasses
import datetime
from typing import Sequence

from checker.findings import Finding, Outcome, Waiver, WaiverNote


def _covers(waiver: Waiver, finding: Finding, outcome: Outcome) -> bool:
    return (waiver.limit == finding.limit.id
            and (waiver.circuits is None or finding.circuit in waiver.circuits)
            and (waiver.part is None or waiver.part == finding.item)
            and (waiver.case is None or waiver.case == outcome.case))


def _status(finding: Finding, waivers: Sequence[Waiver], used: set[int]) -> Finding:
    """The finding with its status: pass, waived, or fail/warn by the limit's severity."""
    failing = [outcome for outcome in finding.outcomes if not outcome.holds]
    if not failing:
        return finding if finding.status == "pass" else dataclasses.replace(finding, status="pass")
    cover = []
    for outcome in failing:
        found = [index for index, waiver in enumerate(waivers) if _covers(waiver, finding, outcome)]
        used.update(found)
        cover.append(found[0] if found else None)
    if None in cover:
        return dataclasses.replace(finding, status="fail" if finding.limit.severity == "error" else "warn")
    worst = min(range(len(failing)), key=lambda i: failing[i].margin)
    return dataclasses.replace(finding, status="waived", waiver=waivers[cover[worst]])


def apply_waivers(findings: Sequence[Finding], waivers: Sequence[Waiver],
                  today: datetime.date) -> tuple[tuple[Finding, ...], tuple[WaiverNote, ...]]:
    """Set every finding's status; return them with notes on expired and unused waivers.

    A waiver is valid through its `until` date and expired from the day after.
    """
    active = [waiver for waiver in waivers if waiver.until >= today]
    used: set[int] = set()
    result = tuple(_status(finding, active, used) for finding in findings)
    notes = [WaiverNote(waiver, "expired") for waiver in waivers if waiver.until < today]
    notes += [WaiverNote(waiver, "unused") for index, waiver in enumerate(active) if index not in used]
    notes.sort(key=lambda note: waivers.index(note.waiver))
    return result, tuple(notes)
