"""Regression tests from the adversarial review of the circuit language: each one a defect found and fixed.

No numbers are computed here; every check is about where an error points and what it says.
"""

from __future__ import annotations

import pytest

from checker.errors import CircuitSyntaxError, DesignError, NodegateError, UnitError, render
from checker.language import load_design, parse_design

HEAD = "circuit t\nground gnd\n"


def error_of(text: str, kind: type[NodegateError] = NodegateError) -> NodegateError:
    with pytest.raises(kind) as caught:
        parse_design(HEAD + text)
    return caught.value


def test_qa_block_port_listed_twice_is_an_error_at_the_second():
    # Was accepted silently: both ports named `p` collapsed into one.
    caught = error_of("block b (p, p) {\n    resistor R from p to gnd : 1 ohm\n}\nb B1 (p: gnd)\n", DesignError)
    assert (caught.location.line, caught.location.column) == (3, 13)
    assert "port `p` is listed twice" in caught.message


@pytest.mark.parametrize("text, column, code", [
    ('circuit u "Bike \x1b[31mlight"\n', 17, "U+001B"),
    ('circuit u "Bike \u202elight"\n', 17, "U+202E"),
])
def test_qa_control_characters_in_titles_are_refused(text, column, code):
    # Titles are printed in reports and logs; an escape sequence would drive the terminal.
    caught = error_of(text, CircuitSyntaxError)
    assert (caught.location.line, caught.location.column) == (3, column)
    assert code in caught.message


def test_qa_title_with_micro_and_ohm_signs_is_kept():
    design = parse_design('circuit u "Probe 10 k\u03a9, 4.7 \u00b5F"\nground gnd\n')
    assert design.title == "Probe 10 k\u03a9, 4.7 \u00b5F"


def test_qa_dimensionless_property_says_plain_number():
    caught = error_of("resistor R from a to gnd : 1 kohm, tol = 1 V\n", UnitError)
    assert caught.message == "`tol` is in V; expected a plain number, %, or ppm"
    assert (caught.location.line, caught.location.column) == (3, 42)


def test_qa_property_unit_message_names_the_key():
    caught = error_of("resistor R from a to gnd : 1 kohm, rating = 2 V\n", UnitError)
    assert caught.message == "`rating` is in V; expected W"


def test_qa_folder_given_as_circuit_file(tmp_path):
    (tmp_path / "board.circuit").mkdir()
    with pytest.raises(DesignError) as caught:
        load_design(tmp_path / "board.circuit")
    assert caught.value.message.endswith("that is a folder")


def test_qa_error_in_a_library_names_the_use_that_brought_it_in(tmp_path):
    (tmp_path / "lib").mkdir()
    (tmp_path / "lib" / "parts.circuit").write_text("let z = 1 V +\n", encoding="utf-8")
    top = tmp_path / "top.circuit"
    top.write_text(HEAD + 'use "lib/parts.circuit"\n', encoding="utf-8")
    with pytest.raises(CircuitSyntaxError) as caught:
        load_design(top)
    assert caught.value.location.path.endswith("parts.circuit")
    assert caught.value.notes[-1] == f"in the file used at {top}:3:5"


def test_qa_render_replaces_control_characters_and_keeps_the_caret_column():
    # The source line printed under an error may hold any byte of a hostile file.
    caught = error_of("let a = 1 V # \x1b[2J\x1b[31m\nlet b = a + \x01\n", CircuitSyntaxError)
    lines = render(caught).splitlines()
    assert lines[1] == "  let b = a + ?"
    assert lines[2].index("^") == lines[1].index("?")
    assert all(ch.isprintable() for line in lines for ch in line)


def test_qa_render_cuts_a_huge_line_around_the_column():
    long_comment = "# " + "x" * 100_000
    caught = error_of(f"let a = 1 V + 1 A {long_comment}\n", UnitError)
    lines = render(caught).splitlines()
    assert len(lines[1]) < 200
    assert lines[1][lines[2].index("^")] == "1"  # the caret still stands under `1 A`


def test_qa_render_window_far_into_a_long_line():
    padding = " " * 5_000
    caught = error_of(f"let a = {padding}1 V + 1 A + 1 V\n", UnitError)
    lines = render(caught).splitlines()
    assert len(lines[1]) < 200 and lines[1].startswith("  \u2026")
    assert lines[1][lines[2].index("^"):].startswith("1 A")


def test_qa_two_terminal_part_with_both_ends_on_one_net_is_an_error():
    with pytest.raises(DesignError) as caught:
        parse_design("circuit t\nground gnd\nsource V from a to gnd : 1 V\nresistor R1 from a to a : 1 kohm\n", "t.circuit")
    assert (caught.value.location.line, caught.value.location.column) == (4, 23)
    assert "both ends" in caught.value.message
