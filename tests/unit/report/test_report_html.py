"""The HTML report: well-formed, self-contained, escaped, with operating points and margin charts."""

from __future__ import annotations

import re
from html.parser import HTMLParser

import numpy as np
from report_bike_light import bike_light, bike_light_with_base, hostile, operating_points

from checker.report import render_html
from checker.report.solve import DIGITS
from checker.report.svg import PLOT_LEFT, PLOT_RIGHT, margin_chart
from checker.units import format_value

VOID = {"meta", "br", "hr", "img", "input", "link", "col", "wbr", "source", "area", "base", "embed", "track"}


class Collector(HTMLParser):
    """Records tags, attributes and text, and checks that elements nest and close."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.stack: list[str] = []
        self.tags: list[tuple[str, dict[str, str | None]]] = []
        self.text: list[str] = []
        self.errors: list[str] = []

    def handle_starttag(self, tag, attrs):
        self.tags.append((tag, dict(attrs)))
        if tag not in VOID:
            self.stack.append(tag)

    def handle_startendtag(self, tag, attrs):
        self.tags.append((tag, dict(attrs)))

    def handle_endtag(self, tag):
        if not self.stack or self.stack[-1] != tag:
            self.errors.append(f"</{tag}> closes {self.stack[-1:]}")
        else:
            self.stack.pop()

    def handle_data(self, data):
        self.text.append(data)


def parse(text: str) -> Collector:
    collector = Collector()
    collector.feed(text)
    collector.close()
    assert not collector.errors, collector.errors[:5]
    assert not collector.stack, collector.stack
    return collector


def test_document_is_well_formed_and_self_contained():
    text = render_html(bike_light_with_base())
    doc = parse(text)
    assert "http://" not in text and "https://" not in text
    assert "<link" not in text and "@import" not in text and "url(http" not in text
    for tag, attrs in doc.tags:
        assert tag not in ("script", "link", "iframe", "img", "object"), tag
        for name in ("src", "href"):
            assert attrs.get(name) is None or attrs[name].startswith(("data:", "#")), (tag, attrs)
        for value in attrs.values():
            assert not re.match(r"\s*url\((?!#)", value or ""), value


def test_print_stylesheet_and_black_and_white_cues():
    text = render_html(bike_light())
    assert "@media print" in text
    assert 'fill="url(#ng-hatch)"' in text  # failing bars carry a hatch pattern
    assert "FAIL -1.90 mA" in text  # and a word beside them


def test_hostile_names_are_shown_as_text():
    text = render_html(hostile())
    doc = parse(text)
    assert "<script" not in text and "<b>" not in text and "<i>" not in text
    assert not any(tag in ("script", "b", "i", "s") for tag, _ in doc.tags)
    shown = "".join(doc.text)
    assert "evil|id<script>" in shown  # the escaped name reads as written
    assert "x|y</td><script>alert(1)</script>" in shown


def test_verdict_banner_and_tables():
    doc = parse(render_html(bike_light_with_base()))
    shown = " ".join(doc.text)
    assert "CHECK FAILS" in shown and "nodegate: 1 limit fails" in shown
    for heading in ("Failing limits", "Warnings", "Waived", "Fixed by this change"):
        assert heading in shown
    assert "Against main, this change introduces 1 failure and fixes 1." in shown


def test_operating_point_of_every_case_is_tabulated():
    shown = " ".join(parse(render_html(bike_light())).text)
    for point in operating_points():
        for net, volts in point.nets.items():
            assert format_value(volts, "V", DIGITS) in shown
        for name, result in point.parts.items():
            assert format_value(result.power, "W", DIGITS) in shown
            for current in result.pins.values():
                assert format_value(abs(current), "A", DIGITS) in shown
    assert "fresh_cells (25.0 °C)" in shown and "cold_night (-10.0 °C)" in shown
    assert "current into b" in shown  # the transistor's pin currents


def test_one_chart_per_finding():
    text = render_html(bike_light())
    assert text.count('<svg class="chart"') == len(bike_light().findings)


def test_bar_lengths_are_proportional_to_margins():
    finding = bike_light_with_base().findings[0]
    chart = margin_chart(finding)
    margins = [o.margin for o in finding.outcomes]
    lo = min(margins + [0.0, finding.base_margin])
    hi = max(margins + [0.0, finding.base_margin])
    # An independent linear map (numpy.interp) from the margin range onto the plot.
    to_x = lambda m: float(np.interp(m, [lo, hi], [PLOT_LEFT, PLOT_RIGHT]))  # noqa: E731
    assert abs(chart.zero_x - to_x(0.0)) < 1e-9
    for bar, margin in zip(chart.bars, margins):
        assert abs(bar.width - abs(to_x(margin) - to_x(0.0))) < 1e-9
        assert bar.holds == (margin >= 0)
        edge = bar.x + bar.width if bar.holds else bar.x
        assert abs(edge - to_x(margin)) < 1e-9
    assert abs(chart.base_x - to_x(finding.base_margin)) < 1e-9
    assert chart.bars[1].text == "FAIL -1.90 mA" and not chart.bars[0].text.startswith("FAIL")


def test_chart_of_equal_margins_is_still_drawn():
    finding = bike_light().findings[4]  # sense-ratio: the same margin in both cases
    chart = margin_chart(finding)
    assert PLOT_LEFT <= chart.zero_x <= PLOT_RIGHT
    assert all(bar.width > 0 for bar in chart.bars)
