"""Worst-case points in every report: the method and whether it proves the worst, the full point,
the command that reproduces a failing point, and outcomes with no operating point
(findings built by hand in report_charger)."""

from __future__ import annotations

import dataclasses
import json
import math
import re
import shlex
from html.parser import HTMLParser
from pathlib import Path

import pytest
from report_charger import CIRCUIT, LABEL, NO_SOLUTION, POINT, ROOT, at, charger, limit, no_point
from test_report_html import Collector

from checker.analysis.points import parse_point
from checker.findings import Analysis, CircuitResult, Finding, Findings
from checker.report import render_html, render_json, render_junit, render_markdown, render_sarif, summary_lines
from checker.report.annotations import render_annotations
from checker.report.markdown import code_span
from checker.report.overview import PLOT_LEFT as OVERVIEW_LEFT
from checker.report.overview import margin_overview
from checker.report.svg import PLOT_LEFT, margin_chart
from checker.report.view import analysis_sentence, build_view
from checker.repo.baseline import compare


def everything(findings: Findings) -> dict[str, str]:
    """Every renderer's text for `findings`."""
    return {"md": render_markdown(findings), "html": render_html(findings), "json": render_json(findings),
            "junit": render_junit(findings), "sarif": render_sarif(findings, Path(ROOT)),
            "terminal": "\n".join(summary_lines(findings)), "annotations": render_annotations(findings, Path(ROOT))}


def refuse(constant: str) -> float:
    raise ValueError(f"{constant} is not JSON")


def command_of(findings: Findings, limit_id: str) -> str:
    finding = next(f for f in findings.findings if f.limit.id == limit_id)
    return f"nodegate solve {CIRCUIT} --case {finding.worst.case} --at " + \
        ",".join(f"{name}={deviation * 100:+g}%" for name, deviation in POINT if deviation)


# JSON


def test_json_is_strict_and_carries_method_proof_point_and_error():
    document = json.loads(render_json(charger()), parse_constant=refuse)
    proved, broken, searched, _ = document["findings"]
    worst = proved["outcomes"][1]
    assert (worst["method"], worst["proved"], worst["error"]) == ("vertices", True, None)
    assert worst["point"] == dict(POINT)  # all six, C_IN at 0 included
    assert proved["outcomes"][0]["point"] is None  # nominal
    failed = broken["outcomes"][1]
    assert failed["error"] == NO_SOLUTION and failed["holds"] is False
    assert [failed[k] for k in ("value", "bound", "margin", "relative")] == [None] * 4
    assert broken["worst_margin"] is None and broken["worst_case"] == "cloudy"
    assert (searched["outcomes"][0]["method"], searched["outcomes"][0]["proved"]) == ("interior", False)


def test_json_method_and_proof_are_null_together_outside_worst_case():
    nominal = Findings((Finding(limit("x"), "charger", None, (at("sunny", 1.0, 5.0),), "pass"),), ())
    out = json.loads(render_json(nominal), parse_constant=refuse)["findings"][0]["outcomes"][0]
    assert (out["method"], out["proved"], out["point"], out["error"]) == (None, None, None, None)


# Markdown and HTML


def test_analysis_sentence_says_how_margins_are_found():
    text = analysis_sentence(Analysis("worst-case"))
    assert "every vertex" in text and "proves" in text and "linear" in text
    assert "corner search" in text and "interior search" in text and "not a proof" in text


def test_view_names_the_method_and_orders_no_operating_point_first():
    view = build_view(charger())
    assert [row.limit for row in view.failures] == ["sw-max", "out-max"]
    broken, proved = view.failures
    assert proved.method == "vertices, proved"
    assert broken.method == "corner search — a search, not a proof"
    assert view.warnings[0].method == "vertices, not a proof for a nonlinear circuit"
    assert (broken.value, broken.error) == ("no operating point", NO_SOLUTION)
    assert proved.case == f"cloudy ({LABEL})"
    assert proved.point == ("R_TOP +1 %", "R_BOT −1 %", "VPANEL −2 %", "U1.vout −5 %", "R_LOAD +5 %", "C_IN +0 %")


def test_reproduce_command_is_beside_failing_findings_only_and_solves_the_point():
    view = build_view(charger())
    assert not next(r for r in view.rows if r.limit == "ref-max").reproduce
    command = view.failures[1].reproduce
    words = shlex.split(command)
    assert words[:5] == ["nodegate", "solve", CIRCUIT, "--case", "cloudy"]
    assert parse_point(words[6]) == {name: d for name, d in POINT if d}


def test_markdown_shows_method_full_point_and_command():
    findings = charger()
    text = render_markdown(findings)
    assert "| method |" in text and "| vertices, proved |" in text
    assert "corner search — a search, not a proof" in text
    details = re.findall(r"<details><summary>Full point: 6 values</summary>\n\n(.*)\n\n</details>", text)
    assert details and all("R\\_LOAD +5 %" in d and "C\\_IN +0 %" in d for d in details)
    for limit_id in ("out-max", "sw-max"):
        assert f"Reproduce: `{command_of(findings, limit_id)}`" in text
    assert "ref-max** in" not in text  # a passing finding gets no entry


def test_markdown_no_operating_point_replaces_the_numbers():
    text = render_markdown(charger())
    row = next(line for line in text.splitlines() if line.startswith("| charger | sw-max"))
    assert "| no operating point | — | — | — |" in row
    escaped = NO_SOLUTION.replace("`", "\\`")
    assert f"No operating point: {escaped}" in text


def test_markdown_truncation_keeps_entries_whole():
    findings = charger()
    many = dataclasses.replace(findings, findings=findings.findings[:2] * 400)
    text = render_markdown(many, max_bytes=30_000)
    assert len(text.encode()) <= 30_000 and "Truncated" in text
    assert text.count("<details>") == text.count("</details>")


def test_code_span_keeps_backticks_and_lines_literal():
    assert code_span("a`b") == "``a`b``"
    assert code_span("`x`") == "`` `x` ``"
    assert code_span("one\ntwo") == "`one two`"


def html_text(html: str) -> str:
    collector = Collector()
    collector.feed(html)
    collector.close()
    assert not collector.errors and not collector.stack
    return " ".join(collector.text)


def test_html_shows_method_full_point_and_command():
    findings = charger()
    html = render_html(findings)
    text = html_text(html)
    assert "vertices, proved" in text and "corner search — a search, not a proof" in text
    assert html.count('<details class="point">') >= 4  # in the tables and in the circuit section
    assert "<li>C_IN +0 %</li>" in html and "<li>U1.vout −5 %</li>" in html
    for limit_id in ("out-max", "sw-max"):
        assert command_of(findings, limit_id) in text
    assert "Reproduce this point" in html
    assert "no operating point" in text and NO_SOLUTION in text


def test_html_command_is_escaped():
    findings = charger()
    hostile = dataclasses.replace(findings, circuits=(CircuitResult("charger", "x", "<b>a&b</b>.circuit", ()),))
    html = render_html(hostile)
    assert "<b>a&b</b>" not in html and "&lt;b&gt;a&amp;b&lt;/b&gt;.circuit" in html


# Terminal, JUnit, SARIF, annotations


def test_terminal_names_the_corner_and_the_missing_operating_point():
    lines = summary_lines(charger())
    assert lines[0] == f"FAIL charger: sw-max [Q_SW], case cloudy ({LABEL}): no operating point: {NO_SOLUTION}"
    assert lines[1].startswith(f"FAIL charger: out-max, case cloudy ({LABEL}): 5.20 V vs limit 5.00 V")


def test_junit_and_sarif_carry_corner_error_and_command():
    findings = charger()
    junit = render_junit(findings)
    assert f"case cloudy ({LABEL}): no operating point: {NO_SOLUTION}" in junit
    assert f"reproduce: {command_of(findings, 'out-max')}" in junit
    assert "found by: vertices, proved" in junit
    results = json.loads(render_sarif(findings, Path(ROOT)), parse_constant=refuse)["runs"][0]["results"]
    messages = {r["ruleId"]: r["message"]["text"] for r in results}
    assert f"case cloudy ({LABEL}): no operating point: {NO_SOLUTION}" in messages["sw-max"]
    assert messages["out-max"].endswith(f"Reproduce: {command_of(findings, 'out-max')}")


def test_annotations_name_the_corner_and_the_missing_operating_point():
    lines = render_annotations(charger(), Path(ROOT)).replace("%25", "%").splitlines()
    broken = next(line for line in lines if "sw-max" in line)
    assert f"corner {LABEL}): no operating point: {NO_SOLUTION}" in broken


NUMBER_WORDS = re.compile(r"(?<![A-Za-z])[-+]?(inf|infinity|nan)(?![A-Za-z])", re.IGNORECASE)


@pytest.mark.parametrize("name", ["md", "html", "json", "junit", "sarif", "terminal", "annotations"])
def test_no_renderer_writes_inf_or_nan_and_each_says_there_is_no_operating_point(name):
    text = everything(charger())[name]
    assert NUMBER_WORDS.search(text) is None
    assert ('"error": ' + json.dumps(NO_SOLUTION) if name == "json" else "no operating point") in text


# Charts


def test_margin_chart_clips_no_operating_point_at_the_left_edge():
    broken = charger().findings[1]
    chart = margin_chart(broken)
    bar = chart.bars[1]
    assert bar.clipped and not bar.holds and bar.text == "FAIL no operating point"
    assert bar.x == pytest.approx(PLOT_LEFT) and bar.width == pytest.approx(chart.zero_x - PLOT_LEFT)
    assert bar.width > 0  # the other case holds, yet the failing bar has room on the left
    assert all(math.isfinite(v) for b in chart.bars for v in (b.x, b.y, b.width))


def test_margin_chart_with_only_missing_operating_points():
    only = dataclasses.replace(charger().findings[1], outcomes=(no_point("sunny"), no_point("cloudy")))
    chart = margin_chart(only)
    assert all(b.clipped and b.x == pytest.approx(PLOT_LEFT) and b.width > 0 for b in chart.bars)


def test_overview_draws_no_operating_point_first_clipped_with_a_note():
    overview = margin_overview(build_view(charger()).rows)
    first = overview.bars[0]
    assert first.label == "sw-max \u00b7 Q_SW" and first.note == "no operating point"
    assert first.clipped == -1 and first.x == pytest.approx(OVERVIEW_LEFT) and first.word == "FAIL"
    assert NO_SOLUTION in first.title and first.value == "—"
    assert all(not bar.note for bar in overview.bars[1:])


# Against a base revision


def test_base_comparison_with_no_operating_point_on_either_side():
    head = charger()
    healthy = dataclasses.replace(head.findings[1], outcomes=(at("cloudy", 4.0, 5.0),), status="pass")
    base = dataclasses.replace(head, findings=(head.findings[0], healthy))
    marked = compare(head, base, "main")
    broken = next(f for f in marked.findings if f.limit.id == "sw-max")
    assert broken.base_margin == pytest.approx(1.0) and broken.change == "new"
    row = next(r for r in build_view(marked).rows if r.limit == "sw-max")
    assert (row.base_margin, row.margin_change) == ("1.00 V", "")

    reverse = compare(base, head, "main")  # the base had no operating point, the head has one
    fixed = next(f for f in reverse.findings if f.limit.id == "sw-max")
    assert fixed.base_margin == -math.inf and fixed.change == "fixed"
    row = next(r for r in build_view(reverse).rows if r.limit == "sw-max")
    assert (row.base_margin, row.margin_change) == ("no operating point", "")
    for text in everything(reverse).values():
        assert NUMBER_WORDS.search(text) is None


def test_html_report_stays_self_contained():
    class Fetches(HTMLParser):
        def __init__(self):
            super().__init__()
            self.found: list[str] = []

        def handle_starttag(self, tag, attrs):
            self.found += [v for k, v in attrs if k in ("src", "href") and v and not v.startswith("#")]

    parser = Fetches()
    parser.feed(render_html(charger()))
    assert parser.found == []


@pytest.mark.parametrize("base_ref", [None, "main"])
def test_html_detail_rows_span_the_whole_table(base_ref):
    html = render_html(dataclasses.replace(charger(), base_ref=base_ref))
    table = html[html.index("<h2>Failing limits</h2>"):html.index("</table>")]
    spans = {int(n) for n in re.findall(r'colspan="(\d+)"', table)}
    assert spans == {len(re.findall(r"<th[ >]", table))}
