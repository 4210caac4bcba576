"""Statements and parts: a whole example design, then every statement's checks."""

import pytest

from checker.errors import CircuitSyntaxError, DesignError, UnitError
from checker.kinds import KINDS
from checker.language import parse_design

HEAD = "circuit t\nground gnd\n"

# A scenario of our own: the driver board of a bicycle head light, rev C.
BIKE_LIGHT = """\
# Bicycle head light driver, rev C
circuit bike_light "Bike light driver"
ground gnd

let r_sense = 0.47 ohm            # sets the LED current with the op-amp loop
let lamp_current = 350 mA

source    VBAT   from batt to gnd     : 7.4 V, tol = 5%
switch    SW_ON  from batt to sw      : closed, ron = 40 mohm
converter U_BUCK (in: sw, out: vled, gnd: gnd) : vout = 3.6 V, efficiency = 88%, iq = 120 uA
led       D_HEAD from vled to drain   : vf = 3.1 V at lamp_current, theta_ja = 40 K/W,
                                        tj_max = 125 degC, tag = thermal, tag = lamp
mosfet    Q_DRV  (d: drain, g: gate, s: sense) : nmos, vth = 1.8 V, k = 2 A/V^2,
                                                 lambda = 0.01 V^-1, pmax = 1 W
resistor  R_SNS  from sense to gnd    : r_sense, tol = 1%, rating = 250 mW, tempco = 100 ppm/K
opamp     U_AMP  (plus: ref, minus: sense, out: gate, rail_hi: vled, rail_lo: gnd) : gain = 100000, swing = 50 mV
regulator U_REF  (in: vled, out: ref5, gnd: gnd) : vout = 2.5 V, dropout = 200 mV, iq = 5 uA, tol = 0.5%
resistor  R_REF1 from ref5 to ref     : 91 kohm
resistor  R_REF2 from ref to gnd      : 1 kohm
capacitor C_OUT  from vled to gnd     : 22 uF, vmax = 10 V, tol = 10%
inductor  L_BUCK from sw to lx        : 10 uH, dcr = 50 mohm, imax = 1.5 A
diode     D_CLAMP from gnd to lx      : isat = 10 nA, ideality = 1.05, vmax = 30 V
zener     D_TVS  from gnd to batt     : vz = 15 V at 1 mA, rz = 5 ohm
bjt       Q_LOW  (c: flag, b: sense, e: gnd) : npn, beta = 200
load      MCU    from vled to gnd     : 8 mA
"""


def design(text: str):
    return parse_design(HEAD + text)


def error(text: str, cls=DesignError, head: str = HEAD):
    with pytest.raises(cls) as caught:
        parse_design(head + text)
    assert type(caught.value) is cls
    return caught.value


def where(caught) -> tuple[int, int]:
    return caught.location.line, caught.location.column


def test_language_example_design_elaborates():
    d = parse_design(BIKE_LIGHT, path="bike.circuit")
    assert (d.name, d.title, d.ground, d.path, d.cases) == (
        "bike_light", "Bike light driver", "gnd", "bike.circuit", ("default",))
    assert {p.kind for p in d.parts} == set(KINDS)  # the example uses every kind of the table
    netlist = d.netlist("default")
    assert netlist.ambient == pytest.approx(298.15)  # 25 degC, SI Brochure 2019, 2.3.1
    assert netlist.case_location is None
    assert netlist.parts == d.parts
    assert d.location.line == 2 and d.location.column == 9


def test_language_example_design_values_in_si():
    d = parse_design(BIKE_LIGHT)
    led = d.parts[3]
    assert (led.name, led.pins) == ("D_HEAD", (("from", "vled"), ("to", "drain")))
    assert led.props == {"vf": pytest.approx(3.1), "theta_ja": 40.0, "tj_max": pytest.approx(398.15)}
    assert led.at == {"vf": pytest.approx(0.35)}
    assert led.tags == {"thermal", "lamp"}
    assert (led.location.line, led.location.column) == (11, 11)
    mosfet = d.parts[4]
    assert mosfet.pins == (("d", "drain"), ("g", "gate"), ("s", "sense"))
    assert mosfet.flags == {"nmos"} and mosfet.value is None and mosfet.value_unit is None
    assert mosfet.props == {"vth": 1.8, "k": 2.0, "lambda": pytest.approx(0.01), "pmax": 1.0}
    opamp = d.parts[6]
    assert opamp.pins == (("plus", "ref"), ("minus", "sense"), ("out", "gate"),
                          ("rail_hi", "vled"), ("rail_lo", "gnd"))
    converter = d.parts[2]
    assert converter.props["efficiency"] == pytest.approx(0.88)
    switch = d.parts[1]
    assert switch.flags == {"closed"} and switch.props["ron"] == pytest.approx(0.04)
    units = {p.name: p.value_unit for p in d.parts if p.value_unit}
    assert units == {"VBAT": "V", "R_SNS": "ohm", "R_REF1": "ohm", "R_REF2": "ohm", "C_OUT": "F",
                     "L_BUCK": "H", "MCU": "A"}


@pytest.mark.parametrize("value, unit, number", [("3 V", "V", 3.0), ("2 mA", "A", 2e-3)])
def test_language_source_is_voltage_or_current(value, unit, number):
    part = design(f"source S from a to gnd : {value}\n").parts[0]
    assert (part.value_unit, part.value) == (unit, pytest.approx(number))


@pytest.mark.parametrize("value, unit", [("12 mA", "A"), ("0.5 W", "W"), ("330 ohm", "ohm")])
def test_language_load_unit_chooses_its_model(value, unit):
    assert design(f"load L from a to gnd : {value}\n").parts[0].value_unit == unit


def test_language_no_title_uses_name_and_parts_in_any_order():
    d = parse_design("circuit probe\n\n# nets appear by use\nresistor R from a to gnd : r\nground gnd\nlet r = 1 ohm\n")
    assert d.title == "probe" and d.parts[0].value == 1.0


def test_language_continuation_comments_and_crlf():
    text = ("circuit t  # comment\r\nground gnd\r\n"
            "regulator U (in: a,   # input\r\n     out: b,\r\n\r\n  gnd: gnd) :\r\n"
            "    vout = 3.3 V,   # trailing comma continues\r\n  # a comment line\r\n    iq = (1 +\r\n 1) * 1 uA\r\n")
    part = parse_design(text).parts[0]
    assert part.pins == (("in", "a"), ("out", "b"), ("gnd", "gnd"))
    assert part.props == {"vout": 3.3, "iq": pytest.approx(2e-6)}


@pytest.mark.parametrize("text, position, words", [
    ("resistr R from a to gnd : 1 ohm\n", (3, 1), "did you mean `resistor`"),
    ("bjt Q (c: a, b: b, x: gnd) : npn\n", (3, 20), "no pin `x`"),
    ("bjt Q (c: a, b: b, c: gnd) : npn\n", (3, 20), "connected twice"),
    ("bjt Q (c: a, b: b) : npn\n", (3, 5), "`e` not connected"),
    ("bjt Q from a to b : npn\n", (3, 1), "(c: NET, b: NET, e: NET)"),
    ("resistor R (from: a, to: b) : 1 ohm\n", (3, 1), "from NET to NET"),
    ("resistor R from a to gnd : 1 ohm, tolerance = 1%\n", (3, 35), "tol, tempco"),
    ("resistor R from a to gnd : 1 ohm, tol = 1%, tol = 2%\n", (3, 45), "given twice"),
    ("resistor R from a to gnd : 1 ohm, 2 ohm\n", (3, 35), "only the first item"),
    ("resistor R from a to gnd : tol = 1%\n", (3, 10), "needs a value in ohm"),
    ("resistor R from a to gnd : 1 ohm\nresistor R from a to gnd : 1 ohm\n", (4, 10), "already declared"),
    ("bjt Q (c: a, b: b, e: gnd)\n", (3, 5), "npn or pnp"),
    ("bjt Q (c: a, b: b, e: gnd) : npn, pnp\n", (3, 35), "not both"),
    ("switch S from a to gnd : 1 ohm\n", (3, 26), "takes open or closed"),
    ("regulator U (in: a, out: b, gnd: gnd) : 3 V\n", (3, 41), "has no value"),
    ("regulator U (in: a, out: b, gnd: gnd) : iq = 1 uA\n", (3, 11), "needs `vout`"),
    ("zener Z from a to gnd : rz = 2 ohm\n", (3, 7), "needs `vz`"),
    ("diode D from a to gnd : isat = 1 nA, vf = 0.7 V at 1 mA\n", (3, 7), "not both"),
    ("led D from a to gnd : vf = 2 V\n", (3, 28), "test condition"),
    ("resistor R from a to gnd : 1 ohm, tol = 1% at 2 mA\n", (3, 47), "no test condition"),
    ("resistor R from a to gnd : 1 ohm, tag = 1 V\n", (3, 41), "one word"),
    ("let from = 1\n", (3, 5), "reserved"),
    ("resistor resistor from a to gnd : 1 ohm\n", (3, 10), "reserved"),
    ("resistor R from a to to : 1 ohm\n", (3, 22), "reserved"),
    ("load L from a to gnd : 1 F\n", (3, 24), "expected A or W or ohm"),
])
def test_language_part_errors(text, position, words):
    caught = error(text, (UnitError if "expected A" in words else DesignError))
    assert where(caught) == position
    assert words in caught.message + " ".join(caught.notes)


@pytest.mark.parametrize("head, position, words", [
    ("ground gnd\ncircuit t\n", (2, 1), "first statement"),
    ("circuit t\nground gnd\ncircuit u\n", (3, 1), "given again"),
    ("circuit t\n", (1, 1), "no `ground"),
    ("circuit t\nground gnd\nground vss\n", (3, 1), "given again"),
    ("resistor R from a to gnd : 1 ohm\n", (1, 1), "starts with `circuit"),
    ("", (1, 1), "starts with `circuit"),
])
def test_language_header_errors(head, position, words):
    caught = error("", DesignError, head=head)
    assert where(caught) == position and words in caught.message


def test_language_kind_table_lists_pins_in_order():
    # LANGUAGE.md, "Part kinds (core)": the pins of each kind.
    assert KINDS["bjt"].pins == ("c", "b", "e")
    assert KINDS["mosfet"].pins == ("d", "g", "s")
    assert KINDS["regulator"].pins == KINDS["converter"].pins == ("in", "out", "gnd")
    assert KINDS["opamp"].pins == ("plus", "minus", "out", "rail_hi", "rail_lo")
    assert all(KINDS[k].two_terminal for k in
               ("resistor", "capacitor", "inductor", "source", "load", "switch", "diode", "led", "zener"))


def test_language_text_too_large():
    with pytest.raises(DesignError):
        parse_design("#" * (2 * 1024 * 1024 + 1))


def test_language_syntax_error_class():
    assert isinstance(error("resistor R from a\n", CircuitSyntaxError), CircuitSyntaxError)
