"""Relative margins stay short whatever the design: a 1e-300 ohm resistor gives a relative margin of
about -1e300, which every report prints through `format_relative`."""

from checker.report.view import NO_TEXT, format_relative


def test_an_absurd_relative_margin_prints_in_scientific_notation():
    text = format_relative(-6.26e268)
    assert text == "-6.26e+270 %" and len(text) < 20


def test_ordinary_relative_margins_keep_one_decimal():
    assert format_relative(-0.127) == "-12.7 %" and format_relative(0.0) == "0.0 %"
    assert format_relative(float("-inf")) == NO_TEXT
