"""Stable operating points (docs/models.md, "Stability and several states") against hand results.

Scenarios are our own: a greenhouse vent comparator, a door-latch memory, a negative-resistance
sensor front end, a mast feeder at its limit and a warning blinker.

- Schmitt triggers: the switching thresholds are where the op-amp's inputs are equal with the
  output at a rail (Horowitz & Hill, "The Art of Electronics", 3rd ed., 2015, on comparators with
  hysteresis — section from memory). Non-inverting, with R1 from the input and RF from the output
  to the plus input and the reference at the minus input: v+ = (Vin RF + Vout R1) / (R1 + RF),
  so the output leaves a rail when Vin = (Vref (R1 + RF) - Vrail R1) / RF. Inverting, with R1 from
  the reference and RF from the output to the plus input and the input at the minus input, the
  thresholds are v+ at either rail. The finite gain (1e5) moves them by (rail - Vmid) / A at the
  inputs, 25 µV here; the tests stay 1 mV clear of them.
- The latch: two n-MOSFETs cross-coupled, each drain pulled up by 10 kΩ, the square law of
  docs/models.md (Shichman & Hodges, IEEE J. Solid-State Circuits, 1968) with its 1 pS from drain
  to source: the off transistor's drain sits at the divider of its pull-up and 100 MΩ ∥ 1 TΩ, the
  on transistor's drain solves a quadratic in the triode region, and the balance point q = qn
  solves one in saturation.
- The negative-resistance converter: an op-amp with gain 1 + R1/R2 = 2 and R3 from its output to
  its plus input shows -R3 R2 / R1 = -1 kΩ at that input while the output is inside its rails,
  and R3 to a rail beyond (a negative impedance converter, Horowitz & Hill, as above). A 2 kΩ load
  line from 0 V crosses it three times: at 0 V (unstable: 1/2k - 1/1k < 0) and at ±20/3 V.
- A constant-power load P fed from V through R has operating points v = (V ± sqrt(V² - 4PR))/2;
  at P = V²/(4R) they meet at V/2, a fold, and no stable point is left.
"""

from __future__ import annotations

import math

import pytest

from checker.cli import main
from checker.errors import NoSolutionError
from checker.language import parse_design
from checker.solver import solve_states

VENT = """circuit vent "Greenhouse vent comparator"
ground gnd
source   VCC  from vcc to gnd : 5 V
source   VREF from ref to gnd : 2.5 V
source   VIN  from vin to gnd : 2.5 V
resistor R1   from {r1_from} to plus : 10 kohm
resistor RF   from out to plus : 100 kohm
resistor RL   from out to gnd  : 10 kohm
opamp    U1   (plus: plus, minus: {minus}, out: out, rail_hi: vcc, rail_lo: gnd)
"""
R1, RF = 10e3, 100e3


def _states(text: str, vin: float) -> list:
    design = parse_design(text + f"case probe : VIN = {vin!r} V\n", "vent.circuit")
    return list(solve_states(design.netlists)[0].points)


def _outputs(text: str, vin: float) -> list[float]:
    return sorted(round(point.nets["out"], 6) for point in _states(text, vin))


NON_INVERTING = VENT.format(r1_from="vin", minus="ref")
INVERTING = VENT.format(r1_from="ref", minus="vin")


def test_non_inverting_schmitt_thresholds_and_states():
    low = (2.5 * (R1 + RF) - 5.0 * R1) / RF  # 2.25 V: below it the output can only be low
    high = 2.5 * (R1 + RF) / RF  # 2.75 V: above it the output can only be high
    assert _outputs(NON_INVERTING, low - 1e-3) == [0.0]
    assert _outputs(NON_INVERTING, low + 1e-3) == [0.0, 5.0]
    assert _outputs(NON_INVERTING, high - 1e-3) == [0.0, 5.0]
    assert _outputs(NON_INVERTING, high + 1e-3) == [5.0]


def test_non_inverting_schmitt_inside_the_band_reports_both_states_with_their_plus_input():
    points = _states(NON_INVERTING, 2.5)
    assert [point.state for point in points] == ["1 of 2", "2 of 2"]
    for point in points:
        out = point.nets["out"]
        assert point.nets["plus"] == pytest.approx((2.5 * RF + out * R1) / (R1 + RF), rel=1e-9)


def test_inverting_schmitt_thresholds_and_states():
    upper = (2.5 * RF + 5.0 * R1) / (R1 + RF)  # 2.7273 V: v+ with the output high
    lower = (2.5 * RF + 0.0 * R1) / (R1 + RF)  # 2.2727 V: v+ with the output low
    assert _outputs(INVERTING, lower - 1e-3) == [5.0]
    assert _outputs(INVERTING, lower + 1e-3) == [0.0, 5.0]
    assert _outputs(INVERTING, upper - 1e-3) == [0.0, 5.0]
    assert _outputs(INVERTING, upper + 1e-3) == [0.0]


LATCH = """circuit door "Greenhouse door latch memory"
ground gnd
source   VDD     from vdd to gnd : 5 V
resistor RD1     from vdd to q   : 10 kohm
resistor RD2     from vdd to qn  : 10 kohm
mosfet   M1      (d: q, g: qn, s: gnd)  : nmos, vth = 1 V, k = 2 mA/V^2
mosfet   M2      (d: qn, g: q, s: gnd)  : nmos, vth = 1 V, k = 2 mA/V^2
resistor R_SET   from q to gnd   : 100 Mohm
resistor R_RESET from qn to gnd  : 100 Mohm
case hold : VDD = 5 V
"""
K, VTH, RD = 2e-3, 1.0, 10e3
G_LEAK = 1 / 100e6 + 1e-12  # S from each drain to ground: R_SET (or R_RESET) and the transistor's shunt


def _latch_hand() -> tuple[float, float, float]:
    """(high drain, low drain, balance point) of the latch by hand (square law, see the docstring)."""
    high = 5.0 / RD / (1 / RD + G_LEAK)  # the off transistor's drain
    # KCL at the on drain in triode: (5 - v)/RD = K((high - VTH) v - v²/2) + G_LEAK v
    a, b, c = K / 2, -(K * (high - VTH) + 1 / RD + G_LEAK), 5.0 / RD
    low = (-b - math.sqrt(b * b - 4 * a * c)) / (2 * a)
    # Balance q = qn = v, both in saturation: (5 - v)/RD = K/2 (v - VTH)² + G_LEAK v
    a, b, c = K / 2, -K * VTH + 1 / RD + G_LEAK, K / 2 * VTH ** 2 - 5.0 / RD
    balance = (-b + math.sqrt(b * b - 4 * a * c)) / (2 * a)
    return high, low, balance


def test_latch_reports_both_states_against_the_hand_model_and_rejects_the_balance_point():
    high, low, balance = _latch_hand()
    case = solve_states(parse_design(LATCH, "door.circuit").netlists)[0]
    assert case.found == 3 and case.stable == 2
    pairs = sorted((point.nets["q"], point.nets["qn"]) for point in case.points)
    assert pairs[0] == pytest.approx((low, high), rel=1e-9)
    assert pairs[1] == pytest.approx((high, low), rel=1e-9)
    assert len(case.rejected) == 1
    assert f"q {balance:.3g} V" in case.rejected[0]
    assert "the determinant of its Jacobian has the sign opposite to a passive circuit's" in case.rejected[0]


@pytest.mark.parametrize("start, q_high", [("5 V", True), ("0 V", False)])
def test_a_case_can_pin_the_state_the_design_relies_on(start, q_high):
    high, low, _ = _latch_hand()
    text = LATCH + f"case armed : q starts at {start}\n"
    armed = solve_states(parse_design(text, "door.circuit").netlists)[1]
    assert [point.state for point in armed.points] == [""]
    assert armed.points[0].nets["q"] == pytest.approx(high if q_high else low, rel=1e-9)


NIC = """circuit front "Sensor front end with a negative-resistance converter"
ground gnd
source   VCC from vcc to gnd : 10 V
source   VEE from vee to gnd : -10 V
resistor R1  from out to m : 10 kohm
resistor R2  from m to gnd : 10 kohm
resistor R3  from out to t : 1 kohm
resistor RS  from t to gnd : 2 kohm
opamp    U1  (plus: t, minus: m, out: out, rail_hi: vcc, rail_lo: vee)
"""


def test_a_negative_resistance_load_line_keeps_the_two_outer_crossings():
    case = solve_states(parse_design(NIC, "front.circuit").netlists)[0]
    assert sorted(point.nets["t"] for point in case.points) == pytest.approx([-20 / 3, 20 / 3], rel=1e-9)
    assert case.found == 3 and len(case.rejected) == 1
    assert "(t 0 V" in case.rejected[0] or "t 0 V" in case.rejected[0]


FEEDER = """circuit feeder "Sensor mast feeder"
ground gnd
source   VS   from vs to gnd : 10 V
resistor RS   from vs to bus : 10 ohm
load     MAST from bus to gnd : 2 W
case light : MAST = 2 W
case limit : MAST = 2.5 W
"""


def test_a_constant_power_load_keeps_its_upper_point_and_fails_at_its_maximum_power(tmp_path, capsys):
    light = solve_states(parse_design(FEEDER.replace("case limit : MAST = 2.5 W\n", ""), "f.circuit").netlists)[0]
    upper = (10 + math.sqrt(100 - 4 * 2 * 10)) / 2  # 8.873 V; the lower 1.127 V is unstable
    assert [point.nets["bus"] for point in light.points] == [pytest.approx(upper, rel=1e-9)]
    path = tmp_path / "feeder.circuit"
    path.write_text(FEEDER, encoding="utf-8")
    assert main(["solve", str(path)]) == 2
    err = capsys.readouterr().err
    assert "feeder.circuit:7:6: error: circuit `feeder` has no stable operating point in case `limit`" in err
    assert "it sits on a fold" in err and "the parts involved: RS, MAST" in err


BLINKER = """circuit blinker "Vent warning blinker"
ground gnd
source    VCC from vcc to gnd : 5 V
resistor  R1  from vcc to plus : 10 kohm
resistor  R2  from plus to gnd : 10 kohm
resistor  RF  from out to plus : 10 kohm
resistor  RT  from out to minus : 100 kohm
capacitor CT  from minus to gnd : 1 uF
opamp     U1  (plus: plus, minus: minus, out: out, rail_hi: vcc, rail_lo: gnd)
"""


def test_an_op_amp_oscillator_has_no_stable_point_and_is_an_error(tmp_path, capsys):
    path = tmp_path / "blinker.circuit"
    path.write_text(BLINKER, encoding="utf-8")
    assert main(["solve", str(path)]) == 2
    err = capsys.readouterr().err
    assert "error: circuit `blinker` has no stable operating point in case `default`" in err
    assert "U1" in err and "a small disturbance grows" in err
    with pytest.raises(NoSolutionError):
        solve_states(parse_design(BLINKER, "blinker.circuit").netlists)
