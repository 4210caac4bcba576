"""The HTML report at scale: above FULL_DETAIL findings, failing, waived, warning and near findings
stay in full and the ones holding with room to spare are summarised per limit."""

from __future__ import annotations

from checker.report import html
from checker.report.html import circuit_view, render_html
from checker.report.view import NEAR, build_view
from report_bike_light import bike_light


def test_comfortable_findings_are_summarised_per_limit_and_the_rest_kept_in_full():
    findings = bike_light()
    view = build_view(findings)
    circuit = findings.circuits[0]
    full = circuit_view(circuit, view.rows)
    assert not full.summaries and not full.rows  # small: every finding in full, as before
    squeezed = circuit_view(circuit, view.rows, full_detail=0)
    kept = [row for row, _ in squeezed.limits] + list(squeezed.rows)
    for row in kept:
        assert row.status != "pass" or not row.finding.worst.relative >= NEAR
    summarised = [row for row, _ in full.limits if all(row is not other for other in kept)]
    assert len(kept) + len(summarised) == len(full.limits) and kept and summarised
    assert sum(summary.count for summary in squeezed.summaries) == len(summarised)
    for summary in squeezed.summaries:
        mine = [row for row in summarised if row.limit == summary.limit]
        assert summary.worst.finding.worst.relative == min(row.finding.worst.relative for row in mine)


def test_every_failing_finding_and_the_verdict_survive_summarising(monkeypatch):
    monkeypatch.setattr(html, "FULL_DETAIL", 0)
    monkeypatch.setattr(html, "MAX_CHARTS", 1)
    findings = bike_light()
    text = render_html(findings)
    view = build_view(findings)
    assert view.verdict.headline in text
    for row in view.failures:
        assert text.count(f'<span class="limit-id">{row.limit}</span>') >= 2  # failing table and circuit section

