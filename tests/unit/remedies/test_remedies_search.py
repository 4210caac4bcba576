"""The remedy search: the preferred-values pack's remedies, design lints, the budget, overridden
values, and what every report shows."""

from __future__ import annotations

import datetime
import json

import pytest

from checker.analysis import analyse
from checker.findings import Analysis
from checker.language import parse_design
from checker.limits import compile_limits, load_limit_text, load_pack
from checker.remedies.search import Budget, find_root, with_remedies
from checker.report import summary_lines
from checker.report.json_report import render_json
from checker.report.markdown import render_markdown
from checker.report.view import remedy_text

TODAY = datetime.date(2030, 1, 1)
LED = ('circuit bench "Bench"\nground gnd\n'
       "source V1 from a to gnd : 5 V\n"
       "resistor R1 from a to k : 470 ohm, tol = 5%\n"
       "led D1 from k to gnd : vf = 2.0 V at 10 mA\n")
LED_LIMIT = "limits:\n  - id: led-current\n    about: LED bright enough\n    check: current(R1) >= 10 mA\n"


def _run(circuit: str, files, analysis: Analysis = Analysis(), budget: Budget | None = None):
    design = parse_design(circuit, "bench.circuit")
    findings = analyse(compile_limits(files, [design]), [design], TODAY, analysis)
    return with_remedies(findings, files, [design], TODAY, analysis, budget=budget)


def test_preferred_values_pack_names_the_nearest_value_and_both_neighbours():
    circuit = ('circuit bench "Bench"\nground gnd\nsource V1 from a to gnd : 5 V\n'
               "resistor R1 from a to b : 3.4 kohm, tol = 5%\n"
               "resistor R2 from b to gnd : 4.7 kohm, tol = 1%\n"
               "resistor R3 from b to gnd : 4.7 kohm, tol = 5%\n"
               "resistor R4 from b to gnd : 1 kohm\n"
               "capacitor C1 from b to gnd : 5 uF, tol = 20%\n")
    found = _run(circuit, [load_pack("preferred-values")], Analysis("worst-case"))
    warned = {f.item: f for f in found.findings if f.status == "warn"}
    assert set(warned) == {"R1", "R2", "C1"}  # R3 is E24 at 5 %, R4 declares no tolerance
    assert warned["R1"].worst.bound == 3300.0 and warned["R1"].worst.value == 3400.0
    assert [(r.to_value, r.series) for r in warned["R1"].remedies] == [(3300.0, "E24"), (3600.0, "E24")]
    assert [r.to_value for r in warned["R2"].remedies] == [4750.0, 4640.0]  # E96, the nearer first
    assert [r.to_value for r in warned["C1"].remedies] == [4.7e-6, 6.8e-6]  # E6
    for finding in warned.values():  # the other warnings stay: no single change makes every limit hold
        assert all(r.margin_after == 0.0 and not r.breaks and not r.all_limits_hold for r in finding.remedies)
        assert not finding.remedy_note and all(len(r.failing) == 2 for r in finding.remedies)
    assert warned["R1"].remedies[0].failing == ("preferred-capacitor-value [C1]", "preferred-resistor-value [R2]")
    assert remedy_text(warned["R1"].remedies[0]).endswith(
        "; preferred-capacitor-value [C1], preferred-resistor-value [R2] still fail")


def test_design_lints_get_no_remedies():
    circuit = LED + "resistor R9 from k to stray : 1 kohm\n"
    found = _run(circuit, [load_limit_text(LED_LIMIT, "limits.yaml")])
    lints = [f for f in found.findings if f.lint]
    assert lints and all(not f.remedies and not f.remedy_note for f in lints)
    assert next(f for f in found.findings if not f.lint).remedies


def test_a_spent_budget_is_reported():
    found = _run(LED, [load_limit_text(LED_LIMIT, "limits.yaml")], budget=Budget(solves=0))
    finding = found.findings[0]
    assert not finding.remedies and "stopped early" in finding.remedy_note


def test_confirmations_are_budgeted_in_tolerance_analysis():
    found = _run(LED, [load_limit_text(LED_LIMIT, "limits.yaml")], Analysis("worst-case"),
                 Budget(confirmations=0))
    assert not found.findings[0].remedies and "stopped early" in found.findings[0].remedy_note


def test_a_value_a_case_sets_is_not_a_remedy():
    circuit = LED + "case low : V1 = 4.5 V\ncase high : V1 = 5.5 V\n"
    found = _run(circuit, [load_limit_text(LED_LIMIT, "limits.yaml")])
    names = [r.name for r in found.findings[0].remedies]
    assert names == ["R1"]  # V1 is a condition of each case


def test_passing_and_waived_limits_get_no_search():
    limits = LED_LIMIT + "waivers:\n  - limit: led-current\n    reason: dim on purpose\n    until: 2031-01-01\n"
    found = _run(LED, [load_limit_text(limits, "limits.yaml")])
    assert found.findings[0].status == "waived" and not found.findings[0].remedies


def test_every_report_shows_the_remedies():
    found = _run(LED, [load_limit_text(LED_LIMIT, "limits.yaml")])
    lines = summary_lines(found)
    assert lines[0].startswith("FAIL bench: led-current")
    assert lines[1:3] == [  # the smaller change first: 5 V to 6.8 V is a factor 1.36, 470 Ω to 270 Ω 1.74
        "  remedy: V1 5.00 V \u2192 6.80 V (round): margin +210 \u00b5A (2.1 %); the only limit holds",
        "  remedy: R1 470 \u03a9 \u2192 270 \u03a9 (E24): margin +1.09 mA (10.9 %); the only limit holds"]
    assert "Remedy: R1 470 \u03a9 \u2192 270 \u03a9 (E24)" in render_markdown(found)
    remedy = json.loads(render_json(found))["findings"][0]["remedies"][1]
    assert {k: remedy[k] for k in ("part", "property", "from", "to", "series", "all_limits_hold")} == \
        {"part": "R1", "property": "value", "from": 470.0, "to": 270.0, "series": "E24", "all_limits_hold": True}
    assert remedy["margin_after"] > 0 and abs(remedy["root"] - 300.0) < 1e-6


def test_find_root_takes_the_nearer_side_when_both_sides_hold():
    # A margin that holds outside 8 .. 13 (a `not in` window), from 10: the grid finds holding values
    # both ways, and the nearer by ratio is 8 (ln(10/8) = 0.22 < ln(13/10) = 0.26); the root is 8 exactly.
    def margin(values):
        return [(max(x - 13.0, 8.0 - x) / 10.0, x >= 13.0 or x <= 8.0) for x in values]

    root, sign = find_root(margin, 10.0)
    assert sign == -1
    assert root == pytest.approx(8.0, rel=1e-9)
