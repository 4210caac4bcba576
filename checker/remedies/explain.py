"""Remedies for `nodegate explain`: the same search as a check's, shown with the root before snapping."""

from __future__ import annotations

import dataclasses
import datetime
from typing import Sequence

from checker.analysis import analyse
from checker.design import Design
from checker.findings import Analysis, Finding, Findings
from checker.limits import LimitFile, compile_limits
from checker.remedies.search import with_remedies
from checker.remedies.series import series_words
from checker.report.view import format_number, remedy_text


def explained_remedies(findings: Findings, files: Sequence[LimitFile], designs: Sequence[Design],
                       today: datetime.date, analysis: Analysis) -> Findings:
    """`findings` (of one limit) with remedies: the circuits where it fails are checked against all their
    limits first, so that the search knows which limits held before a change."""
    failing = {f.circuit for f in findings.findings if f.status in ("fail", "warn") and not f.lint}
    if not failing:
        return findings
    mine = [design for design in designs if design.name in failing]
    compiled = compile_limits(files, designs)
    whole = analyse(compiled, mine, today, analysis)
    keys = {f.key for f in findings.findings}
    searched = with_remedies(dataclasses.replace(whole, findings=tuple(
        f if f.key in keys else dataclasses.replace(f, status=_quiet(f.status)) for f in whole.findings)),
        files, designs, today, analysis)
    found = {f.key: f for f in searched.findings if f.key in keys}
    return dataclasses.replace(findings, findings=tuple(
        dataclasses.replace(f, remedies=found[f.key].remedies, remedy_note=found[f.key].remedy_note)
        if f.key in found else f for f in findings.findings))


def _quiet(status: str) -> str:
    """Another limit's status as the search sees it: failing ones are not searched ("held" only
    decides what a change breaks, and a failing limit did not hold either way)."""
    return "failing" if status in ("fail", "warn") else status


def remedy_lines(finding: Finding) -> list[str]:
    """`  remedies:` then one line per remedy with the root the search found before snapping."""
    if not finding.remedies and not finding.remedy_note:
        return []
    lines = ["  remedies (one part change each, confirmed against every limit of the circuit):"]
    for remedy in finding.remedies:
        root = format_number(remedy.root_value, remedy.unit, digits=9)
        lines.append(f"    {remedy_text(remedy)}")
        to, words = format_number(remedy.to_value, remedy.unit), series_words(remedy.series)
        if remedy.root_value != remedy.from_value:
            lines.append(f"      the margin crosses zero at {remedy.name} = {root}; {to} is the next {words} past it")
        else:
            lines.append(f"      {to} is the nearest {words} on that side of {remedy.name}")
    if finding.remedy_note:
        lines.append(f"    {finding.remedy_note}")
    return lines
