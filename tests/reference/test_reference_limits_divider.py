"""End to end: a resistive divider from its closed form, checked by a limits file on disk.

Closed form: V_out = V_in * R_bot / (R_top + R_bot) (the unloaded voltage divider,
Horowitz & Hill, The Art of Electronics, 3rd ed., 2015, section 1.2.3), cross-checked
by solving the two nodal (Kirchhoff current law) equations with numpy.
"""

import datetime

import numpy as np
import pytest

from checker.design import Design, Netlist, OperatingPoint, Part, PartResult
from checker.findings import CircuitResult
from checker.limits import check_findings, load_limit_file

V_IN, R_TOP, R_BOT = 3.7, 100e3, 47e3  # V, ohm, ohm: a battery-sense divider of a greenhouse logger

LIMITS = """\
# Battery sense of the greenhouse logger
limits:
  - id: adc-batt-range
    about: Battery sense stays inside the ADC input range
    check: voltage(adc_batt) in 0.1 V .. 1.6 V
  - id: sense-ratio
    about: The divider ratio is as designed
    check: "voltage(adc_batt) / voltage(vbat) >= 0.33"
    severity: warning
  - id: top-power
    about: The top resistor runs far below its rating
    check: power(R_TOP) <= 1% * R_TOP.rating
"""


def test_reference_limits_divider_closed_form_matches_nodal_solution():
    # Nodal equations with the source as a fixed node: G v = i for nodes (vbat, adc_batt),
    # vbat pinned to V_IN by a row of the identity.
    g_top, g_bot = 1 / R_TOP, 1 / R_BOT
    matrix = np.array([[1.0, 0.0], [-g_top, g_top + g_bot]])
    vbat, adc = np.linalg.solve(matrix, np.array([V_IN, 0.0]))
    assert vbat == pytest.approx(V_IN)
    assert adc == pytest.approx(V_IN * R_BOT / (R_TOP + R_BOT), rel=1e-12)


def divider():
    parts = (Part("VBAT", "source", (("from", "vbat"), ("to", "gnd")), V_IN, "V"),
             Part("R_TOP", "resistor", (("from", "vbat"), ("to", "adc_batt")), R_TOP, "ohm", props={"rating": 0.1}),
             Part("R_BOT", "resistor", (("from", "adc_batt"), ("to", "gnd")), R_BOT, "ohm", props={"rating": 0.1}))
    netlist = Netlist("logger", "nominal", 298.15, "gnd", parts)
    design = Design("logger", "Greenhouse logger", "logger.circuit", "gnd", parts, (netlist,))
    v_out = V_IN * R_BOT / (R_TOP + R_BOT)
    current = V_IN / (R_TOP + R_BOT)
    results = {
        "VBAT": PartResult(-V_IN * current, {"from": -current, "to": current}, V_IN, -current),
        "R_TOP": PartResult((V_IN - v_out) * current, {"from": current, "to": -current}, V_IN - v_out, current),
        "R_BOT": PartResult(v_out * current, {"from": current, "to": -current}, v_out, current),
    }
    point = OperatingPoint(netlist, {"gnd": 0.0, "vbat": V_IN, "adc_batt": v_out}, results)
    return design, CircuitResult("logger", design.title, design.path, (point,))


def test_reference_limits_divider_end_to_end(tmp_path):
    path = tmp_path / "limits.yaml"
    path.write_text(LIMITS)
    design, circuit = divider()
    result = check_findings([load_limit_file(path)], [design], [circuit], datetime.date(2026, 1, 1))
    found = {f.limit.id: f for f in result.findings}

    v_out = V_IN * R_BOT / (R_TOP + R_BOT)  # 1.18299 V
    (adc,) = found["adc-batt-range"].outcomes
    assert adc.margin == pytest.approx(min(v_out - 0.1, 1.6 - v_out))  # 0.41701 V, to the upper end
    assert adc.bound == 1.6 and adc.relative == pytest.approx((1.6 - v_out) / 0.75)  # half-width of 0.1 .. 1.6 V
    assert found["adc-batt-range"].status == "pass"

    (ratio,) = found["sense-ratio"].outcomes  # 47 / 147 = 0.3197 < 0.33: a warning
    assert ratio.margin == pytest.approx(R_BOT / (R_TOP + R_BOT) - 0.33) and ratio.unit == ""
    assert found["sense-ratio"].status == "warn"

    (power,) = found["top-power"].outcomes  # P = (V_in - V_out)^2 / R_top (Joule heating)
    assert power.margin == pytest.approx(0.001 - (V_IN - v_out) ** 2 / R_TOP)
    assert found["top-power"].status == "pass"
    assert result.failures == () and [f.limit.id for f in result.warnings] == ["sense-ratio"]
