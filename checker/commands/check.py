"""`nodegate check`: run the check, compare with a base revision, write reports, decide the verdict."""

from __future__ import annotations

import argparse
import datetime
import sys
from pathlib import Path

from checker.errors import ConfigError, NodegateError, render, shown_path
from checker.findings import Findings
from checker.pipeline import run_check
from checker.repo.baseline import compare
from checker.repo.config import Config, find_config, load_config
from checker.repo.git import repo_location, revision_checkout
from checker.report import summary_lines, write_reports
from checker.report.annotations import render_annotations
from checker.report.writer import stoppable
from checker.solver.selfcheck import conditioning_warnings
from checker.verdict import Policy, judge

DEFAULT_FORMATS = ("md", "html", "json")
FILE_NAMES = {"md": "report.md", "html": "report.html", "json": "report.json",
              "junit": "report.junit.xml", "sarif": "report.sarif"}


def run(args: argparse.Namespace) -> int:
    """The check; SIGTERM or SIGINT end it with 128 + the signal's number, leaving no temporary
    file or base-revision tree behind and the previous reports as they were (`stoppable`)."""
    return stoppable(lambda: _check(args))


def _check(args: argparse.Namespace) -> int:
    config = load_config(find_config(Path(args.directory), args.config))
    today = args.as_of or datetime.date.today()
    findings = run_check(config, today, _progress(), remedies=not args.no_remedies)
    if args.base:
        findings = compare(findings, _base_findings(config, args.base, today), args.base)
    root = _source_root(config)
    formats = args.format or tuple(config.reports) or DEFAULT_FORMATS
    targets = _targets(config, formats, args.out)
    verdict = judge(findings, Policy(args.fail_on, args.strict))
    write_reports(findings, targets, root, verdict)
    if "annotations" in formats:
        sys.stdout.write(render_annotations(findings, root, verdict))
    lines = summary_lines(findings, verdict)
    for line in lines[:-1]:
        print(line)
    for warning in conditioning_warnings([p for c in findings.circuits for p in c.operating_points]):
        print(f"WARN {warning}")  # numerical health (docs/models.md, "Checking its own answers"): no verdict change
    for path in targets.values():
        print(f"report: {shown_path(path)}")
    print(lines[-1])  # the verdict, last, as every report states it
    return verdict.exit_code


def _progress():
    """Progress lines on a terminal only: CI logs stay clean."""
    if not sys.stderr.isatty():
        return None
    return lambda message: print(f"nodegate: {message}", file=sys.stderr)


def _base_findings(config: Config, ref: str, today: datetime.date) -> Findings | None:
    """The same check on revision `ref`; None when the base has no configuration or cannot be checked.

    A missing REF is an input error (exit 2); a base that lacks the configuration, a
    circuit, or has an error of its own counts as "no base": every failure is new.
    """
    with revision_checkout(config.root, ref) as base_root:
        base_config = base_root / config.path.name
        if not base_config.is_file():
            print(f"nodegate: `{ref}` has no {config.path.name}; every failure counts as new", file=sys.stderr)
            return None
        try:
            return run_check(load_config(base_config), today, remedies=False)  # only margins are compared
        except NodegateError as error:
            print(f"nodegate: the base revision `{ref}` cannot be checked; every failure counts as new:\n"
                  f"{render(error)}", file=sys.stderr)
            return None


def _source_root(config: Config) -> Path:
    """Where report file paths are relative to: the git top level, or the configuration's folder."""
    try:
        return repo_location(config.root)[0]
    except ConfigError:
        return config.root


def _targets(config: Config, formats: tuple[str, ...], out: Path | None) -> dict[str, Path]:
    """Report format -> file: `--out DIR`, else the configuration's paths, else build/nodegate/ under the root."""
    targets = {}
    for fmt in formats:
        if fmt == "annotations":
            continue
        if out is not None:
            targets[fmt] = out / FILE_NAMES[fmt]
        else:
            targets[fmt] = config.reports.get(fmt, config.root / "build" / "nodegate" / FILE_NAMES[fmt])
    return targets
