"""Cases: every override form, ambient, absent parts and the errors."""

import pytest

from checker.errors import DesignError, UnitError
from checker.language import parse_design

# A scenario of our own: a greenhouse logger's battery sense and status LED.
LOGGER = """\
circuit greenhouse "Greenhouse logger"
ground gnd
let r_led = 150 ohm
source    VBAT  from vbat to gnd : 3.7 V, tol = 2%
switch    S_EXT from vbat to ext : open
regulator U_LDO (in: vbat, out: rail, gnd: gnd) : vout = 3.3 V, dropout = 150 mV
led       LED   from rail to led_k : vf = 2.0 V at 10 mA
resistor  R_LED from led_k to gnd : r_led, tol = 5%
load      MCU   from rail to gnd : 12 mA
block divider (top, tap) {
    let ratio = 0.5
    resistor RA from top to tap : 100 kohm * (1 - ratio), tol = 1%
    resistor RB from tap to gnd : 100 kohm * ratio, tol = 1%
}
divider DIV (top: vbat, tap: adc)
"""


def cases(text: str):
    return parse_design(LOGGER + text)


def error(text: str, cls=DesignError):
    with pytest.raises(cls) as caught:
        cases(text)
    assert type(caught.value) is cls
    return caught.value


def test_language_cases_in_order_with_overrides():
    d = cases("case cold : VBAT = 3.0 V, ambient = -20 degC\n"
              "case nominal\n"
              "case hot : VBAT = 4.2 V, MCU = 30 mA,\n"
              "           ambient = 60 degC, U_LDO.vout = 5 V, LED.vf = 2.1 V at 20 mA\n")
    assert d.cases == ("cold", "nominal", "hot")
    cold, nominal, hot = d.netlists
    # 0 degC = 273.15 K (SI Brochure 2019, 2.3.1).
    assert cold.ambient == pytest.approx(253.15) and nominal.ambient == pytest.approx(298.15)
    assert hot.ambient == pytest.approx(333.15)
    assert cold.part("VBAT").value == 3.0 and nominal.part("VBAT").value == 3.7
    assert hot.part("MCU").value == pytest.approx(0.03)
    assert hot.part("U_LDO").props["vout"] == 5.0 and hot.part("U_LDO").props["dropout"] == pytest.approx(0.15)
    assert hot.part("LED").props["vf"] == 2.1 and hot.part("LED").at["vf"] == pytest.approx(0.02)
    assert d.parts[0].value == 3.7  # the declared parts stay nominal
    assert (cold.case_location.line, cold.case_location.column) == (16, 6)
    assert (cold.circuit, cold.ground) == ("greenhouse", "gnd")


def test_language_case_flag_absent_and_hierarchical_targets():
    d = cases("case variant_b : S_EXT = closed, LED = absent, R_LED = absent, DIV.RA.tol = 5%, DIV.RB = 47 kohm\n"
              "case no_divider : DIV = absent\n")
    variant, no_divider = d.netlists
    names = [p.name for p in variant.parts]
    assert "LED" not in names and "R_LED" not in names and len(names) == len(d.parts) - 2
    assert variant.part("S_EXT").flags == {"closed"}
    assert variant.part("DIV.RA").props["tol"] == pytest.approx(0.05)
    assert variant.part("DIV.RB").value == pytest.approx(47e3)
    assert not any(p.name.startswith("DIV.") for p in no_divider.parts)
    assert len(d.parts) == 8


def test_language_case_keeps_a_source_in_its_unit():
    # A case that turned a voltage source into a current source changed the part, silently (issue 9).
    with pytest.raises(UnitError, match="declared in V"):
        cases("case constant_current : VBAT = 100 mA\n")


@pytest.mark.parametrize("text, cls, position, words", [
    ("case c : R9 = 1 ohm\n", DesignError, (16, 10), "no part `R9`"),
    ("case c : R_LD = 1 ohm\n", DesignError, (16, 10), "did you mean `R_LED`"),
    ("case c : R_LED.tolerance = 1%\n", DesignError, (16, 16), "no property"),
    ("case c : R_LED = 1 V\n", UnitError, (16, 18), "resistor value in V"),
    ("case c : R_LED.tol = 1 V\n", UnitError, (16, 22), "tol"),
    ("case c : S_EXT = 1 ohm\n", DesignError, (16, 18), "takes open or closed"),
    ("case c : VBAT = 3 V, VBAT = 4 V\n", DesignError, (16, 22), "set twice"),
    ("case c : ambient = 3 V\n", UnitError, (16, 20), "temperature"),
    ("case c : ambient = 20 degC, ambient = 30 degC\n", DesignError, (16, 29), "set twice"),
    ("case c : ambient = -300 degC\n", DesignError, (16, 20), "absolute zero"),
    ("case c : DIV = 3 V\n", DesignError, (16, 10), "block instance"),
    ("case c : DIV.ratio = 0.3\n", DesignError, (16, 10), "block instance"),
    ("case c : U_LDO.vout = absent\n", DesignError, (16, 10), "no part `U_LDO.vout`"),
    ("case c : LED = absent, LED.vf = 2 V at 1 mA\n", DesignError, (16, 24), "absent in this case"),
    ("case c : LED.isat = 1 nA\n", DesignError, (16, 10), "not both"),
    ("case c : LED.tag = red\n", DesignError, (16, 14), "tags"),
    ("case c : VBAT = 3 V at 1 mA\n", DesignError, (16, 24), "test condition"),
    ("case c\ncase c\n", DesignError, (17, 6), "already declared"),
    ("case ground_fault\ncase from\n", DesignError, (17, 6), "reserved"),
])
def test_language_case_errors(text, cls, position, words):
    caught = error(text, cls)
    assert (caught.location.line, caught.location.column) == position
    assert words in caught.message + " ".join(caught.notes)
