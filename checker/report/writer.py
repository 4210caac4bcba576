"""Writing reports: every requested format is rendered before any file is touched,
and each file is replaced atomically (a temporary file in the same folder, then
`os.replace`), so a failed run never leaves a half-written or mixed set of reports.
"""

from __future__ import annotations

import os
import tempfile
from pathlib import Path
from typing import Callable, Mapping

from checker.errors import NodegateError
from checker.findings import Findings
from checker.report.html import render_html
from checker.report.json_report import render_json
from checker.report.junit import render_junit
from checker.report.markdown import FULL_REPORT_HINT, JOB_SUMMARY_LIMIT, render_markdown
from checker.report.sarif import render_sarif

FORMATS = ("md", "html", "json", "junit", "sarif")


def write_atomic(path: Path, text: str) -> None:
    """Write UTF-8 `text` to `path`, creating its folders; readers see the old file or the new one."""
    path = Path(path)
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        handle = tempfile.NamedTemporaryFile("w", encoding="utf-8", newline="", dir=path.parent,
                                             prefix=f".{path.name}.", suffix=".tmp", delete=False)
    except OSError as error:
        raise NodegateError(f"cannot write the report `{path}`: {error.strerror or error}") from None
    try:
        with handle:
            handle.write(text)
            handle.flush()
            os.fsync(handle.fileno())
        os.chmod(handle.name, 0o644)
        os.replace(handle.name, path)
    except OSError as error:
        Path(handle.name).unlink(missing_ok=True)
        raise NodegateError(f"cannot write the report `{path}`: {error.strerror or error}") from None


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


def write_reports(findings: Findings, targets: Mapping[str, Path], root: Path) -> None:
    """Render every format named in `targets` (md, html, json, junit, sarif), then write them all.

    The Markdown is cut to the CI job-summary limit (JOB_SUMMARY_LIMIT bytes).
    """
    unknown = sorted(set(targets) - set(FORMATS))
    if unknown:
        raise NodegateError(f"unknown report format `{unknown[0]}`; choose from {', '.join(FORMATS)}")
    renderers = _renderers(findings, targets, root)
    texts = {name: renderers[name]() for name in targets}
    for name, text in texts.items():
        write_atomic(Path(targets[name]), text)
