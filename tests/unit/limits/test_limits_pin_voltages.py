"""`voltage(PART.PIN)` and `voltage(PART.PIN, PART.PIN)` in limits, and the transistor ratings they check.

Closed forms (Ohm's law and Kirchhoff's current law): a regulator drawing I_load + iq
through a feed resistor sees V_in = V_supply - R_feed (I_load + iq); below its dropout its
output is V_in - dropout (docs/models.md, regulator). A MOSFET held off (V_GS = 0 below
vth) carries no drain current, so a drain pulled up through a resistor sits at the supply.
The solver adds shunt from every net to ground, hence the small absolute tolerances.
"""

from __future__ import annotations

import datetime

import pytest

from checker.errors import LimitError
from checker.language import parse_design
from checker.limits import compile_limits, evaluate_limits, load_limit_text, load_pack
from checker.solver import solve

TODAY = datetime.date(2026, 1, 1)

# An irrigation valve controller of our own: a 12 V adapter through a 2 ohm feed to a 5 V LDO
# carrying 300 mA of solenoid driver; in `brownout` the adapter sags to 6 V.
VALVES = """circuit valves "Irrigation valve controller"
ground gnd
source    VIN    from vsup to gnd : 12 V
resistor  R_FEED from vsup to lin : 2 ohm
regulator U1     (in: lin, out: v5, gnd: gnd) : vout = 5 V, dropout = 1.2 V, iq = 1 mA
load      DRV    from v5 to gnd : 300 mA
case nominal  : VIN = 12 V
case brownout : VIN = 6 V
"""

# The same board's pump switch, held off: the gate pulled to ground, the drain pulled to 24 V.
PUMP = """circuit pump "Pump switch"
ground gnd
source   VPUMP  from vp to gnd : 24 V
resistor R_COIL from vp to drain : 470 ohm
resistor R_PD   from gate to gnd : 10 kohm
mosfet   Q_PUMP (d: drain, g: gate, s: gnd) : nmos, vth = 2 V, k = 0.5 A/V^2, vds_max = VDS_MAX, vgs_max = 20 V
"""

HEADROOM = "each: regulator\n    check: voltage(part.in, part.out) >= part.dropout + 100 mV\n"


def solved(text: str):
    design = parse_design(text, "board.circuit")
    return design, {design.name: [solve(netlist) for netlist in design.netlists]}


def findings(check: str, text: str = VALVES):
    design, ops = solved(text)
    limits = load_limit_text(f"limits:\n  - id: the-limit\n    about: a test limit\n    {check}", "limits.yaml")
    return evaluate_limits([limits], [design], ops, TODAY)[0]


def outcomes(check: str) -> dict[str, object]:
    (finding,) = findings(check)
    return {outcome.case: outcome for outcome in finding.outcomes}


def test_a_pin_voltage_is_the_voltage_of_its_net():
    design, ops = solved(VALVES)
    lin = {op.case: op.nets["lin"] for op in ops["valves"]}
    for case, outcome in outcomes("check: voltage(U1.in) <= 20 V\n").items():
        assert outcome.value == lin[case]
    assert lin["nominal"] == pytest.approx(12 - 2 * 0.301, abs=1e-6)


def test_a_two_pin_voltage_is_the_first_net_minus_the_second():
    _, ops = solved(VALVES)
    nets = {op.case: op.nets for op in ops["valves"]}
    for case, outcome in outcomes("check: voltage(U1.in, U1.out) >= 0 V\n").items():
        assert outcome.value == pytest.approx(nets[case]["lin"] - nets[case]["v5"], rel=1e-15)
    assert nets["nominal"]["lin"] - nets["nominal"]["v5"] == pytest.approx(11.398 - 5, abs=1e-6)


def test_regulator_headroom_with_each():
    (finding,) = findings(HEADROOM)
    by_case = {outcome.case: outcome for outcome in finding.outcomes}
    # nominal: 11.398 V in, 5 V out, bound 1.3 V. brownout: 5.398 V in, so in dropout the
    # output is 5.398 - 1.2 V and the headroom is the dropout, 100 mV short of the bound.
    assert by_case["nominal"].margin == pytest.approx(6.398 - 1.3, abs=1e-6) and by_case["nominal"].holds
    assert by_case["brownout"].margin == pytest.approx(-0.1, abs=1e-5) and not by_case["brownout"].holds


@pytest.mark.parametrize("check, pin", [("voltage(U1.inp) <= 20 V", "inp"),
                                        ("voltage(U1.in, U1.outt) >= 0 V", "outt")])
def test_an_unknown_pin_is_an_error_at_the_pin_listing_the_pins(check, pin):
    with pytest.raises(LimitError) as error:
        findings(f"check: {check}\n")
    assert f"part `U1` has no pin `{pin}`" in str(error.value)
    assert "its pins: in, out, gnd" in error.value.notes
    location = error.value.location
    assert (location.line, location.column) == (4, len("    check: ") + 1 + check.index(pin + ")"))


def test_a_two_terminal_part_is_not_an_end_of_a_difference():
    with pytest.raises(LimitError, match="`voltage\\(A, B\\)` takes nets or pins"):
        findings("check: voltage(R_FEED, U1.out) >= 0 V\n")


def test_the_sides_of_a_two_pin_voltage_are_one_monotone_side():
    design, _ = solved(VALVES)
    limits = load_limit_text(f"limits:\n  - id: x\n    about: x\n    {HEADROOM}", "l.yaml")
    item = compile_limits([limits], [design]).limits[0].items[0]
    (side,) = item.split.sides
    assert side.monotone and side.value.text == "voltage(part.in, part.out)"


def pump(vds_max: str):
    design, ops = solved(PUMP.replace("VDS_MAX", vds_max))
    found, _ = evaluate_limits([load_pack("ratings")], [design], ops, TODAY)
    return {finding.limit.id: finding.outcomes[0] for finding in found}


def test_a_mosfet_held_off_against_a_24_v_supply_fails_a_20_v_drain_source_rating():
    results = pump("20 V")
    drain_source = results["rating-mosfet-drain-source-voltage"]
    assert drain_source.value == pytest.approx(24.0, abs=1e-6)
    assert drain_source.margin == pytest.approx(-4.0, abs=1e-6) and not drain_source.holds
    assert results["rating-mosfet-gate-source-voltage"].holds


def test_a_mosfet_rated_above_its_supply_passes():
    assert pump("30 V")["rating-mosfet-drain-source-voltage"].margin == pytest.approx(6.0, abs=1e-6)

