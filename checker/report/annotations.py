"""Workflow-command lines that make a CI run mark failing limits on the changed files.

One line per finding that does not hold and is not waived, and per waiver problem:
`::error file=PATH,line=N,col=N,title=TITLE::MESSAGE` for what fails the check under the
one verdict (`checker.verdict`), `::warning` for the rest (warnings, unused waivers, and
with `--fail-on new` the failures the base already had). An `each` limit is placed at the part's line in its circuit, any
other limit at its `id:` line in its limits file; paths are relative to `root`
(the repository's top level, where the CI runner checked it out).

Escaping follows GitHub's documented rules for workflow commands ("Workflow commands
for GitHub Actions", docs.github.com): in the message `%`, CR and LF become `%25`,
`%0D`, `%0A`; property values additionally escape `:` and `,` as `%3A` and `%2C`.
"""

from __future__ import annotations

import os
from pathlib import Path

from checker.errors import Location
from checker.findings import Finding, Findings, WaiverNote
from checker.report.view import make_row
from checker.verdict import Verdict, judge

_DATA_ESCAPES = (("%", "%25"), ("\r", "%0D"), ("\n", "%0A"))
_PROPERTY_ESCAPES = _DATA_ESCAPES + ((":", "%3A"), (",", "%2C"))
_REPORTED = ("fail", "warn")


def escape_data(text: str) -> str:
    """Escape the message part of a workflow command (after the second `::`)."""
    for plain, escaped in _DATA_ESCAPES:
        text = text.replace(plain, escaped)
    return text


def escape_property(text: str) -> str:
    """Escape a property value (`file=`, `title=`) of a workflow command."""
    for plain, escaped in _PROPERTY_ESCAPES:
        text = text.replace(plain, escaped)
    return text


def _relative_path(path: str, root: Path) -> str:
    """`path` relative to `root` with `/` separators; relative paths are taken from the current folder."""
    absolute = os.path.abspath(path)
    relative = os.path.relpath(absolute, os.path.abspath(root))
    if relative == ".." or relative.startswith(".." + os.sep):
        return Path(path).as_posix()
    return Path(relative).as_posix()


def _command(level: str, location: Location | None, title: str, message: str, root: Path) -> str:
    props = []
    if location is not None:
        props += [f"file={escape_property(_relative_path(location.path, root))}",
                  f"line={location.line}", f"col={location.column}"]
    props.append(f"title={escape_property(title)}")
    return f"::{level} {','.join(props)}::{escape_data(message)}"


def _measured_message(finding: Finding) -> str:
    worst, row = finding.worst, make_row(finding)
    where = f"{finding.circuit} / {finding.item}" if finding.item else finding.circuit
    measured = (f"{row.value}: {row.error}" if row.error else
                f"{row.value} against {row.bound}, margin {row.margin} ({row.relative})")
    return (f"{finding.limit.about} ({where}, case {worst.case}"
            + (f", corner {worst.corner}" if worst.corner else "") + f"): {measured}")


def _finding_message(finding: Finding, base_ref: str | None) -> str:
    """What failed and where, in the shared view's words: the numbers, or that there is no operating point;
    a design lint's own message."""
    text = finding.limit.about if finding.lint else _measured_message(finding)
    if finding.change == "new" and base_ref:
        text += f"; new since {base_ref}"
    return text


def _finding_line(finding: Finding, root: Path, base_ref: str | None, verdict: Verdict) -> str:
    """An `::error` for a finding that fails the check, a `::warning` for one the policy lets through."""
    located = finding.item_location if finding.limit.each and finding.item_location else finding.limit.location
    title = f"nodegate {finding.limit.id}" + (f" on {finding.item}" if finding.item else "")
    level = "error" if verdict.counts(finding) else "warning"
    return _command(level, located, title, _finding_message(finding, base_ref), root)


def _waiver_line(note: WaiverNote, root: Path, verdict: Verdict) -> str:
    waiver = note.waiver
    scope = "".join(f", {word} {value}" for word, value in (("part", waiver.part), ("case", waiver.case)) if value)
    if note.problem == "expired":
        message = f"the waiver of {waiver.limit}{scope} expired on {waiver.until.isoformat()}"
    else:
        message = f"the waiver of {waiver.limit}{scope} matches no failure; remove it"
    level = "error" if verdict.counts_note(note) else "warning"
    return _command(level, waiver.location, f"nodegate waiver {waiver.limit}", message, root)


def render_annotations(findings: Findings, root: Path, verdict: Verdict | None = None) -> str:
    """The workflow-command lines for `findings`, one per line, ending in a newline (empty if none);
    `::error` exactly for what fails the check under `verdict` (default: `--fail-on any`)."""
    verdict = verdict or judge(findings)
    lines = [_finding_line(f, root, findings.base_ref, verdict) for f in findings.findings
             if f.status in _REPORTED and f.outcomes]
    lines += [_waiver_line(note, root, verdict) for note in findings.waiver_notes]
    return "".join(line + "\n" for line in lines)
