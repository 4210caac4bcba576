"""Blocks: instances, hierarchical names, local nets, parameters, nesting and recursion."""

import pytest

from checker.errors import DesignError, UnitError
from checker.language import parse_design
from checker.language.elaborate import MAX_PARTS

HEAD = "circuit weather_station\nground gnd\n"

DIVIDER = """\
block divider (top, tap, bottom) {
    let ratio = 0.5
    let total = 100 kohm
    resistor RA from top to tap    : total * (1 - ratio), tol = 1%
    resistor RB from tap to bottom : total * ratio, tol = 1%
}
"""


def design(text: str):
    return parse_design(HEAD + text)


def error(text: str, cls=DesignError):
    with pytest.raises(cls) as caught:
        parse_design(HEAD + text)
    assert type(caught.value) is cls
    return caught.value


def test_language_instance_parts_and_parameters():
    d = design(DIVIDER + "divider DIV_BATT (top: vbat, tap: adc_batt, bottom: gnd) : ratio = 0.32\n"
                         "divider DIV_SOLAR (bottom: gnd, tap: adc_sun, top: vsun)\n")
    parts = {p.name: p for p in d.parts}
    assert list(parts) == ["DIV_BATT.RA", "DIV_BATT.RB", "DIV_SOLAR.RA", "DIV_SOLAR.RB"]
    # 100 kohm split 68 k / 32 k for ratio 0.32; 50 k / 50 k for the default 0.5.
    assert parts["DIV_BATT.RA"].value == pytest.approx(68e3)
    assert parts["DIV_BATT.RB"].value == pytest.approx(32e3)
    assert parts["DIV_SOLAR.RA"].value == pytest.approx(50e3)
    assert parts["DIV_BATT.RA"].pins == (("from", "vbat"), ("to", "adc_batt"))
    assert parts["DIV_SOLAR.RB"].pins == (("from", "adc_sun"), ("to", "gnd"))
    assert parts["DIV_BATT.RA"].location.line == 6  # the part's name inside the block


def test_language_internal_nets_are_prefixed_and_ground_is_global():
    d = design("block filter (inp, out) {\n"
               "    resistor R from inp to mid : 1 kohm\n"
               "    resistor R2 from mid to out : 1 kohm\n"
               "    capacitor C from mid to gnd : 100 nF\n"
               "}\n"
               "filter F1 (inp: wind, out: adc)\n")
    nets = [p.pins for p in d.parts]
    assert nets == [(("from", "wind"), ("to", "F1.mid")), (("from", "F1.mid"), ("to", "adc")),
                    (("from", "F1.mid"), ("to", "gnd"))]


def test_language_nested_blocks_and_file_lets():
    d = design("let r_unit = 10 kohm\n"
               "block half (a, b) {\n    let k = 1\n    resistor R from a to b : k * r_unit\n}\n"
               "block chain (a, b) {\n    let k = 2\n    half H1 (a: a, b: m) : k = k\n"
               "    half H2 (a: m, b: b) : k = 3 * k\n}\n"
               "chain C (a: top, b: gnd)\n")
    parts = {p.name: p for p in d.parts}
    assert parts["C.H1.R"].value == pytest.approx(20e3)
    assert parts["C.H2.R"].value == pytest.approx(60e3)
    assert parts["C.H1.R"].pins == (("from", "top"), ("to", "C.m"))
    assert parts["C.H2.R"].pins == (("from", "C.m"), ("to", "gnd"))


def test_language_block_does_not_see_callers_lets():
    caught = error("block inner (a) {\n    resistor R from a to gnd : r\n}\n"
                   "block outer (a) {\n    let r = 1 ohm\n    inner I (a: a)\n}\n"
                   "outer O (a: x)\n")
    assert (caught.location.line, caught.location.column) == (4, 32)
    assert any("`O.I`" in note for note in caught.notes)


@pytest.mark.parametrize("text, position, words", [
    ("block a (p) {\n    a X (p: p)\n}\na Y (p: n)\n", (4, 5), "uses itself: a -> a"),
    ("block a (p) {\n    b X (p: p)\n}\nblock b (p) {\n    a X (p: p)\n}\na Y (p: n)\n", (7, 5), "a -> b -> a"),
    (DIVIDER + "divider D (top: a, tap: b)\n", (9, 9), "`bottom` not connected"),
    (DIVIDER + "divider D (top: a, tap: b, bottom: gnd, extra: c)\n", (9, 41), "no pin `extra`"),
    (DIVIDER + "divider D (top: a, tap: b, bottom: gnd) : rate = 0.3\n", (9, 43), "no let `rate`"),
    (DIVIDER + "divider D (top: a, tap: b, bottom: gnd) : 0.3\n", (9, 43), "only `NAME = VALUE`"),
    (DIVIDER + "divider D (top: a, tap: b, bottom: gnd) : ratio = 1, ratio = 2\n", (9, 54), "given twice"),
    (DIVIDER + "divider D from a to b\n", (9, 1), "block instance is written"),
    (DIVIDER + DIVIDER, (9, 7), "already defined"),
    ("block resistor (a) {\n}\n", (3, 7), "reserved"),
    ("block b (from) {\n}\n", (3, 10), "reserved"),
    ("block b (p) {\n    resistor R from p to q : 1 ohm\n    resistor R from p to q : 1 ohm\n}\nb X (p: n)\n",
     (5, 14), "already declared"),
    ("block b (p) {\n    let x = 1\n    let x = 2\n}\nb X (p: n)\n", (5, 9), "already defined"),
    ("block b (p) {\n}\nresistor X from a to gnd : 1 ohm\nb X (p: n)\n", (6, 3), "already declared"),
])
def test_language_block_errors(text, position, words):
    caught = error(text)
    assert (caught.location.line, caught.location.column) == position
    assert words in caught.message


def test_language_block_parameter_keeps_its_unit():
    caught = error(DIVIDER + "divider D (top: a, tap: b, bottom: gnd) : total = 5 V\n", UnitError)
    assert (caught.location.line, caught.location.column) == (9, 43)
    assert "Ω" in caught.message and "V" in caught.message


def test_language_error_inside_block_notes_the_instance():
    caught = error("block b (p) {\n    resistor R from p to gnd : 1 F\n}\nb X (p: n)\n", UnitError)
    assert (caught.location.line, caught.location.column) == (4, 32)
    assert caught.notes == ("in `X` at <text>:6:3",)


def test_language_block_depth_is_bounded():
    blocks = "".join(f"block b{i} (p) {{\n    b{i + 1} X (p: p)\n}}\n" for i in range(40))
    blocks += "block b40 (p) {\n    resistor R from p to gnd : 1 ohm\n}\n"
    caught = error(blocks + "b0 TOP (p: n)\n")
    assert "nested more than" in caught.message


def test_language_part_count_is_bounded():
    # Each level quadruples the parts: 2 * 4^10 = 2 097 152 resistors exceed the bound of 2 000 000,
    # which is told before any of them is made.
    blocks = "".join(f"block b{i} (p) {{\n" + "".join(f"    b{i + 1} {n} (p: p)\n" for n in "WXYZ") + "}\n"
                     for i in range(10))
    blocks += "block b10 (p) {\n    resistor R from p to gnd : 1 ohm\n    resistor S from p to gnd : 1 ohm\n}\n"
    caught = error(blocks + "b0 TOP (p: n)\n")
    assert f"more than {MAX_PARTS} parts" in caught.message
