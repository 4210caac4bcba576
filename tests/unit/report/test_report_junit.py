"""The JUnit XML report: parses, counts agree, names survive escaping exactly."""

from __future__ import annotations

import xml.etree.ElementTree as ET

from report_bike_light import bike_light, hostile

from checker.report import render_junit


def test_suites_cases_and_counts():
    root = ET.fromstring(render_junit(bike_light()))
    assert root.tag == "testsuites"
    suites = {s.get("name"): s for s in root.findall("testsuite")}
    assert list(suites) == ["tail_light", "waivers"]
    circuit = suites["tail_light"]
    assert (circuit.get("tests"), circuit.get("failures"), circuit.get("skipped")) == ("5", "1", "1")
    names = [c.get("name") for c in circuit.findall("testcase")]
    assert names == ["led-current", "resistor-dissipation [R_SENSE]", "resistor-dissipation [R_BASE]",
                     "driver-junction", "sense-ratio"]
    assert {c.get("classname") for c in circuit.findall("testcase")} == {"tail_light"}
    assert (root.get("tests"), root.get("failures"), root.get("errors"), root.get("skipped")) == ("7", "2", "0", "1")


def test_failure_warning_and_waiver_mapping():
    root = ET.fromstring(render_junit(bike_light()))
    cases = {c.get("name"): c for c in root.find("testsuite[@name='tail_light']").iter("testcase")}
    waivers = {c.get("name"): c for c in root.find("testsuite[@name='waivers']").iter("testcase")}
    failure = cases["led-current"].find("failure")
    assert failure.get("message") == "case cold_night: value 13.1 mA vs bound 15.0 mA, margin -1.90 mA (-12.7 %)"
    assert cases["driver-junction"].find("failure") is None
    assert cases["driver-junction"].find("system-out").text.startswith("warning: ")
    assert cases["resistor-dissipation [R_BASE]"].find("skipped").get("message").startswith("waived: Pulsed drive")
    assert list(cases["sense-ratio"]) == []
    assert waivers["led-current [cold_night]"].find("failure").get("type") == "waiver"
    assert waivers["sense-ratio"].find("system-out").text.startswith("unused waiver: ")


def test_hostile_names_round_trip_through_the_parser():
    findings = hostile()
    root = ET.fromstring(render_junit(findings))
    suite = root.find("testsuite")
    finding = findings.findings[0]
    # ElementTree writes newlines in attributes as character references, so names come back exactly.
    assert suite.get("name") == finding.circuit
    case = suite.find("testcase")
    assert case.get("name") == f"{finding.limit.id} [{finding.item}]"
    text = case.find("failure").text
    assert "<script>" in text
    assert "\x01" not in text and "\ufffd" in text  # a control character XML cannot carry
