"""The JSON report: round-trips, carries every outcome in SI floats, has no NaN."""

from __future__ import annotations

import dataclasses
import json
import math

from report_bike_light import KELVIN_M10C, bike_light, bike_light_with_base

from checker.findings import Findings
from checker.report import render_json
from checker.units import ZERO_CELSIUS


def test_round_trips_and_carries_the_schema_marker():
    text = render_json(bike_light())
    document = json.loads(text)
    assert document["schema"] == "nodegate-findings/1"
    assert json.loads(json.dumps(document)) == document


def test_every_outcome_is_present_with_its_numbers():
    findings = bike_light()
    document = json.loads(render_json(findings))
    assert len(document["findings"]) == len(findings.findings)
    for finding, entry in zip(findings.findings, document["findings"]):
        assert (entry["limit"], entry["circuit"], entry["item"], entry["status"]) == \
               (finding.limit.id, finding.circuit, finding.item, finding.status)
        assert len(entry["outcomes"]) == len(finding.outcomes)
        for outcome, out in zip(finding.outcomes, entry["outcomes"]):
            assert (out["case"], out["value"], out["bound"], out["margin"], out["relative"], out["unit"],
                    out["holds"]) == (outcome.case, outcome.value, outcome.bound, outcome.margin,
                                      outcome.relative, outcome.unit, outcome.holds)
        assert entry["worst_margin"] == min(o.margin for o in finding.outcomes)


def test_limit_metadata_and_verdict_counts():
    document = json.loads(render_json(bike_light()))
    assert [limit["id"] for limit in document["limits"]] == \
           ["led-current", "resistor-dissipation", "driver-junction", "sense-ratio"]
    each = document["limits"][1]
    assert (each["each"], each["where"], each["location"]["line"]) == ("resistor", "part.rating > 0 W", 7)
    verdict = document["verdict"]
    assert (verdict["passed"], verdict["fail"], verdict["warn"], verdict["waived"], verdict["pass"]) == \
           (False, 1, 1, 1, 2)
    assert (verdict["expired_waivers"], verdict["unused_waivers"]) == (1, 1)
    waived = document["findings"][2]["waiver"]
    assert (waived["part"], waived["until"]) == ("R_BASE", "2031-06-30")


def test_base_fields():
    document = json.loads(render_json(bike_light_with_base()))
    assert document["base_ref"] == "main"
    assert document["findings"][0]["change"] == "new" and document["findings"][0]["base_margin"] == 0.0006
    assert document["fixed"][0]["limit"] == "sense-ratio"
    assert (document["verdict"]["new_failures"], document["verdict"]["fixed"]) == (1, 1)


def test_operating_points_in_si_with_ambient_in_celsius():
    document = json.loads(render_json(bike_light()))
    cold = document["circuits"][0]["cases"][1]
    # SI Brochure, 9th ed. (2019), 2.3.1: t/°C = T/K - 273.15.
    assert math.isclose(cold["ambient_degC"], KELVIN_M10C - 273.15, abs_tol=1e-9)
    assert ZERO_CELSIUS == 273.15
    assert cold["nets"]["vbat"] == 2.6
    assert set(cold["parts"]["Q_DRV"]) == {"pins", "power"}


def test_non_finite_numbers_become_null():
    finding = bike_light().findings[4]
    odd = dataclasses.replace(finding.outcomes[0], relative=math.inf, value=math.nan)
    findings = Findings((dataclasses.replace(finding, outcomes=(odd,)),), ())
    text = render_json(findings)
    assert "NaN" not in text and "Infinity" not in text
    out = json.loads(text)["findings"][0]["outcomes"][0]
    assert out["relative"] is None and out["value"] is None
