"""The margin overview of the HTML report: order, geometry, clipping, cap, black-and-white cues,
escaping and self-containment.

Expected geometry is computed here, independently of checker.report.overview: x positions by
numpy.interp of the relative margin (clipped to ±100 %) onto the plot's span, and the relative
margins themselves from value and bound as RULES.md defines them (report_bike_light.outcome).
"""

from __future__ import annotations

import dataclasses
import math
from html.parser import HTMLParser

import numpy as np
from report_bike_light import LIMITS, bike_light, hostile, operating_points, outcome

from checker.findings import CircuitResult, Finding, Findings, Limit, Outcome
from checker.report import render_html
from checker.report.overview import MAX_BARS, PLOT_LEFT, PLOT_RIGHT, margin_overview
from checker.report.view import build_view


def limit(name: str, severity: str = "error") -> Limit:
    return Limit(id=name, about=f"about {name}", check="voltage(x) <= 1 V", severity=severity, source=LIMITS)


def finding(name: str, value: float, bound: float, status: str, item: str | None = None,
            circuit: str = "greenhouse") -> Finding:
    """`value <= bound` in one case; relative margin (bound - value) / |bound|."""
    return Finding(limit(name), circuit, item, (outcome("noon", value, bound, True, "V"),), status)


def findings_of(*found: Finding) -> Findings:
    circuits = tuple(CircuitResult(name, "Greenhouse logger", "g.circuit", operating_points())
                     for name in dict.fromkeys(f.circuit for f in found))
    return Findings(found, circuits)


def expected_x(relative: float) -> tuple[float, float]:
    """(left end, width) of a bar from 0 to the relative margin clipped to ±1, by numpy.interp."""
    span = [PLOT_LEFT, PLOT_RIGHT]
    zero = float(np.interp(0.0, [-1.0, 1.0], span))
    end = float(np.interp(np.clip(relative, -1.0, 1.0), [-1.0, 1.0], span))
    return min(zero, end), abs(end - zero)


# (name, value, bound, status) with relative margins +0.30, −0.25, +2.50 (clipped), −3.00 (clipped),
# +0.05, −0.10, and one with bound 0 whose relative margin is undefined.
CASES = [("lamp", 0.7, 1.0, "pass"), ("pump", 1.25, 1.0, "fail"), ("fan", -1.5, 1.0, "pass"),
         ("heater", 4.0, 1.0, "warn"), ("valve", 0.95, 1.0, "pass"), ("vent", 1.1, 1.0, "waived")]


def sample() -> Findings:
    found = [finding(*case) for case in CASES]
    undefined = Outcome("noon", 0.0, 0.0, 0.0, math.nan, "V", holds=True)
    found.append(Finding(limit("probe"), "greenhouse", None, (undefined,), "pass"))
    return findings_of(*found)


def test_bars_are_sorted_worst_first_with_geometry_from_the_relative_margin():
    overview = margin_overview(build_view(sample()).rows)
    relatives = {name: (bound - value) / abs(bound) for name, value, bound, _ in CASES}
    expected = sorted(relatives, key=relatives.get) + ["probe"]  # undefined last
    assert [bar.label for bar in overview.bars] == expected
    for bar in overview.bars[:-1]:
        relative = relatives[bar.label]
        x, width = expected_x(relative)
        assert math.isclose(bar.x, x, abs_tol=1e-9) and math.isclose(bar.width, width, abs_tol=1e-9), bar.label
        assert bar.clipped == (0 if abs(relative) <= 1.0 else int(math.copysign(1, relative)))
        assert bar.value == f"{relative * 100:.1f} %"  # the true value, also when the bar is clipped
    assert overview.bars[-1].width == 0.0 and overview.bars[-1].value == "\u2014"
    assert overview.zero_x == expected_x(0.0)[0] == (PLOT_LEFT + PLOT_RIGHT) / 2
    assert [bar.word for bar in overview.bars] == ["WARN", "FAIL", "WAIVED", "", "", "", ""]
    rows = [bar.y for bar in overview.bars]
    assert np.all(np.diff(rows) > 0) and len(set(np.diff(rows))) == 1


class Svg(HTMLParser):
    """The overview's elements in document order: [tag, attributes, text directly inside]."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.inside = False
        self.elements: list[list] = []
        self.open: list[int] = []  # elements not yet closed

    def _element(self, tag, attrs) -> bool:
        attrs = dict(attrs)
        self.inside = self.inside or (tag == "svg" and attrs.get("class") == "overview")
        if self.inside:
            self.elements.append([tag, attrs, ""])
        return self.inside

    def handle_starttag(self, tag, attrs):
        if self._element(tag, attrs):
            self.open.append(len(self.elements) - 1)

    def handle_startendtag(self, tag, attrs):
        self._element(tag, attrs)

    def handle_endtag(self, tag):
        if self.inside:
            self.open.pop()
            self.inside = bool(self.open)

    def handle_data(self, data):
        if self.open:
            self.elements[self.open[-1]][2] += data


def overview_elements(text: str) -> list[list]:
    parser = Svg()
    parser.feed(text)
    parser.close()
    assert parser.elements, "no overview in the report"
    return parser.elements


def test_rendered_bars_match_the_geometry_and_carry_words_and_patterns():
    elements = overview_elements(render_html(sample()))
    bars = [a for tag, a, _ in elements if tag == "rect" and "ov-bar" in a.get("class", "")]
    labels = [t for tag, a, t in elements if tag == "text" and a.get("class") == "ov-label"]
    words = [t for tag, a, t in elements if tag == "text" and "ov-word" in a.get("class", "")]
    patterns = [a["fill"] for tag, a, _ in elements if tag == "rect" and a.get("class") == "ov-pattern"]
    assert labels == ["heater", "pump", "vent", "valve", "lamp", "fan", "probe"]
    assert words == ["WARN", "FAIL", "WAIVED"]
    assert patterns == ["url(#ov-warn)", "url(#ng-hatch)", "url(#ov-waived)"]
    relatives = [-3.0, -0.25, -0.1, 0.05, 0.3, 2.5]  # the drawn bars, in order (probe has none)
    assert len(bars) == len(relatives)
    for attrs, relative in zip(bars, relatives):
        x, width = expected_x(relative)
        assert abs(float(attrs["x"]) - x) <= 0.05 and abs(float(attrs["width"]) - width) <= 0.05
    assert [a["class"].split()[1] for a in bars] == ["ov-warn", "ov-fail", "ov-waived", "ov-pass", "ov-pass", "ov-pass"]
    clips = [a for tag, a, _ in elements if tag == "path" and "ov-clip" in a.get("class", "")]
    assert len(clips) == 2  # heater beyond −100 %, fan beyond +100 %
    zero = [a for tag, a, _ in elements if tag == "line" and a.get("class") == "ov-zero"]
    assert len(zero) == 1 and float(zero[0]["x1"]) == (PLOT_LEFT + PLOT_RIGHT) / 2
    ticks = [t for tag, a, t in elements if tag == "text" and a.get("class") == "ov-tick"]
    assert ticks == ["-100 %", "-50 %", "0", "+50 %", "+100 %"]
    sides = [t for tag, a, t in elements if tag == "text" and a.get("class") == "ov-side"]
    assert sides == ["\u25c2 limit not met", "limit met \u25b8"]


def test_long_reports_show_the_worst_and_count_the_rest():
    found = [finding(f"lim-{k:02d}", 0.5 + 0.01 * k, 1.0, "pass" if k < 50 else "fail") for k in range(55)]
    overview = margin_overview(build_view(findings_of(*found)).rows)
    assert len(overview.bars) == MAX_BARS and overview.hidden == 55 - MAX_BARS
    assert [bar.label for bar in overview.bars] == [f"lim-{k:02d}" for k in range(54, 54 - MAX_BARS, -1)]
    text = render_html(findings_of(*found))
    assert f"{55 - MAX_BARS} more, none worse than those shown, in the circuit sections below." in text
    assert "none worse than those shown" not in render_html(findings_of(*found[:MAX_BARS]))


def test_several_circuits_name_the_circuit_and_long_names_are_cut():
    long_item = "R_" + "X" * 80
    overview = margin_overview(build_view(findings_of(
        finding("lamp", 0.5, 1.0, "pass", "R1", "greenhouse"),
        finding("lamp", 0.2, 1.0, "pass", long_item, "weather"))).rows)
    first, second = overview.bars
    assert first.label == "greenhouse: lamp \u00b7 R1"
    assert second.label.startswith("weather: lamp \u00b7 R_XXX") and second.label.endswith("\u2026")
    assert long_item in second.title and len(second.label) < len(second.title)


def test_no_findings_no_overview():
    assert margin_overview(build_view(findings_of()).rows) is None
    assert "Margin overview" not in render_html(dataclasses.replace(bike_light(), findings=()))


def test_hostile_names_are_escaped_inside_the_svg():
    text = render_html(hostile())
    start, end = text.index('<svg class="overview"'), text.index("</svg>", text.index('<svg class="overview"'))
    svg = text[start:end]
    assert "<script" not in svg and "<b>" not in svg and "<i>" not in svg and "<s>" not in svg
    assert "evil|id&lt;script&gt;" in svg
    elements = overview_elements(text)
    assert not any(tag in ("script", "b", "i", "s", "a", "image", "use", "foreignobject") for tag, _, _ in elements)
    labels = [t for tag, a, t in elements if tag == "text" and a.get("class") == "ov-label"]
    assert labels == ["evil|id<script> \u00b7 P|1 <i>"]  # the item's line break folded to a space
    for _, attrs, _ in elements:
        for value in attrs.values():
            assert "http" not in (value or "") and (not (value or "").startswith("url(") or value.startswith("url(#"))
