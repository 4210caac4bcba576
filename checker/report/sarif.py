"""The SARIF 2.1.0 report (OASIS Static Analysis Results Interchange Format 2.1.0, errata 01).

One run; `tool.driver.rules` are the limits. One result per finding that fails
(level "error") or warns (level "warning"), located at the limit's `id:` line in its
limits file and, for `each` limits, also at the part's line in the circuit
(a related location). A failing tolerance point's message ends with the command that
reproduces it. Artifact URIs are relative to the repository root, with
uriBaseId "SRCROOT" (left for the consumer to resolve, so reports do not depend on
where the check ran); files outside the root get absolute file URIs.
With --base, every result carries a baselineState (SARIF 2.1.0 §3.27.24): "new" or
"unchanged", and findings fixed by the change appear as "absent" results.
"""

from __future__ import annotations

import json
import os
from pathlib import Path
from typing import Any
from urllib.parse import quote

from checker import __version__
from checker.errors import Location
from checker.findings import Finding, Findings, Limit
from checker.report.junit import worst_sentence
from checker.report.view import circuit_paths, make_row

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
    return {"id": limit.id, "shortDescription": {"text": limit.about or limit.id},
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
    if row is None:
        return text + "."
    return text + f"; worst {worst_sentence(row)}." + (f" Reproduce: {row.reproduce}" if row.reproduce else "")


def result_json(finding: Finding, rule_index: int, root: Path, base: bool, path: str = "") -> dict[str, Any]:
    result: dict[str, Any] = {
        "ruleId": finding.limit.id, "ruleIndex": rule_index,
        "level": LEVELS.get(finding.limit.severity, "error"),
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
    return result


def render_sarif(findings: Findings, root: Path) -> str:
    """One SARIF log with one run, indented, ending in a newline."""
    base = findings.base_ref is not None
    reported = [f for f in findings.findings if f.status in ("fail", "warn")]
    absent = list(findings.fixed) if base else []
    limits: dict[str, Limit] = {}
    for finding in findings.findings + findings.fixed:
        limits.setdefault(finding.limit.id, finding.limit)
    index = {limit_id: i for i, limit_id in enumerate(limits)}
    paths = circuit_paths(findings)
    results = [result_json(f, index[f.limit.id], root, base, paths.get(f.circuit, "")) for f in reported]
    results += [result_json(f, index[f.limit.id], root, base) | {"baselineState": "absent"} for f in absent]
    driver = {"name": "nodegate", "version": __version__, "rules": [rule_json(limit) for limit in limits.values()]}
    run: dict[str, Any] = {"tool": {"driver": driver}, "results": results, "columnKind": "unicodeCodePoints"}
    log = {"$schema": SARIF_SCHEMA_URI, "version": SARIF_VERSION, "runs": [run]}
    return json.dumps(log, indent=2, ensure_ascii=False) + "\n"

