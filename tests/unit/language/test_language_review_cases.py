"""Case overrides at their edges: nested block paths, flag words, absent instances, ambient, hints.

A scenario of our own: a weather station's mast board, with a divider block used
directly and inside a second block, and an optional heater block with no parts yet.
"""

import pytest

from checker.errors import DesignError, NodegateError, render
from checker.language import parse_design

ZERO_CELSIUS = 273.15  # K, by definition of the Celsius scale (SI Brochure, 9th ed., 2019, 2.3.1)

MAST = """\
circuit mast "Weather station mast board"
ground gnd
let open = 3 V
source   VSOL from sol to gnd : 6 V
switch   S_HEAT from sol to heat : closed
switch   S_AUX from sol to aux : open
resistor R_HEAT from heat to gnd : 47 ohm
resistor R_AUX from aux to gnd : 1 kohm
block divider (top, tap) {
    let ratio = 0.5
    resistor RA from top to tap : 100 kohm * (1 - ratio), tol = 1%
    resistor RB from tap to gnd : 100 kohm * ratio, tol = 1%
}
block sense (a) {
    divider IN (top: a, tap: mid)
}
block spare (a) {
}
divider DIV (top: sol, tap: adc) : ratio = 0.25
sense   WIND (a: sol)
spare   OPT (a: sol)
"""


def netlist(case_text: str):
    """The one case's Netlist, parts by name."""
    (case,) = parse_design(MAST + case_text).netlists
    return case, {p.name: p for p in case.parts}


def test_language_review_property_through_nested_instances_changes_only_that_part():
    _, parts = netlist("case gusty : WIND.IN.RB.tol = 2%, DIV.RA.tol = 5%\n")
    # `%` is 0.01 (SI Brochure, 9th ed., 2019, 5.4.7)
    assert parts["WIND.IN.RB"].props["tol"] == pytest.approx(0.02)
    assert parts["DIV.RA"].props["tol"] == pytest.approx(0.05)
    assert parts["WIND.IN.RA"].props["tol"] == pytest.approx(0.01)
    assert parts["DIV.RB"].props["tol"] == pytest.approx(0.01)


def test_language_review_nested_value_override_keeps_the_other_cases():
    design = parse_design(MAST + "case a : WIND.IN.RA = 10 kohm\ncase b\n")
    changed, untouched = (n.part("WIND.IN.RA").value for n in design.netlists)
    assert changed == pytest.approx(10e3)
    assert untouched == pytest.approx(100e3 * (1 - 0.5))  # the block's own ratio


def test_language_review_case_flips_flag_words_both_ways_even_with_a_let_named_like_one():
    _, parts = netlist("case night : S_HEAT = open, S_AUX = closed\n")
    assert parts["S_HEAT"].flags == {"open"} and parts["S_AUX"].flags == {"closed"}


def test_language_review_absent_nested_instance_removes_only_its_parts():
    _, parts = netlist("case calm : WIND.IN = absent\n")
    assert not any(name.startswith("WIND.") for name in parts)
    assert {"DIV.RA", "DIV.RB", "S_HEAT"} <= set(parts)


def test_language_review_absent_outer_instance_removes_nested_parts():
    _, parts = netlist("case calm : WIND = absent\n")
    assert not any(name.startswith("WIND.") for name in parts) and "DIV.RA" in parts


def test_language_review_absent_instance_of_an_empty_block_is_allowed():
    # Was an error telling the user to write the very `OPT = absent` they wrote.
    case, parts = netlist("case lean : OPT = absent\n")
    assert case.case == "lean" and len(parts) == 9


def test_language_review_absent_prefix_that_is_not_an_instance_is_an_error():
    with pytest.raises(DesignError) as caught:
        netlist("case c : DI = absent\n")
    assert "no part `DI`" in caught.value.message


@pytest.mark.parametrize("written, kelvin", [
    ("300 K", 300.0),
    ("-20 degC", -20 + ZERO_CELSIUS),
    ("25 degC + 10 K", 35 + ZERO_CELSIUS),
    ("max(-5 degC, 0 degC)", ZERO_CELSIUS),
])
def test_language_review_ambient_in_kelvin_or_celsius(written, kelvin):
    case, _ = netlist(f"case c : ambient = {written}\n")
    assert case.ambient == pytest.approx(kelvin, abs=1e-12)


def test_language_review_default_ambient_is_25_degc():
    case, _ = netlist("case plain\n")
    assert case.ambient == pytest.approx(25 + ZERO_CELSIUS)  # LANGUAGE.md, Cases


@pytest.mark.parametrize("written", ["0 K", "-273.15 degC", "-300 degC"])
def test_language_review_ambient_at_or_below_absolute_zero_is_an_error(written):
    with pytest.raises(DesignError) as caught:
        netlist(f"case c : ambient = {written}\n")
    assert "absolute zero" in caught.value.message


@pytest.mark.parametrize("text, hint", [
    ("case c : R_HEET = 1 ohm\n", "R_HEAT"),
    ("case c : R_HEAT.tempko = 1 ppm/K\n", "tempco"),
    ("resistr R9 from a to gnd : 1 ohm\n", "resistor"),
    ("bjt Q9 (c: a, b: b, ee: gnd) : npn\n", "e"),
    ("let y = maxx(1, 2)\n", "max"),
    ("let y = 3 kohms\n", "kohm"),
    ("let r_heat = 1 ohm\nlet y = r_heet\n", "r_heat"),
])
def test_language_review_every_hint_is_a_note(text, hint):
    with pytest.raises(NodegateError) as caught:
        parse_design(MAST + text)
    assert caught.value.notes[0] == f"did you mean `{hint}`?"
    assert "did you mean" not in caught.value.message
    assert f"  note: did you mean `{hint}`?" in render(caught.value).splitlines()
