"""Renderers over `checker.findings.Findings`: Markdown, HTML, JSON, JUnit XML, SARIF, terminal.

Every renderer returns text and does no I/O; `write_reports` renders all requested
formats first and only then writes them, each atomically. Markdown, HTML and the
terminal summary share one view of the findings (`checker.report.view`). Every renderer
takes the run's one `checker.verdict.Verdict` (without it, that of `--fail-on any`) and
states it, so no report can disagree with the exit code.
"""

from checker.report.html import render_html
from checker.report.json_report import render_json
from checker.report.junit import render_junit
from checker.report.markdown import JOB_SUMMARY_LIMIT, render_markdown
from checker.report.sarif import render_sarif
from checker.report.solve import render_solve_json, render_solve_table
from checker.report.terminal import summary_lines
from checker.report.writer import FORMATS, write_reports

__all__ = [
    "FORMATS", "JOB_SUMMARY_LIMIT", "render_html", "render_json", "render_junit", "render_markdown",
    "render_sarif", "render_solve_json", "render_solve_table", "summary_lines",
    "write_reports",
]
