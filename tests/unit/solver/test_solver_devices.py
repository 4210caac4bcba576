"""Each linear kind's DC behaviour, sign conventions and rejected values.

Expected values come from Ohm's law and Kirchhoff's laws worked by hand for each
tiny circuit (a bike light: battery, switch, series resistor, lamp load).
"""

from __future__ import annotations

import pytest

from checker.design import Netlist, Part
from checker.devices import DEVICES
from checker.kinds import KINDS
from checker.errors import DesignError, Location
from checker.solver import solve


def two(name, kind, a, b, value=None, unit=None, flags=(), line=1, **props):
    return Part(name, kind, (("from", a), ("to", b)), value, unit, frozenset(flags), props,
                location=Location("bike.circuit", line, 5))


def net(*parts, ambient=298.15):
    return Netlist("bike_light", "default", ambient, "gnd", tuple(parts))


BATTERY = two("BAT", "source", "bat", "gnd", 6.0, "V")


def test_every_net_and_part_is_reported_with_ground_at_zero():
    op = solve(net(BATTERY, two("R1", "resistor", "bat", "lamp", 10.0, "ohm"),
                   two("LAMP", "load", "lamp", "gnd", 20.0, "ohm")))
    assert op.nets == {"gnd": 0.0, "bat": 6.0, "lamp": pytest.approx(4.0)}
    assert set(op.parts) == {"BAT", "R1", "LAMP"}
    assert op.strategy == "linear" and op.iterations == 1
    r1 = op.parts["R1"]
    assert (r1.voltage, r1.current, r1.power) == pytest.approx((2.0, 0.2, 0.4))
    assert r1.pins == pytest.approx({"from": 0.2, "to": -0.2})


def test_voltage_source_sign_convention():
    # The battery delivers 6 V x 0.2 A: current runs through it from `to` to `from`.
    op = solve(net(BATTERY, two("R1", "resistor", "bat", "gnd", 30.0, "ohm")))
    bat = op.parts["BAT"]
    assert (bat.voltage, bat.current, bat.power) == pytest.approx((6.0, -0.2, -1.2))
    assert bat.pins == pytest.approx({"from": -0.2, "to": 0.2})


def test_current_source_sign_convention():
    # 10 mA through the source from gnd to `x`, so it leaves into x and through R to ground.
    op = solve(net(two("I1", "source", "gnd", "x", 10e-3, "A"), two("R1", "resistor", "x", "gnd", 100.0, "ohm")))
    assert op.nets["x"] == pytest.approx(1.0)
    assert op.parts["I1"].current == pytest.approx(10e-3)
    assert op.parts["I1"].power == pytest.approx(-10e-3)  # delivers 10 mW


def test_current_load_draws_its_current():
    op = solve(net(BATTERY, two("R1", "resistor", "bat", "rail", 10.0, "ohm"),
                   two("MCU", "load", "rail", "gnd", 50e-3, "A")))
    assert op.nets["rail"] == pytest.approx(6.0 - 0.5)
    assert op.parts["MCU"].power == pytest.approx(5.5 * 50e-3)


def test_capacitor_is_open_and_reports_its_voltage():
    op = solve(net(BATTERY, two("R1", "resistor", "bat", "c", 1e3, "ohm"), two("C1", "capacitor", "c", "gnd", 1e-6, "F")))
    assert op.parts["C1"].current == 0.0
    assert op.parts["C1"].voltage == pytest.approx(6.0)  # no current, no drop across R1


def test_inductor_is_an_exact_short_reporting_its_current():
    op = solve(net(BATTERY, two("L1", "inductor", "bat", "x", 10e-6, "H"), two("R1", "resistor", "x", "gnd", 12.0, "ohm")))
    assert op.parts["L1"].voltage == 0.0
    assert op.parts["L1"].current == pytest.approx(0.5)


def test_inductor_dcr_is_a_resistor():
    op = solve(net(BATTERY, two("L1", "inductor", "bat", "x", 10e-6, "H", dcr=3.0),
                   two("R1", "resistor", "x", "gnd", 9.0, "ohm")))
    assert op.parts["L1"].voltage == pytest.approx(1.5)


@pytest.mark.parametrize("flags, ron, lamp_volts", [({"open"}, None, 0.0), ({"closed"}, None, 6.0),
                                                    ({"closed"}, 10.0, 3.0)])
def test_switch_states(flags, ron, lamp_volts):
    props = {} if ron is None else {"ron": ron}
    op = solve(net(BATTERY, two("S1", "switch", "bat", "lamp", flags=flags, **props),
                   two("LAMP", "load", "lamp", "gnd", 10.0, "ohm")))
    assert op.nets["lamp"] == pytest.approx(lamp_volts)


def test_resistor_tempco_at_hot_ambient():
    # R(85 degC) = 100 ohm x (1 + 1000 ppm/K x 60 K) = 106 ohm.
    op = solve(net(BATTERY, two("R1", "resistor", "bat", "gnd", 100.0, "ohm", tempco=1000e-6), ambient=358.15))
    assert op.parts["R1"].current == pytest.approx(6.0 / 106.0, rel=1e-12)


def test_parts_are_reported_in_netlist_order():
    op = solve(net(two("R1", "resistor", "bat", "gnd", 1.0, "ohm"), BATTERY, two("C1", "capacitor", "bat", "gnd", 1.0, "F")))
    assert list(op.parts) == ["R1", "BAT", "C1"]


@pytest.mark.parametrize("part, words", [
    (two("R9", "resistor", "bat", "gnd", 0.0, "ohm", line=7), "R9 is 0"),
    (two("R9", "resistor", "bat", "gnd", -5.0, "ohm", line=7), "above zero"),
    (two("R9", "resistor", "bat", "gnd", line=7), "no resistance"),
    (two("R9", "resistor", "bat", "gnd", 10.0, "ohm", line=7, tempco=-0.01), "tempco"),
    (two("L9", "inductor", "bat", "gnd", 1e-6, "H", line=7, dcr=-1.0), "negative dcr"),
    (two("S9", "switch", "bat", "gnd", line=7), "`open` or `closed`"),
    (two("S9", "switch", "bat", "gnd", flags={"open", "closed"}, line=7), "`open` or `closed`"),
    (two("S9", "switch", "bat", "gnd", flags={"closed"}, line=7, ron=-1.0), "negative ron"),
    (two("V9", "source", "bat", "gnd", 1.0, "W", line=7), "in V"),
    (two("V9", "source", "bat", "gnd", line=7), "in V"),
    (two("M9", "load", "bat", "gnd", 0.0, "ohm", line=7), "above zero"),
    (two("M9", "load", "bat", "gnd", 1.0, "F", line=7), "needs a current"),
])
def test_bad_values_are_design_errors_at_the_part(part, words):
    # The tempco case: 1 - 0.01/K x 100 K <= 0 at 125 degC.
    with pytest.raises(DesignError) as caught:
        solve(net(BATTERY, two("R1", "resistor", "bat", "gnd", 1.0, "ohm"), part, ambient=398.15))
    assert words in caught.value.message
    assert caught.value.location.line == 7


def test_a_kind_without_a_device_is_not_yet_supported():
    part = Part("T1", "transformer", (("a", "bat"), ("b", "gnd")), location=Location("bike.circuit", 3, 1))
    with pytest.raises(DesignError) as caught:
        solve(net(BATTERY, part))
    assert caught.value.message == "part kind `transformer` is not yet supported by the solver"
    assert caught.value.location.line == 3


@pytest.mark.parametrize("kind, pins", [
    ("diode", "from, to"), ("led", "from, to"), ("zener", "from, to"), ("bjt", "c, b, e"), ("mosfet", "d, g, s"),
    ("regulator", "in, out, gnd"), ("converter", "in, out, gnd"), ("opamp", "plus, minus, out, rail_hi, rail_lo"),
])
def test_nonlinear_kinds_check_their_pins(kind, pins):
    part = Part("U1", kind, (("a", "bat"), ("b", "gnd")), location=Location("bike.circuit", 3, 1))
    with pytest.raises(DesignError) as caught:
        solve(net(BATTERY, part))
    assert caught.value.message == f"{kind} U1 must have the pins {pins}"
    assert caught.value.location.line == 3


def test_wrong_pins_are_a_design_error():
    part = Part("R1", "resistor", (("to", "bat"), ("from", "gnd")), 1.0, "ohm", location=Location("bike.circuit", 2, 1))
    with pytest.raises(DesignError, match="must have the pins from, to"):
        solve(net(BATTERY, part))


def test_every_kind_of_the_table_has_a_device_with_its_pins():
    assert set(DEVICES) == set(KINDS)
    assert all(cls.kind == kind and cls.pins == KINDS[kind].pins for kind, cls in DEVICES.items())
