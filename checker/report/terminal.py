"""The short summary `nodegate check` prints: failures, then warnings, then the verdict.

Plain text without colour codes, so it reads the same in a log file, a CI console
and a terminal.
"""

from __future__ import annotations

from checker.errors import uncommanding
from checker.findings import Findings
from checker.report.view import NoteRow, Row, build_view
from checker.verdict import Verdict


def _where(row: Row) -> str:
    return f"{row.circuit}: {row.limit}" + (f" [{row.item}]" if row.item else "")


def _finding_line(word: str, row: Row) -> str:
    """`FAIL tail_light: led-current, case cold (R1 +5 %): 13.1 mA vs limit 15.0 mA, margin -1.90 mA (-12.7 %)`,
    or `..., case cold (R1 +5 %): no operating point: MESSAGE`; a design lint gives its place and message."""
    if row.lint:
        return f"{word} {_where(row)}" + (f" at {row.where}" if row.where else "") + f": {row.about}"
    measured = (f"{row.value}: {row.error}" if row.error else
                f"{row.value} vs limit {row.bound}, margin {row.margin} ({row.relative})")
    line = f"{word} {_where(row)}, case {row.case}: {measured}"
    return line + (f" [{row.change}]" if row.change else "")


def _remedy_lines(row: Row) -> list[str]:
    """`  remedy: R_LED 150 Ω → 180 Ω (E12): …` under a failing or warning limit (docs/remedies.md)."""
    return [f"  remedy: {text}" for text in row.remedies] + ([f"  remedies: {row.remedy_note}"] if row.remedy_note else [])


def _note_line(note: NoteRow) -> str:
    narrowed = "".join(f" [{v}]" for v in (note.part, note.case) if v)
    where = f" at {note.where}" if note.where else ""
    return f"{note.problem.upper()} waiver of {note.limit}{narrowed}, until {note.until}{where}"


def _one_line(text: str) -> str:
    """Names from input files stay on their line (control characters become spaces), and no
    line reads as a CI workflow command (`checker.errors.uncommanding`)."""
    return uncommanding("".join(c if c.isprintable() else " " for c in text))


def summary_lines(findings: Findings, verdict: Verdict | None = None) -> list[str]:
    """One line per failing limit, then warnings, design lints and waiver problems, then the verdict."""
    view = build_view(findings, verdict)
    lines = [line for row in view.failures for line in [_finding_line("FAIL", row)] + _remedy_lines(row)]
    lines += [_note_line(note) for note in view.expired]
    lines += [line for row in view.warnings for line in [_finding_line("WARN", row)] + _remedy_lines(row)]
    lines += [_finding_line("LINT", row) for row in view.lints]
    lines += [_note_line(note) for note in view.unused]
    lines.append(view.verdict.text + "." + (f" {view.verdict.base}" if view.verdict.base else ""))
    return [_one_line(line) for line in lines]
