"""Numbers that show the difference (issue 10, item 6): near comparisons in enough digits,
percentages without SI prefixes, margin changes below the resolution as unchanged, the solve
table in four significant figures."""

from __future__ import annotations

import dataclasses

from report_bike_light import LED_CURRENT, bike_light, operating_points, outcome

from checker.findings import Finding, Findings
from checker.report import render_markdown, render_solve_table, summary_lines
from checker.report.view import build_view, format_margin_change, format_pair
from checker.units import format_percent, format_value

# `voltage(vout) <= 1.62 V` at 1.6204 V: fails by 0.4 mV, a relative margin of -0.025 %.
NEAR_FAIL = outcome("hot", 1.6204, 1.6200, True, "V")


def _near_findings() -> Findings:
    limit = dataclasses.replace(LED_CURRENT, id="vout-max", check="voltage(vout) <= 1.62 V")
    return Findings((Finding(limit, "tail_light", None, (NEAR_FAIL,), "fail"),), bike_light().circuits)


def test_near_failure_prints_value_and_bound_that_differ():
    value, bound = format_pair(NEAR_FAIL.value, NEAR_FAIL.bound, "V", relative=NEAR_FAIL.relative)
    assert (value, bound) == ("1.6204 V", "1.6200 V")
    line = summary_lines(_near_findings())[0]
    assert "1.6204 V vs limit 1.6200 V, margin -400 µV (-0.025 %)" in line
    assert "1.6204 V" in render_markdown(_near_findings()) and "1.6200 V" in render_markdown(_near_findings())


def test_far_comparisons_keep_three_figures_and_equal_numbers_stay_equal():
    assert format_pair(0.0131, 0.015, "A", relative=-0.127) == ("13.1 mA", "15.0 mA")
    assert format_pair(1.62, 1.62, "V", relative=0.0) == ("1.62 V", "1.62 V")
    assert format_pair(1.0 + 1e-12, 1.0, "V", relative=-1e-12) == ("1.00000000 V", "1.00000000 V")  # 9 at most


def test_near_temperature_and_plain_number_take_more_digits():
    assert format_pair(398.16, 398.15, "K", absolute=True, relative=-2.5e-5) == ("125.01 °C", "125.00 °C")
    assert format_pair(0.50004, 0.5, "", relative=-8e-5) == ("0.50004", "0.5")


def test_percentages_never_take_an_si_prefix():
    assert format_percent(-0.0038) == "-0.38 %"
    assert format_percent(-0.127) == "-12.7 %"
    assert format_value(-0.382, "%") == "-0.382 %"
    assert "m%" not in " ".join(summary_lines(_near_findings()))


def test_margin_change_below_the_resolution_is_unchanged():
    assert format_margin_change(0.5, 0.5 - 1e-15, "V") == "unchanged"
    assert format_margin_change(1e-3, 1e-3, "V") == "unchanged"
    assert format_margin_change(-0.0019, 0.0006, "A") == "-2.50 mA"
    findings = _near_findings()
    finding = dataclasses.replace(findings.findings[0], base_margin=NEAR_FAIL.margin + 1e-15, change="unchanged")
    row = build_view(Findings((finding,), findings.circuits, base_ref="main")).rows[0]
    assert row.margin_change == "unchanged" and "+0" not in row.margin_change


def test_solve_table_has_four_significant_figures():
    assert format_value(3.3, "V", 4) == "3.300 V"
    table = render_solve_table(operating_points())
    assert "3.000 V" in table  # VBAT of the fixture's first case
