"""Random text and random edits of a valid file: a Design or a NodegateError, nothing else."""

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from checker.errors import NodegateError
from checker.language import parse_design

VALID = """\
# Weather station mast: wind vane sense and heater, rev A
circuit mast "Weather mast"
ground gnd
let r_vane = 10 kohm
source   VIN   from vin to gnd : 12 V, tol = 5%
switch   S_HT  from vin to heat : open, ron = 20 mohm
resistor R_HT  from heat to gnd : 48 ohm, rating = 5 W, tempco = 200 ppm/K, tag = heater
zener    D_Z   from gnd to vin : vz = 15 V at 5 mA
bjt      Q1    (c: vin, b: base, e: emit) : npn, beta = 150
block vane (top, tap) {
    let ratio = 0.5
    resistor RA from top to tap : r_vane * (1 - ratio)
    resistor RB from tap to gnd : r_vane * ratio
}
vane V1 (top: vin,
         tap: wind) : ratio = 0.25
case winter : ambient = -25 degC, S_HT = closed, V1.RA.tol = 2%
case summer : ambient = 45 degC, VIN = max(11 V, 10 V + 500 mV)
"""

PIECES = list("abcXYZ019 \t\n#,:=()+-*/^.%\"{}_µΩ\r\x00é") + [
    "from ", " to ", " at ", "absent", "case ", "block ", "let ", "use \"x.circuit\"", "kohm", "degC",
    "resistor ", "circuit ", "ground ", "ambient = ", "1e999", "V^-1", "sqrt(", "min(", "(((("]


def outcome(text: str) -> None:
    try:
        parse_design(text)
    except NodegateError as error:
        assert error.location is None or error.location.line >= 1


def test_language_valid_fuzz_seed_parses():
    assert parse_design(VALID).cases == ("winter", "summer")


@settings(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.text(max_size=300))
def test_language_random_text_never_crashes(text):
    outcome(text)


@settings(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.lists(st.sampled_from(PIECES), max_size=60))
def test_language_random_pieces_never_crash(pieces):
    outcome("".join(pieces))


@st.composite
def mutated(draw):
    text = list(VALID)
    for _ in range(draw(st.integers(1, 8))):
        position = draw(st.integers(0, len(text)))
        action = draw(st.sampled_from(["insert", "delete", "replace"]))
        piece = draw(st.sampled_from(PIECES) | st.characters())
        if action == "insert":
            text[position:position] = [piece]
        elif text:
            index = min(position, len(text) - 1)
            text[index:index + 1] = [] if action == "delete" else [piece]
    return "".join(text)


@settings(max_examples=500, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(mutated())
def test_language_mutations_of_a_valid_file_never_crash(text):
    outcome(text)
