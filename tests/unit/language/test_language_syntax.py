"""Syntax errors: every one a CircuitSyntaxError at the offending token, in plain words."""

import pytest

from checker.errors import CircuitSyntaxError, render
from checker.language import parse_design

HEAD = "circuit t\nground gnd\n"


def syntax_error(text: str) -> CircuitSyntaxError:
    with pytest.raises(CircuitSyntaxError) as caught:
        parse_design(HEAD + text)
    return caught.value


@pytest.mark.parametrize("text, position, words", [
    ("resistor R1 a to b\n", (3, 13), "from NET to NET"),
    ("resistor R1 from a b\n", (3, 20), "expected `to`"),
    ("resistor R1 from a to b : 1 kohm, tol 5%\n", (3, 39), "`KEY = VALUE`"),
    ("case c : VBAT 3 V\n", (3, 15), "`KEY = VALUE`"),
    ("resistor R1 from a to b 10 kohm\n", (3, 25), "follow a `:`"),
    ("let x = 10 k ohm\n", (3, 14), "prefix and unit together"),
    ("regulator U (in: a, out: b\nresistor R from a to b : 1 ohm\n", (3, 13), "never closed"),
    ("let x = (1 + 2\n", (3, 9), "never closed"),
    ("bjt Q (c a, b: b, e: c)\n", (3, 10), "`PIN: NET`"),
    ('circuit u "no end\n', (3, 11), "same line"),
    ("let x = 5 $\n", (3, 11), "unexpected character `$`"),
    ("let x = 5 \u2603\n", (3, 11), "unexpected character"),
    ("let x = 5\rlet y = 1\n", (3, 10), "carriage return"),
    ("let x = 1 +\n", (3, 12), "unexpected the end of the line"),
    ("resistor R1 from a to b : 1 kohm, rating = 1 W, tol 5%\n", (3, 53), "`KEY = VALUE`"),
    ("resistor R1 from a to b : tol 5%\n", (3, 31), "`KEY = VALUE`"),
    ("bjt Q (c: a, b: b, e c)\n", (3, 22), "`PIN: NET`"),
    ("block b (p) {}\n", (3, 14), "`{` ends its line"),
    ("let = 1\n", (3, 5), "expected a name"),
    ("block b (p) {\n  resistor R from p to gnd : 1 ohm\n", (3, 1), "block `b` opened at line 3 is never closed"),
    ("block b (p) { resistor R from p to gnd : 1 ohm }\n", (3, 15), "`{` ends its line"),
    ("let x = " + "(" * 40 + "1" + ")" * 40 + "\n", (3, 41), "nested more than 32"),
])
def test_language_syntax_error_positions(text, position, words):
    caught = syntax_error(text)
    assert (caught.location.line, caught.location.column) == position
    assert words in caught.message
    assert caught.location.source_line == (HEAD + text).split("\n")[position[0] - 1]


def test_language_continued_line_is_noted():
    caught = syntax_error("resistor R1 from a to b : 1 kohm,\n\nresistor R2 from a to b : 1 kohm\n")
    assert caught.location.line == 5
    assert caught.notes == ("line 3 ends with `,`, so the next line continues that statement",)


def test_language_syntax_error_renders_without_the_file():
    caught = syntax_error("resistor R1 from a b\n")
    assert render(caught).splitlines() == [
        "<text>:3:20: error: expected `to` after the first net: `KIND NAME from NET to NET`",
        "  resistor R1 from a b",
        "                     ^",
    ]


def test_language_mistakes_recognised_inside_blocks():
    caught = syntax_error("block b (p) {\n    resistor R1 p to gnd\n}\n")
    assert (caught.location.line, caught.location.column) == (4, 17)
    assert "from NET to NET" in caught.message


def test_language_empty_block_and_blank_lines_parse():
    design = parse_design("\n\n# header comment\n" + HEAD + "\nblock empty () {\n\n}\n\n# end\n")
    assert design.parts == ()


@pytest.mark.parametrize("line, column, message", [
    # `from` and `to` are whole words: a missing space must not wire a part to a net named `age`.
    ("resistor R1 fromage to b : 1 kohm\n", 13, "a two-terminal part is written `KIND NAME from NET to NET`"),
    ("resistor R1 from a tob : 1 kohm\n", 20, "expected `to` after the first net"),
])
def test_language_keywords_are_whole_words(line, column, message):
    caught = syntax_error(line)
    assert (caught.location.line, caught.location.column) == (3, column)
    assert caught.message.startswith(message)
