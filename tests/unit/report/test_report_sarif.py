"""The SARIF 2.1.0 report, validated against the OASIS schema kept outside the repository."""

from __future__ import annotations

import dataclasses
import json
from pathlib import Path

import jsonschema
import pytest
from report_bike_light import ROOT, bike_light, bike_light_with_base, hostile

from checker.report import render_sarif
from checker.report.sarif import relative_uri

# <repo>/../shared/schemas: tests/unit/report/ is three folders below the repository root.
SCHEMA = Path(__file__).resolve().parents[3] / ".." / "shared" / "schemas" / "sarif-schema-2.1.0.json"


@pytest.fixture(scope="module")
def schema():
    if not SCHEMA.is_file():
        pytest.skip(f"the SARIF 2.1.0 schema is not at {SCHEMA} (kept outside the repository)")
    return json.loads(SCHEMA.read_text(encoding="utf-8"))


@pytest.mark.parametrize("make", [bike_light, bike_light_with_base, hostile])
def test_validates_against_the_sarif_schema(schema, make):
    log = json.loads(render_sarif(make(), Path(ROOT)))
    jsonschema.Draft4Validator(schema).validate(log)
    assert log["version"] == "2.1.0"


def test_rules_are_the_limits():
    driver = json.loads(render_sarif(bike_light(), Path(ROOT)))["runs"][0]["tool"]["driver"]
    assert driver["name"] == "nodegate"
    rules = {r["id"]: r for r in driver["rules"]}
    assert list(rules) == ["led-current", "resistor-dissipation", "driver-junction", "sense-ratio"]
    assert rules["driver-junction"]["defaultConfiguration"]["level"] == "warning"
    assert rules["led-current"]["shortDescription"]["text"] == "Tail LED current stays in its visible range"
    assert rules["led-current"]["fullDescription"]["text"] == "current(LED_TAIL) in 15 mA .. 25 mA"


def test_one_result_per_finding_that_does_not_hold_at_the_limit_line():
    run = json.loads(render_sarif(bike_light(), Path(ROOT)))["runs"][0]
    results = run["results"]
    assert [(r["ruleId"], r["level"], "suppressions" in r) for r in results] == [
        ("led-current", "error", False), ("resistor-dissipation", "error", True), ("driver-junction", "warning", False)]
    location = results[0]["locations"][0]["physicalLocation"]
    assert location["artifactLocation"] == {"uri": "boards/tail_light/limits.yaml", "uriBaseId": "SRCROOT"}
    assert location["region"] == {"startLine": 3, "startColumn": 5}
    assert run["tool"]["driver"]["rules"][results[2]["ruleIndex"]]["id"] == "driver-junction"
    assert "cold_night" in results[0]["message"]["text"]


def test_each_limit_points_at_the_part_too():
    findings = bike_light()
    failing = dataclasses.replace(findings.findings[1], status="fail")
    run = json.loads(render_sarif(dataclasses.replace(findings, findings=(failing,)), Path(ROOT)))["runs"][0]
    related = run["results"][0]["relatedLocations"][0]
    assert related["physicalLocation"]["artifactLocation"]["uri"] == "boards/tail_light/tail_light.circuit"
    assert related["physicalLocation"]["region"]["startLine"] == 8
    assert "R_SENSE" in related["message"]["text"]


def test_baseline_states():
    results = json.loads(render_sarif(bike_light_with_base(), Path(ROOT)))["runs"][0]["results"]
    assert [(r["ruleId"], r["baselineState"]) for r in results] == \
           [("led-current", "new"), ("resistor-dissipation", "new"), ("driver-junction", "unchanged"),
            ("sense-ratio", "absent")]
    assert results[3]["message"]["text"].endswith("fixed by this change (margin on the base: -0.02).")
    assert "baselineState" not in json.loads(render_sarif(bike_light(), Path(ROOT)))["runs"][0]["results"][0]


def test_uris_relative_to_root_or_absolute_outside(tmp_path):
    assert relative_uri(str(tmp_path / "a b" / "limits.yaml"), tmp_path) == ("a%20b/limits.yaml", "SRCROOT")
    outside = tmp_path.parent / "elsewhere.yaml"
    uri, base = relative_uri(str(outside), tmp_path)
    assert base is None and uri.startswith("file:///")


def test_waived_finding_is_an_accepted_external_suppression():
    """SARIF 2.1.0 suppression object (§3.35, section number from memory; fields as in the schema
    above): the waiver's reason is the justification, its end date a property."""
    run = json.loads(render_sarif(bike_light(), Path(ROOT)))["runs"][0]
    waived = next(r for r in run["results"] if r["ruleId"] == "resistor-dissipation")
    assert waived["suppressions"] == [{"kind": "external", "status": "accepted",
                                       "justification": "Pulsed drive, 10 % duty",
                                       "properties": {"until": "2031-06-30"}}]
    assert all("suppressions" not in r for r in run["results"] if r is not waived)


def test_invocation_states_the_verdict():
    run = json.loads(render_sarif(bike_light(), Path(ROOT)))["runs"][0]
    invocation = run["invocations"][0]
    assert (invocation["executionSuccessful"], invocation["exitCode"]) == (True, 1)
    assert invocation["exitCodeDescription"].startswith("nodegate: 1 limit fails")
    assert run["properties"]["nodegateVerdict"]["passed"] is False
