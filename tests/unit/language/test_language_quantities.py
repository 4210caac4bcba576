"""Quantities, units and expressions in circuit files, through `parse_design`."""

import math

import pytest

from checker.errors import DesignError, UnitError
from checker.language import parse_design

HEAD = "circuit t\nground gnd\n"


def error(text: str) -> Exception:
    with pytest.raises((UnitError, DesignError)) as caught:
        parse_design(HEAD + text)
    return caught.value


# SI Brochure, 9th edition (2019), Table 7: the SI prefixes as powers of ten.
SI_PREFIXES = [("p", -12), ("n", -9), ("u", -6), ("\u00b5", -6), ("\u03bc", -6),
               ("m", -3), ("", 0), ("k", 3), ("M", 6), ("G", 9), ("T", 12)]


@pytest.mark.parametrize("prefix, exponent", SI_PREFIXES)
def test_language_prefixes_follow_si_brochure_table_7(prefix, exponent):
    part = parse_design(HEAD + f"resistor R from a to gnd : 2.5 {prefix}ohm\n").parts[0]
    assert part.value == pytest.approx(2.5 * 10.0 ** exponent, rel=1e-15)


@pytest.mark.parametrize("text, expected, unit", [
    ("10 kohm", 10e3, "ohm"), ("4.7uF", 4.7e-6, "F"), ("150 mV", 0.15, "V"),
    ("1e-3 A", 1e-3, "A"), ("22 \u03a9", 22.0, "ohm"), ("22 \u2126", 22.0, "ohm"),
    ("2.2 k\u03a9", 2200.0, "ohm"), ("10 uH", 10e-6, "H"), ("250 mW", 0.25, "W"), (".5 V", 0.5, "V"),
])
def test_language_values_carry_their_unit(text, expected, unit):
    kind = {"ohm": "resistor", "F": "capacitor", "V": "source", "A": "source", "H": "inductor", "W": "load"}[unit]
    part = parse_design(HEAD + f"{kind} P from a to gnd : {text}\n").parts[0]
    assert part.value == pytest.approx(expected, rel=1e-15)
    assert part.value_unit == unit


def test_language_compound_units():
    # 1 ppm = 1e-6 (SI Brochure 2019, 5.4.7 mentions ppm as a non-SI expression of 1e-6);
    # mA/V^2 = 1e-3 A/V^2 by Table 7.
    text = HEAD + ("resistor R from a to gnd : 1 ohm, tempco = -200 ppm/K\n"
                   "mosfet Q (d: a, g: b, s: gnd) : nmos, k = 20 mA/V^2, lambda = 0.02 V^-1\n"
                   "led D from a to gnd : vf = 2 V at 10 mA, theta_ja = 250 K/W\n")
    resistor, mosfet, led = parse_design(text).parts
    assert resistor.props["tempco"] == pytest.approx(-200e-6)
    assert mosfet.props["k"] == pytest.approx(0.02)
    assert mosfet.props["lambda"] == pytest.approx(0.02)
    assert led.props["theta_ja"] == pytest.approx(250.0)
    assert led.at["vf"] == pytest.approx(0.01)


@pytest.mark.parametrize("text, kelvin", [
    # Celsius temperature t = T - 273.15 K (SI Brochure 2019, 2.3.1).
    ("-20 degC", 253.15), ("125 degC", 398.15), ("0 degC", 273.15), ("300 K", 300.0),
    ("25 degC + 10 K", 308.15), ("min(80 degC, 90 degC)", 353.15), ("max(80 degC, 90 degC) - 5 K", 358.15),
])
def test_language_temperatures_are_kelvin(text, kelvin):
    part = parse_design(HEAD + f"resistor R from a to gnd : 1 ohm, tj_max = {text}\n").parts[0]
    assert part.props["tj_max"] == pytest.approx(kelvin, abs=1e-9)


def test_language_temperature_difference_is_kelvin():
    part = parse_design(HEAD + "let rise = 85 degC - 25 degC\n"
                        "resistor R from a to gnd : 1 ohm, tj_max = 25 degC + rise\n").parts[0]
    assert part.props["tj_max"] == pytest.approx(273.15 + 85)


@pytest.mark.parametrize("text, expected", [
    ("1 kohm + 500 ohm", 1500.0), ("(2 V - 1 V) / 1 mA", 1000.0), ("2 * 3 V / (3 A)", 2.0),
    ("1 V / 2 A + -0.5 ohm", 0.0), ("sqrt(4 ohm^2)", 2.0), ("abs(-5 ohm)", 5.0),
    ("max(1 ohm, 3 ohm, 2 ohm)", 3.0), ("min(1 ohm, 3 ohm)", 1.0), ("2^3 * 1 ohm", 8.0),
    ("2^-1 * 1 ohm", 0.5), ("-2^2 * 1 ohm", -4.0), ("10 ohm * 10^0.5", 10 * math.sqrt(10)),
    ("1 V^2 / (1 V * 1 A)", 1.0), ("+3 ohm", 3.0),
])
def test_language_arithmetic(text, expected):
    # Checked against Python's own float arithmetic of the same formula (math.sqrt).
    part = parse_design(HEAD + f"load L from a to gnd : {text}\n").parts[0]
    assert part.value_unit == "ohm"
    assert part.value == pytest.approx(expected, abs=1e-12)


def test_language_lets_use_earlier_lets():
    text = HEAD + "let r_top = 100 kohm\nlet ratio = 0.32\nlet r_bot = r_top * ratio / (1 - ratio)\n" \
                  "resistor R from a to gnd : r_bot\n"
    assert parse_design(text).parts[0].value == pytest.approx(100e3 * 0.32 / 0.68)


@pytest.mark.parametrize("text, cls, line, column, words", [
    ("let x = 1 V + 2 A\n", UnitError, 3, 15, "cannot add A to V"),
    ("let x = 1 V - 2 A\n", UnitError, 3, 15, "subtract"),
    ("resistor R from a to gnd : 10 uF\n", UnitError, 3, 28, "resistor value in F"),
    ("resistor R from a to gnd : 10\n", UnitError, 3, 28, "no unit"),
    ("resistor R from a to gnd : 10 kohms\n", UnitError, 3, 31, "kohm"),
    ("resistor R from a to gnd : 1 ohm, tol = 5 V\n", UnitError, 3, 41, "tol"),
    ("resistor R from a to gnd : 1 ohm, tj_max = 5 V\n", UnitError, 3, 44, "temperature"),
    ("led D from a to gnd : vf = 2 V at 10 V\n", UnitError, 3, 35, "test condition"),
    ("let t = 20 degC + 30 degC\n", UnitError, 3, 19, "degC"),
    ("let t = 2 * 20 degC\n", UnitError, 3, 13, "degC"),
    ("let t = 10 K - 20 degC\n", UnitError, 3, 16, "degC"),
    ("let x = 2 ^ (1 V)\n", UnitError, 3, 14, "exponent"),
    ("let t = min(80 degC, 360 K)\n", UnitError, 3, 22, "one unit"),
    ("let x = (2 V) ^ 0.5\n", UnitError, 3, 17, "whole powers"),
    ("let x = sqrt(2 V)\n", UnitError, 3, 14, "square root"),
    ("let x = min(1 V, 2 A)\n", UnitError, 3, 18, "one unit"),
    ("let x = 1e999\n", UnitError, 3, 9, "too large"),
    ("let x = 1 V / 0 A\n", DesignError, 3, 15, "division by zero"),
    ("let x = sqrt(-4)\n", DesignError, 3, 14, "negative"),
    ("let x = (-8) ^ 0.5\n", DesignError, 3, 10, "negative"),
    ("let x = foo(1)\n", DesignError, 3, 9, "unknown function"),
    ("let x = min(1)\n", DesignError, 3, 9, "two or more"),
    ("let x = abs(1, 2)\n", DesignError, 3, 9, "one value"),
    ("let x = nothere + 1\n", DesignError, 3, 9, "`nothere` is not defined"),
    ("let x = 0.02 / V\n", DesignError, 3, 16, "`V` is not defined"),
    ("let x = y\nlet y = 1\n", DesignError, 3, 9, "not defined"),
    ("let x = 1\nlet x = 2\n", DesignError, 4, 5, "already defined"),
])
def test_language_expression_errors_point_at_the_offending_token(text, cls, line, column, words):
    caught = error(text)
    assert type(caught) is cls
    assert (caught.location.line, caught.location.column) == (line, column)
    assert words in caught.message + " ".join(caught.notes)
    assert caught.location.source_line == (HEAD + text).split("\n")[line - 1]


def test_language_unit_hint_for_per_volt():
    caught = error("let x = 0.02 / V\n")
    assert any("V^-1" in note for note in caught.notes)


def test_language_deep_expression_is_an_error_not_a_crash():
    caught = error("let x = " + "1 + " * 5000 + "1\n")
    assert isinstance(caught, UnitError)
    caught = error("let x = " + "-" * 5000 + "1\n")
    assert "nested" in caught.message
