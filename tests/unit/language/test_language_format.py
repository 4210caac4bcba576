"""The canonical layout (`checker.language.format`): the rules of docs/language.md,
"Canonical layout (`nodegate fmt`)", idempotence, comments kept, and designs kept.

Generated circuits are linear resistor networks with one voltage source and current
loads; besides comparing the solver's answer before and after formatting, their node
voltages are checked against an independent dense nodal analysis (Kirchhoff's current
law with node voltages as unknowns, e.g. Alexander & Sadiku, "Fundamentals of Electric
Circuits", 6th ed., 2017, ch. 3) solved with numpy.linalg.
"""

from __future__ import annotations

import ast
import difflib
import textwrap
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from checker.errors import CircuitSyntaxError, NodegateError
from checker.language import format as layout
from checker.language import parse_design
from checker.language.format import format_circuit
from checker.language.parser import parse_tree
from checker.language.source import Source
from checker.solver import solve_cases

REPO = Path(__file__).resolve().parents[3]
REPO_CIRCUITS = sorted([*REPO.glob("examples/**/*.circuit"), *REPO.glob("checker/starter/**/*.circuit")])


def canonical(text: str) -> str:
    formatted = format_circuit(text)
    assert format_circuit(formatted) == formatted
    return formatted


# --- the layout rules, one example each ------------------------------------------------

def test_language_format_spacing_and_unit_spelling():
    text = "circuit  t\nground gnd\nresistor R1 from a to b:4.7kΩ,tol=5 %,rating=.25W\n"
    assert canonical(text) == (
        "circuit t\nground gnd\nresistor R1 from a to b : 4.7 kohm, tol = 5%, rating = .25 W\n")


@pytest.mark.parametrize("written, canonical_form", [
    ("4.7uF", "4.7 uF"), ("4.7\u00b5F", "4.7 uF"), ("4.7\u03bcF", "4.7 uF"),
    ("1e-3F", "1e-3 F"), ("10   pF", "10 pF"), ("2.2E+1 nF", "2.2E+1 nF"), ("3. mF", "3. mF"),
])
def test_language_format_quantities_keep_number_and_prefix(written, canonical_form):
    # The number and the prefix stay as written: only the space and the unit's spelling change.
    text = f"circuit t\nground gnd\ncapacitor C1 from a to gnd : {written}\n"
    assert canonical(text).splitlines()[-1] == f"capacitor C1 from a to gnd : {canonical_form}"


@pytest.mark.parametrize("ohm", ["\u03a9", "\u2126", "ohm"])
def test_language_format_ohm_spellings(ohm):
    text = f"circuit t\nground gnd\nlet r = 2 k{ohm} * 3 m{ohm}/V\n"
    assert canonical(text).splitlines()[-1] == "let r = 2 kohm * 3 mohm/V"


def test_language_format_expressions():
    text = ("circuit t\nground gnd\n"
            "let a=-2*( 1+3 )^-2\n"
            "let b = 2 V ^ 2 + 3 V^2\n"
            "let c = max ( 1 V,- 2 V )/ a\n"
            "let d = 10 V/ratio\n")
    assert canonical(text).splitlines()[2:] == [
        "let a = -2 * (1 + 3)^-2",
        "let b = 2 V ^ 2 + 3 V^2",  # (2 V)^2 keeps its spaces: `2 V^2` would be 2 V² instead
        "let c = max(1 V, -2 V) / a",
        "let d = 10 V / ratio",
    ]


def test_language_format_parts_align_in_groups():
    text = textwrap.dedent("""\
        circuit t
        ground gnd
        source VIN from vin to gnd : 5 V
        regulator U1 (in: vin, out: rail, gnd: gnd) : vout = 3.3 V
        resistor R_PULLUP from rail to sda : 4.7 kohm
        capacitor C1 from rail to gnd
        # a comment line ends the group
        resistor R9 from a to b : 1 ohm

        resistor R10 from a to b : 1 ohm
        """)
    assert canonical(text).splitlines()[2:] == [
        "source    VIN      from vin to gnd                : 5 V",
        "regulator U1       (in: vin, out: rail, gnd: gnd) : vout = 3.3 V",
        "resistor  R_PULLUP from rail to sda               : 4.7 kohm",
        "capacitor C1       from rail to gnd",
        "# a comment line ends the group",
        "resistor R9 from a to b : 1 ohm",
        "",
        "resistor R10 from a to b : 1 ohm",
    ]


def test_language_format_one_changed_value_is_one_changed_line():
    before = canonical(textwrap.dedent("""\
        circuit t
        ground gnd
        source   VIN from vin to gnd : 5 V
        resistor R1 from vin to mid : 10 kohm
        resistor R2 from mid to gnd : 22 kohm
        """))
    after = canonical(before.replace("22 kohm", "220 kohm"))
    changed = [line for line in difflib.unified_diff(before.splitlines(), after.splitlines(), lineterm="", n=0)
               if line[:1] in "+-" and not line.startswith(("+++", "---"))]
    assert changed == ["-resistor R2  from mid to gnd : 22 kohm", "+resistor R2  from mid to gnd : 220 kohm"]


def test_language_format_cases_align_on_the_colon():
    text = "circuit t\nground gnd\nsource V from a to gnd : 1 V\ncase cold:V=2 V,ambient=-20degC\ncase nominal_supply\n"
    assert canonical(text).splitlines()[3:] == [
        "case cold           : V = 2 V, ambient = -20 degC",
        "case nominal_supply",
    ]


def test_language_format_comments_and_blank_lines():
    text = ("\n\n# head  \n\ncircuit t   # the board\nground gnd\n\n\n\n"
            "resistor R1 from a to b : 1 ohm # short\nresistor R22 from a to b : 10 ohm, tol = 1%   # long\n"
            "let x = 1#tight\n\n\n")
    assert canonical(text) == (
        "# head\n\ncircuit t  # the board\nground gnd\n\n"
        "resistor R1  from a to b : 1 ohm             # short\n"
        "resistor R22 from a to b : 10 ohm, tol = 1%  # long\n"
        "let x = 1  #tight\n")


def test_language_format_continuations_align_under_the_first_item():
    text = textwrap.dedent("""\
        circuit t
        ground gnd
        regulator U1 (in: vin,
          out: rail, gnd: gnd) : vout = 3.3 V, # nominal
        # from the datasheet

                  dropout = 150 mV
        resistor R1 from a to b :
         1 kohm,
               tol = 1%
        case hot : ambient = 60 degC,
         R1 = 2 kohm
        """)
    assert canonical(text).splitlines()[2:] == [
        "regulator U1 (in: vin,",
        "              out: rail, gnd: gnd) : vout = 3.3 V,  # nominal",
        "                                     # from the datasheet",
        "                                     dropout = 150 mV",
        "resistor  R1 from a to b :",
        "    1 kohm,",
        "    tol = 1%",
        "case hot : ambient = 60 degC,",
        "           R1 = 2 kohm",
    ]


def test_language_format_blocks():
    text = ("circuit t\nground gnd\nblock  div(top,tap) {   # a divider\n\n"
            "  let ratio=0.5\n\t\tresistor RA from top to tap : 1 kohm\n   # bottom half\n"
            "resistor RB from tap to gnd : 1 kohm\n\n}\ndiv D1 (top: a, tap: b) : ratio = 0.3\n")
    assert canonical(text).splitlines()[2:] == [
        "block div (top, tap) {  # a divider",
        "    let ratio = 0.5",
        "    resistor RA from top to tap : 1 kohm",
        "    # bottom half",
        "    resistor RB from tap to gnd : 1 kohm",
        "}",
        "div D1 (top: a, tap: b) : ratio = 0.3",
    ]


def test_language_format_line_ends_and_empty_files():
    assert format_circuit("\ufeffcircuit t\r\nground gnd\r\n") == "circuit t\nground gnd\n"
    assert format_circuit("") == ""
    assert format_circuit("\n \n\t\n") == ""
    assert format_circuit("# only a note") == "# only a note\n"


@pytest.mark.parametrize("text", [
    "circuit t\nresistor R1 from a b\n",
    "circuit t\nlet x = (1 + 2\n",
    "circuit t\nlet x = 5 $\n",
    "circuit t\nresistor R1 from a to b : 1 ohm,\n\nresistor R2 from a to b : 1 ohm\n",
])
def test_language_format_refuses_what_does_not_parse(text):
    with pytest.raises(CircuitSyntaxError) as expected:
        parse_tree(Source("board.circuit", text))
    with pytest.raises(CircuitSyntaxError) as caught:
        format_circuit(text, "board.circuit")
    assert (caught.value.message, caught.value.location, caught.value.notes) == (
        expected.value.message, expected.value.location, expected.value.notes)


def test_language_format_a_layout_bug_is_refused_not_written(monkeypatch):
    monkeypatch.setattr(layout, "_space", lambda tokens, i, depth: "")
    with pytest.raises(RuntimeError):
        format_circuit("circuit t\nground gnd\nresistor R1 from a to b : 1 ohm\n")


def test_language_format_deep_expressions_do_not_recurse():
    text = "circuit t\nground gnd\nlet x = " + " + ".join(["1"] * 3000) + "\n"
    assert canonical(text) == text


# --- every circuit in the repository and in the tests -----------------------------------

def same_meaning(original: str, formatted: str, path: str = "<text>", root: Path | None = None) -> None:
    """Both texts elaborate to equal designs, or both fail with the same message."""
    try:
        expected = parse_design(original, path, root)
    except NodegateError as error:
        with pytest.raises(type(error)) as caught:
            parse_design(formatted, path, root)
        assert caught.value.message == error.message
        return
    assert parse_design(formatted, path, root) == expected


def comments_of(text: str) -> list[str]:
    """Comment texts in order, found with the parser's own tokens out of the way (strings skipped)."""
    found = []
    for line in text.split("\n"):
        quoted = False
        for column, char in enumerate(line):
            if char == '"':
                quoted = not quoted
            elif char == "#" and not quoted:
                found.append(line[column:].rstrip())
                break
    return found


@pytest.mark.parametrize("path", REPO_CIRCUITS, ids=lambda p: p.name)
def test_language_format_repository_circuits(path):
    assert len(REPO_CIRCUITS) >= 3
    original = path.read_text(encoding="utf-8")
    formatted = canonical(original)
    assert comments_of(formatted) == comments_of(original)
    root = next((p for p in path.parents if (p / "nodegate.yaml").is_file()), path.parent)
    same_meaning(original, formatted, str(path), root)


def embedded_circuits() -> list[tuple[str, str]]:
    """String constants in the test suite that parse as circuit text (dedented)."""
    found = []
    for module in sorted((REPO / "tests").rglob("test_*.py")):
        try:
            nodes = list(ast.walk(ast.parse(module.read_text(encoding="utf-8"))))
        except SyntaxError:  # a module that does not compile fails its own collection
            continue
        for node in nodes:
            if isinstance(node, ast.Constant) and isinstance(node.value, str) and "\n" in node.value:
                text = textwrap.dedent(node.value)
                try:
                    parse_tree(Source("<test>", text.replace("\r\n", "\n")))
                except NodegateError:
                    continue
                found.append((f"{module.name}:{node.lineno}", text))
    return found


EMBEDDED = embedded_circuits()


def test_language_format_finds_embedded_circuits():
    assert len(EMBEDDED) >= 10


@pytest.mark.parametrize("text", [text for _, text in EMBEDDED], ids=[name for name, _ in EMBEDDED])
def test_language_format_embedded_circuits(text):
    formatted = canonical(text)
    assert comments_of(formatted) == comments_of(text.removeprefix("\ufeff"))
    same_meaning(text, formatted)


# --- generated circuits ------------------------------------------------------------------

GAP = st.sampled_from(["", " ", "  ", "\t"])
SPACE = st.sampled_from([" ", "  ", "\t", " \t "])
MANTISSAS = ["1", "2.2", "4.7", "10", "33", "47.5", "1e2", "6.8E-1", ".5", "3."]
# SI prefixes (SI Brochure, 9th ed., 2019, table 7); both micro signs as the language allows.
PREFIX_SCALE = {"": 1.0, "k": 1e3, "M": 1e6, "m": 1e-3, "u": 1e-6, "\u00b5": 1e-6, "\u03bc": 1e-6}
NOTES = ["note", "R = 5 V / 1 mA, don't \"fix\"", "# twice", "µA and Ω stay as written", "x:y=z,"]


def quantity(draw, prefixes, units) -> tuple[str, float]:
    mantissa = draw(st.sampled_from(MANTISSAS))
    prefix = draw(st.sampled_from(prefixes))
    return mantissa + draw(GAP) + prefix + draw(st.sampled_from(units)), float(mantissa) * PREFIX_SCALE[prefix]


# Resistor values as expressions over `let r_base`, with what they evaluate to.
EXPRESSIONS = [
    (["r_base"], lambda b: b),
    (["r_base", "*", "2"], lambda b: 2 * b),
    (["(", "r_base", "+", "1 k\u03a9", ")", "/", "2"], lambda b: (b + 1e3) / 2),
    (["-", "r_base", "*", "-", "1"], lambda b: b),
    (["2", "^", "2", "*", "r_base"], lambda b: 4 * b),
    (["max", "(", "r_base", ",", "3kohm", ")"], lambda b: max(b, 3e3)),
]


@dataclass
class Generated:
    text: str = ""
    comments: list[str] = field(default_factory=list)
    nets: list[str] = field(default_factory=list)  # nets[0] carries the source, ground apart
    resistors: dict[str, tuple[str, str, float]] = field(default_factory=dict)
    loads: list[tuple[str, float]] = field(default_factory=list)
    cases: list[tuple[str, float, dict[str, float]]] = field(default_factory=list)  # name, volts, resistor overrides


class Writer:
    """Statements with random spacing, comments, blank lines and continuations."""

    def __init__(self, draw, circuit: Generated):
        self.draw, self.circuit = draw, circuit

    def comment(self) -> str:
        note = f"# {len(self.circuit.comments)} {self.draw(st.sampled_from(NOTES))}"
        self.circuit.comments.append(note)
        return note

    def filler(self) -> None:
        for _ in range(self.draw(st.integers(0, 2))):
            self.circuit.text += self.draw(GAP) + (self.comment() if self.draw(st.booleans()) else "") + "\n"

    def statement(self, head: list[str], items: list[str]) -> None:
        draw = self.draw
        text = draw(GAP) + draw(SPACE).join(head)
        if items:
            text += draw(GAP) + ":" + draw(GAP)
            for position, item in enumerate(items):
                if position:
                    text += ","
                    if draw(st.booleans()):
                        text += (draw(SPACE) + self.comment() if draw(st.booleans()) else "") + "\n" + draw(SPACE)
                    else:
                        text += draw(GAP)
                text += item
        if draw(st.booleans()):
            text += draw(SPACE) + self.comment()
        self.circuit.text += text + "\n"
        self.filler()


@st.composite
def circuits(draw) -> Generated:
    circuit = Generated()
    out = Writer(draw, circuit)
    size = draw(st.integers(1, 6))
    circuit.nets = [f"n{k}_{draw(st.sampled_from(['a', 'vx', 'tap']))}" for k in range(size)]
    out.filler()
    out.statement(["circuit", "gen"], [])
    out.statement(["ground", "gnd"], [])
    base_text, base = quantity(draw, ["", "k"], ["ohm", "\u03a9", "\u2126"])
    out.statement(["let", "r_base", "=", base_text], [])
    volts_text, volts = quantity(draw, ["", "m"], ["V"])
    out.statement(["source", "V1", "from", circuit.nets[0], "to", "gnd"], [volts_text, "tol" + draw(GAP) + "=2%"])
    pairs = [(circuit.nets[k], draw(st.sampled_from(["gnd"] + circuit.nets[:k]))) for k in range(1, size)]
    pairs += [tuple(draw(st.permutations(["gnd"] + circuit.nets))[:2]) for _ in range(draw(st.integers(0, 4)))]
    for k, (a, b) in enumerate(pairs):
        if draw(st.booleans()):
            tokens, value = draw(st.sampled_from(EXPRESSIONS))
            text, ohms = draw(GAP).join(tokens), value(base)
        else:
            text, ohms = quantity(draw, ["", "k", "M"], ["ohm", "\u03a9", "\u2126"])
        name = f"R{k}"
        circuit.resistors[name] = (a, b, ohms)
        out.statement(["resistor", name, "from", a, "to", b], [text] + draw(st.sampled_from(
            [[], ["tol = 1 %"], ["tol=5%", "rating = 250mW"]])))
    for k in range(draw(st.integers(0, 2))):
        net = draw(st.sampled_from(circuit.nets))
        text, amps = quantity(draw, ["m", "u", "\u00b5"], ["A"])
        circuit.loads.append((net, amps))
        out.statement(["load", f"L{k}", "from", net, "to", "gnd"], [text])
    if draw(st.booleans()):
        out.statement(["capacitor", "C1", "from", circuit.nets[-1], "to", "gnd"], ["10" + draw(GAP) + "\u00b5F"])
    for k in range(draw(st.integers(0, 3))):
        case_volts_text, case_volts = quantity(draw, ["", "m"], ["V"])
        items, overrides = ["V1" + draw(GAP) + "=" + draw(GAP) + case_volts_text], {}
        if circuit.resistors and draw(st.booleans()):
            name = draw(st.sampled_from(sorted(circuit.resistors)))
            text, overrides[name] = quantity(draw, ["k"], ["ohm", "\u03a9"])
            items.append(f"{name} ={draw(GAP)}{text}")
        if draw(st.booleans()):
            items.append("ambient = -20degC")
        out.statement(["case", f"c{k}_{draw(st.sampled_from(['x', 'hot', 'cold_start']))}"], items)
        circuit.cases.append((f"c{k}", case_volts, overrides))
    if not circuit.cases:
        circuit.cases.append(("default", volts, {}))
    return circuit


def nodal_voltages(circuit: Generated, volts: float, overrides: dict[str, float]) -> dict[str, float]:
    """Node voltages by nodal analysis: G v = i over the nets not fixed by the source or ground."""
    fixed = {"gnd": 0.0, circuit.nets[0]: volts}
    free = [net for net in circuit.nets if net not in fixed]
    index = {net: k for k, net in enumerate(free)}
    conductance, injected = np.zeros((len(free), len(free))), np.zeros(len(free))
    for name, (a, b, ohms) in circuit.resistors.items():
        g = 1.0 / overrides.get(name, ohms)
        for here, there in ((a, b), (b, a)):
            if here in index:
                conductance[index[here], index[here]] += g
                if there in index:
                    conductance[index[here], index[there]] -= g
                else:
                    injected[index[here]] += g * fixed[there]
    for net, amps in circuit.loads:
        if net in index:
            injected[index[net]] -= amps  # the load's current leaves its `from` net
    solution = np.linalg.solve(conductance, injected) if free else []
    return {**fixed, **dict(zip(free, solution))}


SETTINGS = settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])


@SETTINGS
@given(circuits())
def test_language_format_generated_is_idempotent_and_keeps_comments(circuit):
    formatted = canonical(circuit.text)
    assert comments_of(formatted) == circuit.comments
    code = "\n".join(line.split("#")[0] for line in formatted.split("\n"))
    assert "\t" not in code and "\u03a9" not in code and "\u00b5" not in code
    assert all(line == line.rstrip() for line in formatted.split("\n"))
    assert formatted.endswith("\n") and not formatted.endswith("\n\n") and not formatted.startswith("\n")


@SETTINGS
@given(circuits())
def test_language_format_generated_keeps_the_design_and_its_solution(circuit):
    original, formatted = parse_design(circuit.text), parse_design(format_circuit(circuit.text))
    assert formatted == original
    before, after = solve_cases(original.netlists), solve_cases(formatted.netlists)
    for point_before, point_after, (_, volts, overrides) in zip(before, after, circuit.cases):
        expected = nodal_voltages(circuit, volts, overrides)
        scale = max(abs(v) for v in expected.values()) or 1.0
        assert point_after.nets.keys() == point_before.nets.keys() == expected.keys()
        for net, voltage in point_after.nets.items():
            assert voltage == pytest.approx(point_before.nets[net], rel=1e-12, abs=1e-12 * scale)
            assert voltage == pytest.approx(expected[net], rel=1e-7, abs=1e-9 * scale)


def test_language_format_documented_example():
    # docs/language.md, "Canonical layout": the example's input and output are the formatter's own.
    section = (REPO / "docs" / "language.md").read_text(encoding="utf-8").split("## Canonical layout")[1]
    before, after = [block.split("```")[0] for block in section.split("```\n")[1:4:2]]
    assert "case hot_day : " in after and format_circuit(before) == after


PIECES = list("abR019 \t\n#,:=()+-*/^.%\"{}_µΩ\r") + [
    "from ", " to ", " at ", "absent", "case c", "block b (p) {\n", "\n}\n", "let ", "kohm", "degC", "V^2",
    "resistor R ", "bjt Q (c: x, b: y, e: z) : npn", "circuit t\n", "ground gnd\n", "ambient = ", "1e3", "max("]


@SETTINGS
@given(st.lists(st.sampled_from(PIECES), max_size=60))
def test_language_format_random_text_is_refused_or_laid_out(pieces):
    # Bad input is a located NodegateError, never a crash; good input comes out canonical.
    text = "".join(pieces)
    try:
        formatted = format_circuit(text)
    except NodegateError as error:
        assert error.location is not None and error.location.line >= 1
        return
    assert format_circuit(formatted) == formatted
    assert comments_of(formatted) == comments_of(text.replace("\r\n", "\n"))
    same_meaning(text, formatted)


EDITS = [" ", "\t", "\n", "\n\n", "  # note\n", "\n# line\n", "\r\n", ",", "(", ")", "-", "^", " V", "1"]


@SETTINGS
@given(st.sampled_from([text for _, text in EMBEDDED]),
       st.lists(st.tuples(st.floats(0, 1), st.sampled_from(EDITS)), max_size=6))
def test_language_format_edited_circuits(seed, edits):
    # Random insertions into the suite's circuits: still parsing ones come out canonical and unchanged in meaning.
    text = seed
    for where, piece in edits:
        cut = int(where * len(text))
        text = text[:cut] + piece + text[cut:]
    try:
        formatted = format_circuit(text)
    except NodegateError:
        return
    assert format_circuit(formatted) == formatted
    assert comments_of(formatted) == comments_of(text.replace("\r\n", "\n"))
    same_meaning(text, formatted)


def test_language_format_size_is_bounded():
    with pytest.raises(NodegateError, match="larger than 2 MiB"):
        format_circuit("# " + "x" * (2 * 1024 * 1024))
