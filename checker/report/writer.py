"""Writing reports: every requested format is rendered before any file is touched,
and each file is replaced atomically (a temporary file in the same folder, then
`os.replace`), so a failed run never leaves a half-written or mixed set of reports.
"""

from __future__ import annotations

from pathlib import Path
from typing import Callable, Mapping

from checker.errors import NodegateError
from checker.files import write_atomic
from checker.findings import Findings
from checker.report.html import render_html
from checker.report.json_report import render_json
from checker.report.junit import render_junit
from checker.report.markdown import FULL_REPORT_HINT, JOB_SUMMARY_LIMIT, render_markdown
from checker.report.sarif import render_sarif

FORMATS = ("md", "html", "json", "junit", "sarif")


def _full_report_hint(targets: Mapping[str, Path]) -> str:
    """Where the truncated Markdown sends its readers: the HTML or JSON file, when written."""
    for name in ("html", "json"):
        if name in targets:
            return f"in {Path(targets[name]).as_posix()}"
    return FULL_REPORT_HINT


def _renderers(findings: Findings, targets: Mapping[str, Path], root: Path) -> dict[str, Callable[[], str]]:
    hint = _full_report_hint(targets)
    return {
        "md": lambda: render_markdown(findings, JOB_SUMMARY_LIMIT, full_report=hint),
        "html": lambda: render_html(findings),
        "json": lambda: render_json(findings),
        "junit": lambda: render_junit(findings),
        "sarif": lambda: render_sarif(findings, root),
    }


def _check_targets(targets: Mapping[str, Path]) -> None:
    """Refuse, before anything is written, targets that cannot be files: so no run writes half its reports."""
    seen: dict[Path, str] = {}
    for name, target in targets.items():
        path = Path(target)
        if path.is_dir():
            raise NodegateError(f"cannot write the {name} report to `{path}`: it is a folder")
        blocked = next((p for p in path.parents if p.exists() and not p.is_dir()), None)
        if blocked is not None:
            raise NodegateError(f"cannot write the {name} report to `{path}`: `{blocked}` is a file")
        if path.resolve() in seen:
            raise NodegateError(f"the {name} and {seen[path.resolve()]} reports would both go to `{path}`")
        seen[path.resolve()] = name


def write_reports(findings: Findings, targets: Mapping[str, Path], root: Path) -> None:
    """Render every format named in `targets` (md, html, json, junit, sarif), then write them all.

    The Markdown is cut to the CI job-summary limit (JOB_SUMMARY_LIMIT bytes).
    """
    unknown = sorted(set(targets) - set(FORMATS))
    if unknown:
        raise NodegateError(f"unknown report format `{unknown[0]}`; choose from {', '.join(FORMATS)}")
    _check_targets(targets)
    renderers = _renderers(findings, targets, root)
    texts = {name: renderers[name]() for name in targets}
    for name, text in texts.items():
        write_atomic(Path(targets[name]), text)
