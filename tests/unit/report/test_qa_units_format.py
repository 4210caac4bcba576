"""Regression: values beyond the SI prefixes (a 1e-300 ohm resistor passes 1e300 A) used to print
as a 300-digit number followed by `TA`, flooding the solve table and every report."""

from __future__ import annotations

import pytest

from checker.units import format_value


@pytest.mark.parametrize("value", [1e300, -1e300, 1e15, 999.7e12, 2.5e-16, -1e-300])
def test_qa_values_beyond_the_prefixes_print_in_scientific_notation(value):
    # The expected text comes from Python's own `e` format with three significant figures
    # (Python Library Reference, "Format Specification Mini-Language"), computed apart from units.py.
    assert format_value(value, "A") == f"{value:.2e} A"


@pytest.mark.parametrize("value, text", [
    (999.4e12, "999 TA"),  # the largest value that still takes a prefix
    (1e-15, "1.00 fA"),  # the smallest one
    (4700.0, "4.70 kA"),
])
def test_qa_values_inside_the_prefixes_keep_engineering_notation(value, text):
    assert format_value(value, "A") == text
