"""The SARIF 2.1.0 report (OASIS Static Analysis Results Interchange Format 2.1.0, errata 01).

One run; `tool.driver.rules` are the limits. One result per finding that does not
hold: level "error" for what fails the check under the one verdict (`checker.verdict`),
"warning" for the rest (warnings, and with --fail-on new the failures the base already
had); a waived finding is a result too, marked suppressed (below). Each is located at the limit's `id:` line in its
limits file and, for `each` limits, also at the part's line in the circuit
(a related location). A failing tolerance point's message ends with the command that
reproduces it. Artifact URIs are relative to the repository root, with
uriBaseId "SRCROOT" (left for the consumer to resolve, so reports do not depend on
where the check ran); files outside the root get absolute file URIs.
With --base, every result carries a baselineState (SARIF 2.1.0 §3.27.24): "new" or
"unchanged", and findings fixed by the change appear as "absent" results.

The verdict itself is in the run's invocation (§3.20): `exitCode` is nodegate's exit code
and `exitCodeDescription` its verdict sentence; `executionSuccessful` stays true, since the
spec reserves it for whether the tool itself ran to the end, not for what it found. The
run's `properties` (a property bag, §3.8) hold the verdict as JSON states it.

A waived finding carries `suppressions` (§3.27.23, an array of suppression objects, §3.35):
kind "external" (the waiver lives in a limits file, not in the source it concerns),
status "accepted", `justification` the waiver's reason, and the waiver's end date in the
suppression's property bag as `until`. Field names and values are checked against the
OASIS 2.1.0 JSON schema the SARIF tests validate with; the section numbers are from memory.
"""

from __future__ import annotations

import json
import os
from pathlib import Path
from typing import Any
from urllib.parse import quote

from checker import __version__
from checker.errors import Location
from checker.findings import LINT_SOURCE, Finding, Findings, Limit
from checker.report.junit import worst_sentence
from checker.report.view import circuit_paths, make_row, make_verdict
from checker.verdict import Verdict, judge

SARIF_VERSION = "2.1.0"
SARIF_SCHEMA_URI = "https://docs.oasis-open.org/sarif/sarif/v2.1.0/errata01/os/schemas/sarif-schema-2.1.0.json"
ROOT_BASE_ID = "SRCROOT"
LEVELS = {"error": "error", "warning": "warning"}


def relative_uri(path: str, root: Path) -> tuple[str, str | None]:
    """(uri, uriBaseId): relative to `root` with SRCROOT when inside it, else an absolute file URI."""
    target = Path(os.path.abspath(path))
    for base in (Path(os.path.abspath(root)), Path(root).resolve()):
        for candidate in (target, target.resolve()):
            try:
                return quote(candidate.relative_to(base).as_posix()), ROOT_BASE_ID
            except ValueError:
                continue
    return target.as_uri(), None


def physical_location(location: Location, root: Path) -> dict[str, Any]:
    uri, base_id = relative_uri(location.path, root)
    artifact: dict[str, Any] = {"uri": uri}
    if base_id:
        artifact["uriBaseId"] = base_id
    region = {"startLine": max(location.line, 1), "startColumn": max(location.column, 1)}
    return {"physicalLocation": {"artifactLocation": artifact, "region": region}}


def rule_json(limit: Limit) -> dict[str, Any]:
    """A limit as a rule; a design lint's rule is described by its rule in words, as each of its
    findings carries its own message."""
    short = limit.check if limit.source == LINT_SOURCE else limit.about or limit.id
    return {"id": limit.id, "shortDescription": {"text": short},
            "fullDescription": {"text": limit.check or limit.about or limit.id},
            "defaultConfiguration": {"level": LEVELS.get(limit.severity, "error")}}


def message_text(finding: Finding, path: str = "") -> str:
    """What failed, where and by how much, in one paragraph, with the command that reproduces a
    failing tolerance point (`path`: the circuit's file)."""
    where = f"{finding.circuit}" + (f", part {finding.item}" if finding.item else "")
    text = f"{finding.limit.id} ({where}): {finding.limit.about}"
    row = make_row(finding, path) if finding.outcomes else None
    if finding.change == "fixed":
        return text + (f"; fixed by this change (margin on the base: {row.base_margin})." if row else
                       "; fixed by this change.")
    if row is None or finding.lint:
        return text if text.endswith((".", "?")) else text + "."
    return text + f"; worst {worst_sentence(row)}." + (f" Reproduce: {row.reproduce}" if row.reproduce else "")


def suppression_json(finding: Finding) -> list[dict[str, Any]]:
    """The waiver as an accepted external suppression; none for a finding without a waiver."""
    waiver = finding.waiver
    if finding.status != "waived" or waiver is None:
        return []
    return [{"kind": "external", "status": "accepted", "justification": waiver.reason,
             "properties": {"until": waiver.until.isoformat()}}]


def result_level(finding: Finding, verdict: Verdict) -> str:
    """"error" exactly when the finding fails the check; a waived one keeps its limit's severity."""
    if finding.status == "waived":
        return LEVELS.get(finding.limit.severity, "error")
    return "error" if verdict.counts(finding) else "warning"


def result_json(finding: Finding, rule_index: int, root: Path, base: bool, level: str,
                path: str = "") -> dict[str, Any]:
    result: dict[str, Any] = {
        "ruleId": finding.limit.id, "ruleIndex": rule_index, "level": level,
        "message": {"text": message_text(finding, path)},
        "partialFingerprints": {"nodegateFinding/v1": "|".join(finding.key)},
    }
    if finding.limit.location is not None:
        result["locations"] = [physical_location(finding.limit.location, root)]
    if finding.item_location is not None:
        related = physical_location(finding.item_location, root)
        related.update(id=1, message={"text": f"{finding.item} in circuit {finding.circuit}"})
        result["relatedLocations"] = [related]
    if base:
        result["baselineState"] = "unchanged" if finding.change == "unchanged" else "new"
    suppressions = suppression_json(finding)
    if suppressions:
        result["suppressions"] = suppressions
    return result


def invocation_json(findings: Findings, verdict: Verdict) -> dict[str, Any]:
    """The run's exit code and verdict sentence; the tool itself ran to the end."""
    return {"executionSuccessful": True, "exitCode": verdict.exit_code,
            "exitCodeDescription": make_verdict(findings, verdict).text}


def verdict_properties(verdict: Verdict) -> dict[str, Any]:
    return {"nodegateVerdict": {"passed": verdict.passed, "headline": verdict.headline,
                                "reasons": list(verdict.reasons), "failOn": verdict.policy.fail_on,
                                "strict": verdict.policy.strict}}


def render_sarif(findings: Findings, root: Path, verdict: Verdict | None = None) -> str:
    """One SARIF log with one run, indented, ending in a newline; levels and the invocation follow
    `verdict` (default: `--fail-on any`, not strict)."""
    verdict = verdict or judge(findings)
    base = findings.base_ref is not None
    reported = [f for f in findings.findings if f.status in ("fail", "warn", "waived")]
    absent = list(findings.fixed) if base else []
    limits: dict[str, Limit] = {}
    for finding in findings.findings + findings.fixed:
        limits.setdefault(finding.limit.id, finding.limit)
    index = {limit_id: i for i, limit_id in enumerate(limits)}
    paths = circuit_paths(findings)
    results = [result_json(f, index[f.limit.id], root, base, result_level(f, verdict), paths.get(f.circuit, ""))
               for f in reported]
    results += [result_json(f, index[f.limit.id], root, base, LEVELS.get(f.limit.severity, "error"))
                | {"baselineState": "absent"} for f in absent]
    driver = {"name": "nodegate", "version": __version__, "rules": [rule_json(limit) for limit in limits.values()]}
    run: dict[str, Any] = {"tool": {"driver": driver}, "invocations": [invocation_json(findings, verdict)],
                           "results": results, "columnKind": "unicodeCodePoints",
                           "properties": verdict_properties(verdict)}
    log = {"$schema": SARIF_SCHEMA_URI, "version": SARIF_VERSION, "runs": [run]}
    return json.dumps(log, indent=2, ensure_ascii=False) + "\n"

