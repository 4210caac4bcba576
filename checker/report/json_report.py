"""The JSON report, for other tools: every limit x circuit x item x case, in SI floats.

Shape (marker "schema": "nodegate-findings/1"): `analysis` (the tolerance mode, and
samples and seed for Monte Carlo), `verdict` (the one verdict, `checker.verdict`: `passed`,
`exit_code`, `headline`, `reasons`, the policy, and counts), `limits` (metadata of each limit
once), `findings` (each with its outcomes and worst case, `drivers`: parts with the
margin change over their tolerance band, `fail_fraction` for Monte Carlo, and `remedies`:
`part`, `property`, `from`, `to`, `series`, `margin_after`, `all_limits_hold`, docs/remedies.md),
`fixed` (with --base), `waiver_notes`, and `circuits` with the operating point of every case
in the shape of `solve --format json`. Temperatures are kelvin, flagged `absolute`;
NaN and infinities become null so that any JSON reader accepts the file. Up to COMPACT_OUTCOMES
outcomes the document is indented; above, compact (the same document, without the whitespace).

Each outcome also carries `method` ("vertices", "corner-search", "interior"; null outside
worst-case) with `proved` (true or false beside a method, else null), `point` (every
toleranced value and its deviation as a fraction, {"R1": 0.05, "U1.vout": -0.05}, in full;
null at nominal) and `error` (the solver's message when the circuit has no operating point
there, else null; value, bound, margin and relative are then null and `holds` false).
"""

from __future__ import annotations

import json
from typing import Any

from checker.errors import Location
from checker.findings import Finding, Findings, Limit, Outcome, Remedy, Waiver, WaiverNote
from checker.report.solve import case_json, finite_or_none, worst_self_check
from checker.report.view import make_verdict, new_failures
from checker.verdict import Verdict, judge

SCHEMA = "nodegate-findings/1"


def location_json(location: Location | None) -> dict[str, Any] | None:
    if location is None:
        return None
    return {"path": location.path, "line": location.line, "column": location.column}


def limit_json(limit: Limit) -> dict[str, Any]:
    return {"id": limit.id, "about": limit.about, "check": limit.check, "severity": limit.severity,
            "each": limit.each, "where": limit.where,
            "cases": list(limit.cases) if limit.cases is not None else None,
            "source": limit.source, "location": location_json(limit.location)}


def waiver_json(waiver: Waiver | None) -> dict[str, Any] | None:
    if waiver is None:
        return None
    return {"limit": waiver.limit, "part": waiver.part, "case": waiver.case, "reason": waiver.reason,
            "until": waiver.until.isoformat(), "location": location_json(waiver.location)}


def outcome_json(outcome: Outcome) -> dict[str, Any]:
    return {"case": outcome.case, "state": outcome.state or None, "corner": outcome.corner or None,
            "value": finite_or_none(outcome.value), "bound": finite_or_none(outcome.bound),
            "margin": finite_or_none(outcome.margin), "relative": finite_or_none(outcome.relative),
            "unit": outcome.unit, "absolute": outcome.absolute, "holds": outcome.holds,
            "method": outcome.method or None, "proved": outcome.proved if outcome.method else None,
            "point": dict(outcome.point) or None, "error": outcome.error or None}


def finding_json(finding: Finding) -> dict[str, Any]:
    worst = finding.worst if finding.outcomes else None
    return {"limit": finding.limit.id, "circuit": finding.circuit, "item": finding.item,
            "status": finding.status, "severity": finding.limit.severity,
            "worst_case": worst.case if worst else None,
            "worst_margin": finite_or_none(worst.margin) if worst else None,
            "change": finding.change,
            "base_margin": finite_or_none(finding.base_margin) if finding.base_margin is not None else None,
            "waiver": waiver_json(finding.waiver), "item_location": location_json(finding.item_location),
            "drivers": [{"part": part, "margin_change": finite_or_none(change)} for part, change in finding.drivers],
            "fail_fraction": finding.fail_fraction,
            "remedies": [remedy_json(r) for r in finding.remedies], "remedy_note": finding.remedy_note or None,
            "outcomes": [outcome_json(o) for o in finding.outcomes]}


def remedy_json(remedy: Remedy) -> dict[str, Any]:
    """One remedy (docs/remedies.md): values in SI (`unit` as written), `margin_after` in the limit's unit."""
    return {"part": remedy.part, "property": remedy.property, "from": remedy.from_value, "to": remedy.to_value,
            "unit": remedy.unit, "series": remedy.series, "root": finite_or_none(remedy.root_value),
            "margin_after": finite_or_none(remedy.margin_after),
            "relative_after": finite_or_none(remedy.relative_after),
            "all_limits_hold": remedy.all_limits_hold, "limits": remedy.limits, "breaks": list(remedy.breaks)}


def note_json(note: WaiverNote) -> dict[str, Any]:
    return {"problem": note.problem, "waiver": waiver_json(note.waiver)}


def verdict_json(findings: Findings, verdict: Verdict) -> dict[str, Any]:
    """The verdict as the other reports state it, with the policy it was decided under and the counts."""
    counts = {status: len(findings.with_status(status)) for status in ("pass", "fail", "warn", "waived")}
    return {"passed": verdict.passed, "exit_code": verdict.exit_code, "headline": verdict.headline,
            "reasons": list(verdict.reasons), "text": make_verdict(findings, verdict).text,
            "fail_on": verdict.policy.fail_on, "strict": verdict.policy.strict,
            "findings": len(findings.findings), **counts,
            "expired_waivers": len(findings.expired_waivers), "unused_waivers": len(findings.unused_waivers),
            "new_failures": new_failures(findings), "fixed": len(findings.fixed)}


COMPACT_OUTCOMES = 10_000
"""Above this many outcomes the document is written compact (no indentation, no spaces after
separators): a file that large is for tools, and indentation would add a third to its size."""


def render_json(findings: Findings, verdict: Verdict | None = None) -> str:
    """The whole run as one JSON document ending in a newline, indented up to COMPACT_OUTCOMES
    outcomes and compact above; `verdict` defaults to that of `--fail-on any`, not strict."""
    limits = {f.limit.id: f.limit for f in findings.findings + findings.fixed}
    document = {
        "schema": SCHEMA,
        "base_ref": findings.base_ref,
        "analysis": _analysis(findings.analysis),
        "verdict": verdict_json(findings, verdict or judge(findings)),
        "limits": [limit_json(limit) for limit in limits.values()],
        "findings": [finding_json(f) for f in findings.findings],
        "fixed": [finding_json(f) for f in findings.fixed],
        "waiver_notes": [note_json(n) for n in findings.waiver_notes],
        "circuits": [{"name": c.name, "title": c.title, "path": c.path,
                      "self_check": worst_self_check(c.operating_points),
                      "cases": [case_json(p) for p in c.operating_points]} for c in findings.circuits],
    }
    outcomes = sum(len(f.outcomes) for f in findings.findings + findings.fixed)
    layout = {"indent": 2} if outcomes <= COMPACT_OUTCOMES else {"separators": (",", ":")}
    return json.dumps(document, ensure_ascii=False, allow_nan=False, **layout) + "\n"


def _analysis(analysis) -> dict:
    """The mode, Monte Carlo's samples and seed, and worst-case's vertex bound (null: the default, 16)."""
    found = {"mode": analysis.mode, "samples": analysis.samples, "seed": analysis.seed}
    if analysis.mode == "worst-case":
        found["vertex_values"] = analysis.vertex_values
    return found
