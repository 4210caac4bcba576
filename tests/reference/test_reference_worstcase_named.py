"""Named worst cases, each against its own closed form computed here.

Every test states the closed form in a comment and computes it; nodegate's worst-case analysis
(`tolerances: worst-case`) must find that worst, never a better one. Sources:
- voltage divider: Ohm's law and KCL (any circuits text, e.g. Alexander & Sadiku, "Fundamentals of
  Electric Circuits", 6th ed., 2017, ch. 2; from memory);
- Wheatstone bridge: two dividers from one supply (same source);
- maximum power transfer theorem (Jacobi's law; any circuits text, e.g. Alexander & Sadiku, ch. 4;
  chapter from memory): P_L = V^2 R_L / (R_S + R_L)^2 is largest at R_L = R_S, V^2 / (4 R_S);
- the regulator, mosfet and constant-power load laws as docs/models.md states them (regulator: the
  smooth minimum of vout and Vin - dropout; mosfet: Shichman & Hodges, IEEE J. Solid-State Circuits,
  1968, square law; constant-power load: I = P / V);
- margins: RULES.md ("Margins"), as restated in docs/limits.md.
Scenarios are our own inventions.
"""

from __future__ import annotations

import datetime
import itertools
import math

import pytest

from checker.analysis import analyse  # the engine under test
from checker.cli import main
from checker.errors import NoSolutionError
from checker.findings import Analysis, Finding
from checker.language import parse_design
from checker.limits import compile_limits, load_limit_text
from checker.report.view import format_margin
from checker.solver import solve

TODAY = datetime.date(2030, 1, 1)
RESOLUTION = 1e-9  # relative to the quantity's scale


def worst_case(circuit: str, check: str) -> Finding:
    """nodegate's worst-case finding for one check on one circuit."""
    design = parse_design(circuit, "board.circuit")
    limits = load_limit_text(f"limits:\n  - id: lim\n    about: under test\n    check: {check}\n", "limits.yaml")
    return analyse(compile_limits([limits], [design]), [design], TODAY, Analysis(mode="worst-case")).findings[0]


def repo(tmp_path, circuit: str, check: str, limit_id: str):
    """A checked-in hardware folder: one circuit, one limits file, worst-case analysis."""
    (tmp_path / "board.circuit").write_text(circuit, encoding="utf-8")
    (tmp_path / "limits.yaml").write_text(f"limits:\n  - id: {limit_id}\n    about: under test\n"
                                          f"    check: {check}\n", encoding="utf-8")
    config = tmp_path / "nodegate.yaml"
    config.write_text("circuits:\n  - board.circuit\nlimits:\n  - limits.yaml\n"
                      "analysis:\n  tolerances: worst-case\n", encoding="utf-8")
    return config


def deviations(finding: Finding) -> dict[str, float]:
    return dict(finding.worst.point)


def exact(value: float) -> float:
    """The float nodegate reads back from a bound written with 12 significant digits."""
    return float(f"{value:.12g}")


# --- regulator output tolerance -----------------------------------------------------------------

RAIL = """circuit station "Weather station 3.3 V rail (our own scenario)"
ground gnd
source    VIN from vin to gnd              : 5 V
regulator U1  (in: vin, out: out, gnd: gnd) : vout = 3.3 V, tol = 5%
resistor  RL  from out to gnd              : 330 ohm, tol = 5%
"""


def test_regulator_vout_tolerance_fails_its_window():
    # Regulator law (docs/models.md): Vout = smin(vout, Vin - dropout); with 1.5 V of headroom the
    # smooth minimum differs from vout by 5 mV exp(-1.5 V / 5 mV), nothing. So Vout spans
    # 3.3 (1 -+ 5 %) = 3.135 V .. 3.465 V and `in 3.15 V .. 3.45 V` has margin (RULES: min(x - lo, hi - x))
    # 3.135 - 3.15 = 3.45 - 3.465 = -15 mV at either end of U1.vout; RL moves nothing.
    low, high = 3.3 * 0.95, 3.3 * 1.05
    expected = min(low - 3.15, 3.45 - low)
    assert expected == pytest.approx(min(high - 3.15, 3.45 - high), abs=1e-12) == pytest.approx(-0.015, abs=1e-12)
    finding = worst_case(RAIL, "voltage(out) in 3.15 V .. 3.45 V")
    worst = finding.worst
    assert not worst.holds and finding.status == "fail"
    assert worst.margin == pytest.approx(expected, abs=RESOLUTION * 3.465)
    point = deviations(finding)
    assert set(point) == {"U1.vout", "RL"}
    assert abs(point["U1.vout"]) == pytest.approx(0.05, rel=1e-12)
    assert worst.value == pytest.approx(3.3 * (1 + point["U1.vout"]), rel=1e-9)


def test_explain_names_the_regulator_output_among_the_values_that_move_the_limit(tmp_path, capsys):
    # Same rail: only U1.vout moves voltage(out) (the regulator law holds vout whatever the load), by
    # 2 x 5 % x 3.3 V = 330 mV over its band, so explain's table of values that move the limit must list
    # U1.vout with that change. (At the worst point the margin of this centred window is -15 mV at both
    # ends of the band: a list built from the margin's change between the two ends there sees nothing.)
    config = repo(tmp_path, RAIL, "voltage(out) in 3.15 V .. 3.45 V", "rail-window")
    assert main(["explain", "rail-window", "--config", str(config)]) == 0  # explain reports; it never fails
    out = capsys.readouterr().out
    rows = [line for line in out.splitlines() if line.strip().startswith("U1.vout")]  # not the corner label
    assert rows and any(format_margin(2 * 0.05 * 3.3, "V") in row for row in rows), out


# --- divider ------------------------------------------------------------------------------------

HIVE = """circuit hive "Beehive scale bridge supply tap (our own scenario)"
ground gnd
source   VS from top to gnd : 10 V
resistor R1 from top to tap : 1 kohm, tol = 5%
resistor R2 from tap to gnd : 1 kohm, tol = 5%
"""


def test_divider_of_two_five_percent_resistors_fails_a_two_percent_window():
    # Voltage divider (Ohm's law and KCL): Vtap = Vs R2 / (R1 + R2), lowest with R1 high and R2 low:
    # 10 * 0.95 / (0.95 + 1.05) = 4.75 V, highest 5.25 V; margin min(4.75 - 4.9, 5.1 - 5.25) = -0.15 V.
    corners = [10 * r2 / (r1 + r2) for r1, r2 in itertools.product((0.95, 1.05), repeat=2)]
    assert min(corners) == pytest.approx(4.75, rel=1e-12) and max(corners) == pytest.approx(5.25, rel=1e-12)
    expected = min(min(corners) - 4.9, 5.1 - max(corners))
    finding = worst_case(HIVE, "voltage(tap) in 4.9 V .. 5.1 V")
    assert not finding.worst.holds
    assert finding.worst.margin == pytest.approx(expected, abs=RESOLUTION * 5.25)
    assert expected == pytest.approx(-0.15, abs=1e-12)
    point = deviations(finding)
    assert point["R1"] == -point["R2"] and abs(point["R1"]) == pytest.approx(0.05, rel=1e-12)
    if finding.worst.method == "vertices":
        assert finding.worst.proved  # a linear circuit's vertices are a proof (docs/analysis.md)


# --- Wheatstone bridge --------------------------------------------------------------------------

def bridge(supply: str) -> str:
    return ('circuit scale "Greenhouse load-cell bridge (our own scenario)"\nground gnd\n'
            f"source   VS from top to gnd : {supply}\n"
            "resistor R1 from top to a   : 1 kohm, tol = 1%\n"
            "resistor R2 from a to gnd   : 1 kohm, tol = 1%\n"
            "resistor R3 from top to b   : 1 kohm, tol = 1%\n"
            "resistor R4 from b to gnd   : 1 kohm, tol = 1%\n")


@pytest.mark.parametrize("supply, vs_tol", [("10 V", 0.0), ("5 V, tol = 1%", 0.01)])
def test_balanced_bridge_abs_difference_is_decided_at_a_vertex_not_at_nominal(supply, vs_tol):
    # Wheatstone bridge, each side a divider (Ohm's law and KCL): Va = Vs R2/(R1 + R2), Vb = Vs R4/(R3 + R4).
    # |Va - Vb| is 0 at nominal (where the one-at-a-time swings of abs() cancel) and largest with
    # Vs high, R2, R3 high and R1, R4 low (or mirrored): Vs (1.01/2 - 0.99/2) = 0.01 Vs.
    # From 10 V exact: 100 mV, margin 20 mV - 100 mV = -80 mV. From 5 V +-1 %: 5.05 * 0.01 = 50.5 mV,
    # margin -30.5 mV, the figure the bug report gives for its own bridge (its supply is our guess).
    vs = float(supply.split()[0]) * (1 + vs_tol)
    worst_difference = max(vs * (r2 / (r1 + r2) - r4 / (r3 + r4))
                           for r1, r2, r3, r4 in itertools.product((0.99, 1.01), repeat=4))
    assert worst_difference == pytest.approx(0.01 * vs, rel=1e-12)
    expected = 0.020 - worst_difference
    finding = worst_case(bridge(supply), "abs(voltage(a) - voltage(b)) <= 20 mV")
    assert not finding.worst.holds
    assert finding.worst.margin == pytest.approx(expected, abs=RESOLUTION * 0.01 * vs)
    point = deviations(finding)
    assert {round(point[r] / 0.01) for r in ("R1", "R2", "R3", "R4")} == {-1, 1}  # all at an end of their band
    assert point["R1"] == point["R4"] == -point["R2"] == -point["R3"]


# --- maximum power transfer: the peak is inside the box ----------------------------------------

THEVENIN = """circuit heater "Greenhouse heater on a long cable (our own scenario)"
ground gnd
source   VS     from src to gnd : 10 V, tol = 5%
resistor R_SRC  from src to out : 100 ohm, tol = 5%
resistor R_LOAD from out to gnd : 100 ohm, tol = 20%
"""


def load_power(vs: float, rs: float, rl: float) -> float:
    """P_L = V^2 R_L / (R_S + R_L)^2 (series circuit, Ohm's law)."""
    return vs ** 2 * rl / (rs + rl) ** 2


def test_matched_load_power_peaks_inside_the_box():
    # Maximum power transfer theorem (Jacobi's law), any circuits text: for fixed R_S, P_L is largest at
    # R_L = R_S, P = V^2 / (4 R_S), largest at V high and R_S low: 10.5^2 / (4 * 95) = 0.29013 W.
    # With the load at 100 ohm +-5 % as first proposed, R_L = R_S = 95 ohm would be a vertex; the load's
    # +-20 % band (80 .. 120 ohm) puts 95 ohm strictly inside, so no vertex reaches the peak.
    peak = 10.5 ** 2 / (4 * 95.0)
    corners = [load_power(10 * (1 + a), 100 * (1 + b), 100 * (1 + c))
               for a, b, c in itertools.product((-0.05, 0.05), (-0.05, 0.05), (-0.2, 0.2))]
    nominal = load_power(10, 100, 100)
    limit = exact((peak + max(corners)) / 2)  # 0.28907 W: nominal and every vertex hold, the peak fails
    assert nominal < max(corners) < limit < peak and peak - limit > 1e-4
    finding = worst_case(THEVENIN, f"power(R_LOAD) <= {limit:.12g} W")
    worst = finding.worst
    assert not worst.holds, "only an interior search finds this failure"
    assert worst.margin <= limit - peak + RESOLUTION * peak  # never better than the true peak
    assert worst.margin >= limit - peak - RESOLUTION * peak  # and no worse: nothing exceeds the peak
    point = deviations(finding)
    assert point["VS"] == pytest.approx(0.05, rel=1e-9) and point["R_SRC"] == pytest.approx(-0.05, rel=1e-9)
    assert 100 * (1 + point["R_LOAD"]) == pytest.approx(95.0, rel=1e-3)  # R_L = R_S
    assert worst.method == "interior" and not worst.proved


# --- mosfet: dissipation peaks at V_DS = V_DD / 2 ------------------------------------------------

FAN = """circuit fan "Bike light fan driver (our own scenario)"
ground gnd
source   VDD from vdd to gnd : 12 V, tol = 5%
source   VG  from g to gnd   : 2.1 V, tol = 5%
resistor RD  from vdd to d   : 100 ohm, tol = 5%
mosfet   M1  (d: d, g: g, s: gnd) : nmos, vth = 1 V, k = 0.1 A/V^2, lambda = 0 V^-1
"""
VTH, K = 1.0, 0.1


def mosfet_power(vg: float, vdd: float, rd: float) -> float:
    """V_DS I_D of the square-law nmos under a drain resistor (Shichman & Hodges): saturation
    I = K/2 Vov^2 while V_DS = V_DD - I R_D >= Vov; otherwise triode, K (Vov V - V^2/2) = (V_DD - V)/R_D."""
    vov = vg - VTH
    current = K / 2 * vov ** 2
    vds = vdd - current * rd
    if vds < vov:  # triode: K R (Vov V - V^2 / 2) = V_DD - V, the root below Vov
        a, b, c = K * rd / 2, -(K * rd * vov + 1), vdd
        vds = (-b - math.sqrt(b * b - 4 * a * c)) / (2 * a)
        current = (vdd - vds) / rd
    return vds * current


def test_mosfet_dissipation_peak_inside_the_box():
    # P = (V_DD - I R_D) I is largest at I = V_DD / (2 R_D), V_DS = V_DD / 2, P = V_DD^2 / (4 R_D):
    # 12.6^2 / (4 * 95) = 0.41779 W at V_DD +5 %, R_D -5 %, if the gate can set that current: I* = 66.3 mA
    # needs Vov = sqrt(2 I* / K) = 1.152 V, V_G = 2.152 V, inside 2.1 V +-5 % (1.995 .. 2.205 V); and
    # V_DS = 6.3 V >= Vov, so the part is in saturation there. No vertex sets that gate voltage.
    vdd, rd = 12 * 1.05, 100 * 0.95
    peak = vdd ** 2 / (4 * rd)
    gate = VTH + math.sqrt(2 * (vdd / (2 * rd)) / K)
    assert 2.1 * 0.95 < gate < 2.1 * 1.05 and vdd / 2 >= gate - VTH
    assert mosfet_power(gate, vdd, rd) == pytest.approx(peak, rel=1e-12)
    corners = [mosfet_power(2.1 * (1 + a), 12 * (1 + b), 100 * (1 + c))
               for a, b, c in itertools.product((-0.05, 0.05), repeat=3)]
    limit = exact((peak + max(corners)) / 2)
    assert mosfet_power(2.1, 12, 100) < max(corners) < limit < peak
    finding = worst_case(FAN, f"power(M1) <= {limit:.12g} W")
    worst = finding.worst
    assert not worst.holds
    # never better than the peak; SHUNT (1e-12 S across the channel) adds V_DS^2 SHUNT = 4e-11 W at most
    assert worst.margin <= limit - peak + RESOLUTION * peak
    assert worst.margin >= limit - peak - RESOLUTION * peak
    point = deviations(finding)
    assert point["VDD"] == pytest.approx(0.05, rel=1e-9) and point["RD"] == pytest.approx(-0.05, rel=1e-9)
    assert 2.1 * (1 + point["VG"]) == pytest.approx(gate, rel=1e-3)


# --- a corner without an operating point --------------------------------------------------------

CABLE_FAN = """circuit vent "Greenhouse vent fan at the end of a cable (our own scenario)"
ground gnd
source   VS  from vs to gnd  : 10 V, tol = 10%
resistor RC  from vs to fan  : 10 ohm, tol = 5%
load     FAN from fan to gnd : 2.4 W
"""
FAN_CHECK = "voltage(fan) >= 5 V"


def test_a_constant_power_load_the_low_supply_corner_cannot_feed_fails_with_an_error(tmp_path, capsys):
    # Constant-power load through a series resistance (docs/models.md: I = P / V): V_L = V_S - R P / V_L,
    # V_L^2 - V_S V_L + R P = 0, real only while V_S^2 >= 4 R P. Nominal: 100 >= 96 V^2, V_L = (10 + 2) / 2
    # = 6 V. At V_S -10 %: 81 < 4 * 9.5 * 2.4 = 91.2 (even with R_C low): no operating point exists.
    power = 2.4

    def feasible(vs: float, rc: float) -> bool:
        return vs ** 2 >= 4 * rc * power
    assert feasible(10, 10) and (10 + math.sqrt(100 - 4 * 10 * power)) / 2 == pytest.approx(6.0)
    assert not any(feasible(9.0, rc) for rc in (9.5, 10.5))
    netlist = parse_design(CABLE_FAN.replace("10 V, tol", "9 V, tol"), "vent.circuit").netlists[0]
    with pytest.raises(NoSolutionError):  # the solver agrees that 9 V cannot feed 2.4 W through 9.5 ohm+
        solve(netlist)
    finding = worst_case(CABLE_FAN, FAN_CHECK)
    worst = finding.worst
    assert worst.error, worst
    assert not worst.holds and worst.margin == -math.inf and finding.status == "fail"
    point = deviations(finding)
    assert set(point) == {"VS", "RC"}
    assert not feasible(10 * (1 + point["VS"]), 10 * (1 + point["RC"]))  # the named point really has none
    assert "VS" in worst.corner
    # Through the CLI a failing limit is exit 1, not an input error (2) nor a bug (3).
    config = repo(tmp_path, CABLE_FAN, FAN_CHECK, "fan-voltage")
    assert main(["check", str(tmp_path), "--config", str(config), "--out", str(tmp_path / "out")]) == 1
