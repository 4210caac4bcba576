"""The quick path for one-line parts (checker/language/quick.py) against the grammar alone.

Over generated files and random edits of them: every taken line gives the tree lark gives it,
every accepted file the same Design (parts, values, pins, flags, properties, locations and
spots with their source lines, cases), and every rejected file the same error (class,
message, location, notes and rendered text). The grammar-only path is the quick path with
nothing taken.
"""

import tempfile
from pathlib import Path
from unittest import mock

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from lark import Token, Tree

from checker.errors import NodegateError, render
from checker.language import parse_design, quick
from checker.language.parser import parse_tree
from checker.language.source import Source

ROOT = Path(tempfile.mkdtemp(prefix="nodegate-quick-"))
(ROOT / "lib.circuit").write_text("let r_lib = 2 kohm\nblock pair (a, b) {\n    let r = 1 kohm\n"
                                  "    resistor R from a to b : r\n}\n", encoding="utf-8")
(ROOT / "bad.circuit").write_text("let k = 1\nresistor R9 from a to b : 1 ohm\n", encoding="utf-8")
PATH = str(ROOT / "board.circuit")

KINDS = ["resistor", "capacitor", "inductor", "source", "load", "switch", "diode", "led", "zener",
         "regulator", "pair", "resistr", "case", "to"]
NAMES = ["R1", "R2", "V1", "D1", "S1", "L1", "C1", "R_x", "_r", "to", "from", "at", "gnd", "tag", "R1x"]
NETS = ["a", "b", "c", "gnd", "vin", "n_1", "to", "ground", "at", "absent", "x0"]
VALUES = ["1 kohm", "4.7uF", "-20 degC", "- 5 V", "5%", "100", "1e3", "1.e3 V", "1.5e-3A", ".5 mA", "3 V",
          "2 mA", "10 uH", "0.5 W", "1 kohms", "1 k ohm", "1\u0663 V", "10 V/ratio", "1/4 W", "x", "r_lib",
          "ratio", "open", "closed", "1e999 V", "12 \u03a9", "3\u00b5F", "2 V^2", "1 ppm/K", "5 at", "0 ohm",
          "-1 kohm", "1 mA/V^2", "10 ohm*2", "3 V + 1 V", "(1 kohm)", "max(1 V, 2 V)", "1 degC"]
KEYS = ["tol", "rating", "vf", "imax", "vz", "ron", "tempco", "theta_ja", "tj_max", "tag", "dcr", "vmax",
        "isat", "n", "bogus", "at", "ratio"]
CONDITIONS = ["10 mA", "1 mA", "25 degC", "x", "1 V"]
SPACES = [" ", "  ", "\t", " \t ", "\f"]


@st.composite
def part_lines(draw) -> str:
    gap = lambda: draw(st.sampled_from(SPACES))  # noqa: E731
    kind, name = draw(st.sampled_from(KINDS)), draw(st.sampled_from(NAMES))
    line = f"{draw(st.sampled_from(['', '  ', chr(9)]))}{kind}{gap()}{name}{gap()}from{gap()}" \
           f"{draw(st.sampled_from(NETS))}{gap()}to{gap()}{draw(st.sampled_from(NETS))}"
    items = []
    for index in range(draw(st.integers(0, 4))):
        if index == 0 and draw(st.booleans()):
            items.append(draw(st.sampled_from(VALUES)))
            continue
        item = f"{draw(st.sampled_from(KEYS))}{draw(st.sampled_from(['=', ' = ', ' =  ']))}" \
               f"{draw(st.sampled_from(VALUES))}"
        if draw(st.integers(0, 3)) == 0:
            item += f" at {draw(st.sampled_from(CONDITIONS))}"
        items.append(item)
    if items or draw(st.integers(0, 5)) == 0:
        line += draw(st.sampled_from([" : ", ":", " :\t"])) + draw(st.sampled_from([", ", ",", " ,  "])).join(items)
    return line + draw(st.sampled_from(["", "", "  # note", "# (x, {", " "]))


OTHER = ["let x = 3.3 V", "let ratio = 2", "let r = 10 kohm, ", "", "# comment, with (parens", "   ",
         'use "lib.circuit"', 'use "bad.circuit"', "case c1 : R1 = 2 kohm", "case c2 : ambient = 60 degC, R2 = absent",
         "case c3 :", "  tol = 5%", "case c4 : a starts at 1 V", "case c5 : R1.tol = 10%, V1 = 4 V",
         "block blk (p, q) {", "    resistor RB from p to q : 1 kohm", "}", "blk B1 (p: a, q: b)",
         "pair P1 (a: vin, b: gnd)", "regulator U1 (in: vin,", "   out: c, gnd: gnd) : vout = 3.3 V, dropout = 150 mV",
         "resistor R3 from a to b : 1 kohm,", "resistor R4 (from: a, to: b) : 1 kohm", "(", ")", "{", "}",
         'circuit again "t"', "ground gnd", "source VS from vin to gnd : 5 V # supply"]


@st.composite
def circuits(draw) -> str:
    lines = [draw(st.sampled_from(['circuit board "Board"', "circuit board", "", "ground gnd"])), "ground gnd"]
    for _ in range(draw(st.integers(0, 14))):
        lines.append(draw(part_lines()) if draw(st.integers(0, 2)) else draw(st.sampled_from(OTHER)))
    return draw(st.sampled_from(["\n", "\n", "\r\n"])).join(lines) + draw(st.sampled_from(["\n", ""]))


# Items each kind accepts (primary values first), so that most generated files elaborate.
VALID = {
    "resistor": (["1 kohm", "4.7ohm", "r_lib", "12 \u03a9", "1e3 ohm"],
                 ["tol = 5%", "rating = 0.25 W", "tempco = 100 ppm/K", "tj_max = 125 degC", "tag = sense",
                  "theta_ja = 200 K/W", "vmax = 50 V"]),
    "capacitor": (["4.7uF", "3\u00b5F", "100 nF"], ["tol = 10%", "vmax = 16 V"]),
    "inductor": (["10 uH"], ["dcr = 50 mohm", "imax = 1 A"]),
    "source": (["5 V", "-5V", "- 3 V", "2 mA", "x", "1.5e-3A"], ["tol = 2%", "tag = supply"]),
    "load": (["2 mA", "0.5 W", "100 ohm", ".5 mA"], ["tol = 1%"]),
    "switch": (["open", "closed"], ["ron = 20 mohm"]),
    "diode": ([], ["vf = 0.7 V at 10 mA", "imax = 1 A", "vmax = 40 V", "rseries = 1 ohm"]),
    "led": ([], ["vf = 2.0 V at 10 mA", "imax = 20 mA", "ideality = 2"]),
    "zener": ([], ["vz = 5.1 V at 5 mA", "rz = 10 ohm", "imax = 0.1 A"]),
}
VALID_OTHER = ["let x = 3.3 V", "let ratio = 2", "", "# comment, with (parens", 'use "lib.circuit"',
               "pair P1 (a: vin, b: gnd)", "block blk (p, q) {\n    resistor RB from p to q : 1 kohm\n}",
               "regulator U1 (in: vin,\n   out: c, gnd: gnd) : vout = 3.3 V, dropout = 150 mV",
               "resistor RC from a to b : 1 kohm,\n  tol = 5%", "case hot : ambient = 60 degC",
               "case c2 :\n  ambient = 0 degC", "case c3 : a starts at 1 V"]


@st.composite
def valid_lines(draw, number: int) -> str:
    kind = draw(st.sampled_from(sorted(VALID)))
    values, keys = VALID[kind]
    nets = draw(st.lists(st.sampled_from(["a", "b", "c", "vin", "gnd", "n_1"]), min_size=2, max_size=2,
                         unique=True))
    items = [draw(st.sampled_from(values))] if values else []
    items += draw(st.lists(st.sampled_from(keys), max_size=3, unique_by=lambda item: item.split("=")[0]))
    if kind == "zener" and not any(item.startswith("vz") for item in items):
        items.append("vz = 3.3 V at 1 mA")
    gap = draw(st.sampled_from(SPACES))
    line = f"{kind}{gap}X{number}{gap}from {nets[0]}{gap}to {nets[1]}"
    if items:
        line += " : " + draw(st.sampled_from([", ", ","])).join(items)
    return line + draw(st.sampled_from(["", "  # note"]))


@st.composite
def valid_circuits(draw) -> str:
    lines = ['circuit board "Board"', "ground gnd"]
    for number in range(draw(st.integers(0, 12))):
        lines.append(draw(valid_lines(number)) if draw(st.integers(0, 3)) else draw(st.sampled_from(VALID_OTHER)))
    return "\n".join(lines) + "\n"


PIECES = list("abR19 \t\n#,:=()-.%\"{}_\u00b5\u03a9\u0663\r") + [
    "from ", " to ", " at ", "absent", "case ", "block ", "let ", "kohm", "degC", "resistor ", " : 1 kohm"]


@st.composite
def mutated(draw) -> str:
    text = draw(st.one_of(valid_circuits(), circuits()))
    for _ in range(draw(st.integers(1, 3))):
        start = draw(st.integers(0, len(text)))
        end = min(len(text), start + draw(st.integers(0, 4)))
        text = text[:start] + draw(st.sampled_from(PIECES + [""])) + text[end:]
    return text


def outcome(text: str):
    """The Design, or the error as everything a user sees of it."""
    try:
        design = parse_design(text, PATH, ROOT)
    except NodegateError as error:
        where = error.location
        return ("error", type(error), error.message, error.notes, render(error),
                None if where is None else (where.path, where.line, where.column, where.source_line))
    where = lambda loc: None if loc is None else (loc.path, loc.line, loc.column, loc.source_line)  # noqa: E731
    spots = [(part.name, where(part.location), {key: where(spot) for key, spot in part.spots.items()})
             for part in design.parts]
    cases = [(netlist, where(netlist.case_location)) for netlist in design.netlists]
    return design, where(design.location), spots, cases


def grammar_only(text: str):
    with mock.patch.object(quick, "split", lambda text, budget=None: (text, [], len(text))):
        return outcome(text)


def shape(node):
    """A tree with every position, comparable with ==."""
    if isinstance(node, Tree):
        meta = node.meta
        return (node.data, meta.line, meta.column, meta.start_pos, meta.end_line, meta.end_column, meta.end_pos,
                [shape(child) for child in node.children])
    if isinstance(node, Token):
        return (node.type, str(node), node.line, node.column, node.start_pos, node.end_line, node.end_column,
                node.end_pos)
    return node


def same_trees(text: str) -> None:
    """Each taken line's tree is the grammar's tree of that line, in a file that parses."""
    text = text.replace("\r\n", "\n")
    try:
        tree = parse_tree(Source("t", text))
    except NodegateError:
        return
    by_line = {child.meta.line: child for child in tree.children if isinstance(child, Tree)}
    for line in quick.split(text)[1]:
        assert shape(line.tree()) == shape(by_line[line.line])


SETTINGS = settings(max_examples=400, deadline=None, suppress_health_check=[HealthCheck.too_slow])


@SETTINGS
@given(circuits())
def test_language_quick_generated_files_match_the_grammar(text):
    same_trees(text)
    assert outcome(text) == grammar_only(text)


@SETTINGS
@given(valid_circuits())
def test_language_quick_valid_files_match_the_grammar(text):
    same_trees(text)
    assert outcome(text) == grammar_only(text)


@SETTINGS
@given(mutated())
def test_language_quick_mutated_files_match_the_grammar(text):
    same_trees(text)
    assert outcome(text) == grammar_only(text)


@pytest.mark.parametrize("line", [
    "resistor R1 from a to b : 1 kohm, tol = 5%",
    "led D1 from a to b : vf = 2.0 V at 10 mA, imax = 20 mA  # power LED",
    "source V1 from vin to gnd : -5V",
    "switch S1 from a to b : open, ron = 20 mohm",
    "resistor R1 from a to b",
    "resistor R1 from a to b : r_lib, tag = sense",
])
def test_language_quick_takes_common_part_lines(line):
    taken = quick.split(f"circuit c\nground gnd\n{line}\n")[1]
    assert [part.line for part in taken] == [3]


@pytest.mark.parametrize("text", [
    "resistor R1 from a to b : 1 kohm,\n",  # continues onto the next line
    "case c :\nresistor R1 from a to b : 1 kohm\n",  # continues the case
    "block b (p) {\nresistor R1 from p to q : 1 ohm\n}\n",  # inside a block
    "regulator U (in: a,\nresistor R1 from a to b : 1 kohm)\n",  # inside parentheses
    "resistor R1 from a to b : 5 at 3 V\n",  # lark reads `at` as a unit there
    "resistor R1 fromage to b : 5\n",  # lark reads `from` + `age`
    "resistor R1 from a to b : 1\u0663 V\n",  # a digit other than 0-9
    "resistor R1 from a to b : 1/4 W\n",  # an expression
    "resistor to from a to b : 1 kohm\n",  # a reserved word as a name
])
def test_language_quick_leaves_other_lines_to_the_grammar(text):
    assert quick.split("circuit c\nground gnd\n" + text)[1] == []


def test_language_quick_spots_point_at_the_tokens():
    design = parse_design("circuit c\nground gnd\nsource V1 from a to gnd : - 1 V, tol = 5%\n"
                          "resistor R1 from a to gnd : 1 kohm\n")
    spots = design.parts[0].spots
    assert [(key, spots[key].line, spots[key].column) for key in spots] == [
        ("from", 3, 16), ("to", 3, 21), ("value", 3, 27), ("tol", 3, 40)]
    assert spots["tol"].source_line == "source V1 from a to gnd : - 1 V, tol = 5%"
    assert "rating" not in spots and spots.get("rating") is None


@pytest.mark.parametrize("tail", [
    "case c :\nresistor R1 from a to b : 1 kohm\n  tol = 5%\n",
    "let r = 1 kohm,\nresistor R1 from a to b : 1 kohm\n",
    "resistor R0 from a to b : 1 kohm,\n\n# a comment, then\nresistor R1 from a to b : 1 kohm\n",
    "regulator U (in: a, out: b,\nresistor R1 from a to b : 1 kohm\n  gnd: gnd) : vout = 3 V\n",
    "block b (p) {\nresistor R1 from p to gnd : 1 ohm\n",
    'circuit again "x(" \nresistor R1 from a to b : 1 kohm\n',
    "resistor R1 from a to b : 1 kohm\nresistor R1 from b to c : 2 kohm\n",
    "resistor R1 from a to b : 1 kohms\n",
    "resistor R1 from a to a : 1 kohm\n",
    "resistor R1 from a to b : tol = 150%\n",
    "resistor R1 from a to b : 1 kohm, tol = 150%\n",
    "zener D1 from a to b : vz = 5 V\n",
    "source V1 from a to gnd : 1e999 V\n",
    'use "bad.circuit"\nresistor R1 from a to b : 1 kohm\n',
    "resistor R1 from a to gnd : 1 kohm\n" * 2 + "(\n",
])
def test_language_quick_tricky_files_match_the_grammar(tail):
    text = "circuit c\nground gnd\n" + tail
    assert outcome(text) == grammar_only(text)


def test_language_quick_bounds_what_the_grammar_reads(monkeypatch):
    monkeypatch.setattr(quick, "MAX_GRAMMAR_BYTES", 200)
    lines = ["circuit c", "ground gnd", "# " + "a long comment " * 40, ""]
    lines += [f"resistor R{i} from a to gnd : 1 kohm" for i in range(50)]  # quick lines cost nothing
    lines += [f"let x{i} = {i} V" for i in range(30)]
    with pytest.raises(NodegateError, match="more than 0 MiB of statements other than one-line parts") as caught:
        parse_design("\n".join(lines) + "\n", PATH, ROOT)
    # 19 characters of header, then `let x0 = 0 V` ... `let x14 = 14 V` pass 200 on line 4 + 50 + 15
    assert (caught.value.location.line, caught.value.location.column) == (4 + 50 + 15, 1)


def test_language_quick_parts_pickle_with_their_lines_only():
    # Worker processes receive parts: each Location travels with its own line, not the whole file.
    import pickle

    lines = ["circuit c", "ground gnd"] + [f"resistor R{i} from a to gnd : 1 kohm, tol = 1%" for i in range(2000)]
    design = parse_design("\n".join(lines) + "\n")
    part = pickle.loads(pickle.dumps(design.parts[7]))
    assert part == design.parts[7] and part.location == design.parts[7].location
    assert part.spots["tol"].source_line == lines[9] and part.spots["tol"].column == 43
    assert len(pickle.dumps(design.parts[7])) < 2000
