"""The Markdown report, for the pull-request comment and the CI job summary.

Layout (our own): the verdict, failing limits worst first, warnings, design lints, waived limits,
limits fixed against the base revision, then every limit in a collapsed section, and
the caution line. Under the failing and warning tables, each limit whose worst case has
a tolerance point or no operating point gets a few lines: the solver's message, the
command that reproduces the point, and the full point in a collapsed block. Every name
and text from the input goes through `escape` (commands through `code_span`), so no
limit id, part name or waiver reason can break a table or inject markup.

With `max_bytes`, whole rows (and then whole sections) are dropped from the end and a
note says how many and where the full report is; the result never exceeds `max_bytes`.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field

from checker.findings import Findings
from checker.report.view import NO_TEXT, STATUS_WORDS, NoteRow, ReportView, Row, build_view, plural
from checker.verdict import Verdict

# The size of one step's job summary the CI host accepts (1 MiB, rounded down to stay clear).
JOB_SUMMARY_LIMIT = 1_000_000
FULL_REPORT_HINT = "in the HTML and JSON reports that nodegate check writes (see its --out option)"

_ENTITIES = {"&": "&amp;", "<": "&lt;", ">": "&gt;", '"': "&quot;"}
# Characters with inline meaning in GitHub-flavoured Markdown: emphasis, code, links and
# images (a bracket opens both), tables, strikethrough, math, mentions and backslash itself.
_INLINE = set("\\`*_[]|~$@")
_BREAKS = re.compile(r"[\r\n\v\f\x1c-\x1e\x85\u2028\u2029]+")
# Control characters, and bidirectional overrides that would make a name read differently.
_CONTROL = re.compile(r"[\x00-\x08\x0e-\x1b\x7f\u202a-\u202e\u2066-\u2069]")
# At the start of a line: a heading (`#`), a list item or rule (`- `, `+ `, `---`, `===`)
# or a numbered item (`1. `, `2) `); `>` and `*` are already escaped everywhere.
_LINE_START = re.compile(r"^(\s*)(#|[-+=](?=[-+=\s]|$)|\d{1,9}(?=[.)](?:\s|$)))")


def escape(text: str) -> str:
    """Inline text that renders literally in a table cell or a line: one line, no markup."""
    text = _CONTROL.sub("", _BREAKS.sub(" ", text))
    out = "".join(_ENTITIES.get(c) or ("\\" + c if c in _INLINE else c) for c in text)
    return _LINE_START.sub(_escape_marker, out, count=1)


def _escape_marker(match: re.Match) -> str:
    """`#` -> `\\#`, `- ` -> `\\- `, `12. ` -> `12\\. `."""
    lead, marker = match.group(1), match.group(2)
    if marker[0].isdigit():
        return lead + marker + "\\"
    return lead + "\\" + marker


def code_span(text: str) -> str:
    """`text` shown literally and copyable: one line, fenced by more backticks than it holds."""
    text = _CONTROL.sub("", _BREAKS.sub(" ", text))
    fence = "`" * (max((len(run) for run in re.findall("`+", text)), default=0) + 1)
    pad = " " if text.startswith("`") or text.endswith("`") else ""
    return f"{fence}{pad}{text}{pad}{fence}"


def _cell(text: str) -> str:
    return escape(text) if text else NO_TEXT


def _table_row(cells: list[str]) -> str:
    return "| " + " | ".join(_cell(c) for c in cells) + " |"


def _table_head(titles: list[str]) -> list[str]:
    return ["| " + " | ".join(titles) + " |", "|" + "---|" * len(titles)]


@dataclass
class _Block:
    """A section: `head` and `tail` are kept whole around as many `rows` as fit."""

    head: list[str]
    rows: list[str] = field(default_factory=list)
    tail: list[str] = field(default_factory=list)

    def lines(self) -> list[str]:
        return self.head + self.rows + self.tail


_WHERE = ["circuit", "limit", "part", "worst case"]
_NUMBERS = ["value", "bound", "margin", "relative"]


def _measure_titles(view: ReportView) -> list[str]:
    """The worst case (with worst-case's method beside it), its numbers, then the driving parts
    and Monte Carlo's failure fraction."""
    return (_WHERE + (["method"] if view.with_method else []) + _NUMBERS
            + (["driven by"] if view.with_drivers else []) + (["fails in"] if view.with_fractions else []))


def _measure_cells(row: Row, view: ReportView) -> list[str]:
    return ([row.circuit, row.limit, row.item, row.case] + ([row.method] if view.with_method else [])
            + [row.value, row.bound, row.margin, row.relative]
            + ([row.drivers] if view.with_drivers else []) + ([row.fails_in] if view.with_fractions else []))


def _base_cells(row: Row, with_base: bool) -> list[str]:
    return [row.change, row.margin_change] if with_base else []


def _measure_block(title: str, rows: tuple[Row, ...], view: ReportView) -> _Block:
    with_base = view.base_ref is not None
    titles = _measure_titles(view) + (["change", "margin vs base"] if with_base else [])
    body = [_table_row(_measure_cells(r, view) + _base_cells(r, with_base)) for r in rows]
    return _Block([f"### {title}", ""] + _table_head(titles), body, [""])


def _point_entry(row: Row) -> str:
    """What one failing limit's worst case needs beyond its table row, as one unit of text."""
    where = " · ".join(escape(name) for name in (row.circuit, row.limit, row.item) if name)
    lines = [f"**{where}** in {escape(row.case)}" + (f": {escape(row.method)}" if row.method else "")]
    if row.error:
        lines.append(f"No operating point: {escape(row.error)}")
    if row.reproduce:
        lines.append(f"Reproduce: {code_span(row.reproduce)}")
    lines += [f"Remedy: {escape(text)}" for text in row.remedies]
    if row.remedy_note:
        lines.append(f"Remedies: {escape(row.remedy_note)}")
    text = "\\\n".join(lines) + "\n"
    if row.point:
        text += (f"\n<details><summary>Full point: {plural(len(row.point), 'value')}</summary>\n\n"
                 f"{escape(', '.join(row.point))}\n\n</details>\n")
    return text


def _points_block(rows: tuple[Row, ...]) -> list[_Block]:
    """The entries of the rows that have a tolerance point or no operating point (none: no block)."""
    entries = [_point_entry(r) for r in rows if r.point or r.error or r.remedies or r.remedy_note]
    return [_Block([], entries)] if entries else []


def _note_line(note: NoteRow) -> str:
    narrowed = "".join(f", {label} {escape(v)}" for label, v in (("part", note.part), ("case", note.case)) if v)
    where = f" ({escape(note.where)})" if note.where else ""
    return (f"- {note.problem} waiver of {escape(note.limit)}{narrowed}, until {escape(note.until)}: "
            f"{escape(note.reason)}{where}")


def _blocks(view: ReportView) -> list[_Block]:
    """Every section after the verdict, in reading order."""
    blocks: list[_Block] = []
    if view.failures:
        blocks += [_measure_block("Failing limits", view.failures, view)] + _points_block(view.failures)
    if view.warnings:
        blocks += [_measure_block("Warnings", view.warnings, view)] + _points_block(view.warnings)
    if view.lints:
        blocks.append(_lints_block(view))
    if view.expired or view.unused:
        head = [] if view.warnings else ["### Warnings", ""]
        blocks.append(_Block(head, [_note_line(n) for n in view.expired + view.unused], [""]))
    if view.waived:
        body = [_table_row([r.circuit, r.limit, r.item, r.case, r.value if r.error else r.margin, r.waiver])
                for r in view.waived]
        head = ["### Waived", ""] + _table_head(["circuit", "limit", "part", "worst case", "margin", "waiver"])
        blocks.append(_Block(head, body, [""]))
    if view.fixed:
        body = [_table_row([r.circuit, r.limit, r.item, r.base_margin]) for r in view.fixed]
        head = ["### Fixed by this change", ""] + _table_head(["circuit", "limit", "part", "margin on base"])
        blocks.append(_Block(head, body, [""]))
    blocks.append(_every_limit_block(view))
    return blocks


def _lints_block(view: ReportView) -> _Block:
    """Design lints: where each slip is written and what it looks like (`checker.lints`)."""
    with_base = view.base_ref is not None
    titles = ["circuit", "lint", "on", "where", "message"] + (["change"] if with_base else [])
    body = [_table_row([r.circuit, r.limit, r.item, r.where, r.about] + ([r.change] if with_base else []))
            for r in view.lints]
    return _Block(["### Design lints", ""] + _table_head(titles), body, [""])


def _verdict_lines(view: ReportView) -> list[str]:
    verdict = view.verdict
    lines = [f"**nodegate: {verdict.headline}**{verdict.tail}"]
    if verdict.base:
        lines += ["", escape(verdict.base)]
    return lines + ["", escape(view.analysis), ""]


def _every_limit_block(view: ReportView) -> _Block:
    rows = view.rows
    head = [f"<details><summary>Every limit ({len(rows)})</summary>", ""]
    head += _table_head(["status"] + _measure_titles(view) + ["about"])
    body = [_table_row([STATUS_WORDS.get(r.status, r.status)] + _measure_cells(r, view) + [r.about]) for r in rows]
    return _Block(head, body, ["", "</details>", ""])


def _size(lines: list[str]) -> int:
    return sum(len(line.encode("utf-8")) + 1 for line in lines)


def _note(omitted: int, max_bytes: int, full_report: str) -> list[str]:
    return [f"_Truncated to fit {max_bytes} bytes: {omitted} more rows not shown. "
            f"The full report is {escape(full_report)}._", ""]


def _fit(verdict: list[str], blocks: list[_Block], footer: list[str], max_bytes: int,
         full_report: str) -> list[str]:
    """The verdict, then whole rows in order while they fit, leaving room for the note and the footer."""
    total_rows = sum(len(b.rows) for b in blocks)
    used = _size(verdict) + _size(footer) + _size(_note(total_rows, max_bytes, full_report))
    kept: list[str] = list(verdict)
    omitted, stopped = 0, False
    for block in blocks:
        frame = _size(block.head) + _size(block.tail)
        taken: list[str] = []
        for row in ([] if stopped else block.rows):
            if used + frame + _size(taken) + _size([row]) > max_bytes:
                break
            taken.append(row)
        if stopped or (block.rows and not taken) or used + frame > max_bytes:
            stopped, omitted = True, omitted + len(block.rows)
            continue
        omitted += len(block.rows) - len(taken)
        stopped = len(taken) < len(block.rows)
        kept += block.head + taken + block.tail
        used += frame + _size(taken)
    return kept + _note(omitted, max_bytes, full_report) + footer


def render_markdown(findings: Findings, max_bytes: int | None = None, *,
                    full_report: str = FULL_REPORT_HINT, verdict: Verdict | None = None) -> str:
    """The Markdown report; at most `max_bytes` UTF-8 bytes when given.

    `full_report` completes the truncation note's sentence "The full report is …".
    """
    view = build_view(findings, verdict)
    verdict, blocks, footer = _verdict_lines(view), _blocks(view), [f"_{escape(view.caution)}_"]
    lines = verdict + [line for block in blocks for line in block.lines()] + footer
    if max_bytes is None or _size(lines) <= max_bytes:
        return "\n".join(lines) + "\n"
    lines = _fit(verdict, blocks, footer, max_bytes, full_report)
    if _size(lines) > max_bytes:  # a limit this small keeps the verdict, then as much of the note as fits
        lines = verdict + _note(sum(len(b.rows) for b in blocks), max_bytes, full_report)
    text = "\n".join(lines) + "\n"
    return text.encode("utf-8")[:max_bytes].decode("utf-8", errors="ignore")
