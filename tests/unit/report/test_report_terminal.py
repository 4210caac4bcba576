"""The terminal summary: failures, then warnings, then the verdict, one line each."""

from __future__ import annotations

import dataclasses

from report_bike_light import bike_light, bike_light_with_base, hostile

from checker.findings import Findings
from checker.report import summary_lines


def test_order_failures_warnings_verdict():
    lines = summary_lines(bike_light())
    assert [line.split()[0] for line in lines] == ["FAIL", "EXPIRED", "WARN", "UNUSED", "nodegate:"]
    assert lines[0] == ("FAIL tail_light: led-current, case cold_night: 13.1 mA vs limit 15.0 mA, "
                        "margin -1.90 mA (-12.7 %)")
    assert lines[-1].startswith("nodegate: 1 limit fails in 1 circuit")


def test_base_marks_and_verdict():
    lines = summary_lines(bike_light_with_base())
    assert lines[0].endswith("[new]")
    assert lines[-1].endswith("Against main, this change introduces 1 failure and fixes 1.")


def test_all_holding_is_one_line():
    passing = tuple(dataclasses.replace(f, status="pass") for f in bike_light().findings)
    assert summary_lines(Findings(passing, bike_light().circuits)) == ["nodegate: all 5 limits hold in 1 circuit."]


def test_names_cannot_add_lines():
    assert all("\n" not in line and "\r" not in line for line in summary_lines(hostile()))
