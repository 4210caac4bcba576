"""The built-in packs against published curves and closed forms.

Sources (cited beside each check):
- IEC 60115-1, fixed resistors, rated dissipation: full rated power P70 to the 70 degC
  rated ambient, linear to zero at the upper category temperature (155 degC for film
  chips, as manufacturers' datasheets state; the clause of the standard from memory).
- NASA/TP-2003-212242 (EEE-INST-002, 2003), resistor derating, style RM: power ratio
  0.60 to the knee, then linear to a derated zero-power temperature of
  knee + 0.60 x (rated zero - knee) (seen via a secondary copy of its table);
  capacitor derating, ceramic: voltage factor 0.60.
- JEDEC JESD51-2A: theta_JA = (T_J - T_A) / P, so T_J = T_A + P x theta_JA.
- Junction derating tj_max - 40 K, at most 125 degC: EEE-INST-002, from memory.
- Transistor absolute maximum ratings V_DS, V_GS (IEC 60747-8, field-effect transistors)
  and V_CE (IEC 60747-7, bipolar transistors); the clauses not seen. Datasheets state a
  p-channel or pnp rating with a minus sign (V_DS = -30 V): the rating is a magnitude.
"""

import datetime

import pytest

from checker.design import Design, Netlist, OperatingPoint, Part, PartResult
from checker.limits import evaluate_limits, load_pack

TODAY = datetime.date(2026, 1, 1)
ZERO_C = 273.15  # K at 0 degC (SI Brochure, 9th ed., 2019)


def solved(part, ambient_c, power, voltage=0.0, current=0.0, nets=None):
    """One part in one case at `ambient_c` degC absorbing `power` W; `nets` sets net volts (others 0 V)."""
    design = Design("b", "b", "b.circuit", "gnd", (part,),
                    (Netlist("b", "c", ambient_c + ZERO_C, "gnd", (part,)),))
    if part.two_terminal:
        result = PartResult(power, {"from": current, "to": -current}, voltage, current)
    else:
        result = PartResult(power, {pin: 0.0 for pin, _ in part.pins})
    nets = {**{net: 0.0 for net in part.nets}, **(nets or {})}
    return design, {"b": [OperatingPoint(design.netlists[0], nets, {part.name: result})]}


def outcome(pack, limit_id, part, ambient_c, power, **kw):
    design, ops = solved(part, ambient_c, power, **kw)
    findings, _ = evaluate_limits([load_pack(pack)], [design], ops, TODAY)
    (finding,) = [f for f in findings if f.limit.id == limit_id]
    (result,) = finding.outcomes
    return result


def resistor(**props):
    return Part("R1", "resistor", (("from", "a"), ("to", "gnd")), 1e3, "ohm", props=props)


# IEC 60115-1 rated dissipation curve, P70 = 0.1 W, knee 70 degC, zero at 155 degC:
# P(T) = P70 for T <= 70; P70 (155 - T) / (155 - 70) above; 0 from 155 degC.
IEC_60115_P = [(25, 0.1), (70, 0.1), (85, 0.082353), (100, 0.064706), (125, 0.035294), (155, 0.0), (170, 0.0)]


@pytest.mark.parametrize("ambient_c, allowed", IEC_60115_P)
def test_reference_limits_ratings_resistor_power_follows_iec_60115_1_curve(ambient_c, allowed):
    result = outcome("ratings", "rating-resistor-power", resistor(rating=0.1), ambient_c, 0.05)
    assert result.bound == pytest.approx(allowed, abs=5e-7)
    assert result.margin == pytest.approx(allowed - 0.05, abs=5e-7)
    assert result.holds is (allowed >= 0.05)


@pytest.mark.parametrize("ambient_c", [-40, 25, 51, 66, 70])
def test_reference_limits_derating_resistor_power_is_60_percent_to_the_knee(ambient_c):
    # EEE-INST-002 RM style: 0.60 x P70 up to 70 degC.
    result = outcome("derating", "derating-resistor-power", resistor(rating=0.1), ambient_c, 0.05)
    assert result.bound == pytest.approx(0.06)


@pytest.mark.parametrize("rated_at_c, allowed", [(85, 0.082353), (100, 0.064706), (125, 0.035294), (155, 0.0)])
def test_reference_limits_derating_resistor_line_runs_parallel_to_the_iec_curve(rated_at_c, allowed):
    # Derated zero: 70 + 0.60 x (155 - 70) = 121 degC, 34 K before the rated zero, with the
    # rated slope: the derated allowance at T is the IEC 60115-1 value at T + 34 K, capped at 0.60 P70.
    result = outcome("derating", "derating-resistor-power", resistor(rating=0.1), rated_at_c - 34, 0.0)
    assert result.bound == pytest.approx(min(0.06, allowed), abs=5e-7)


def test_reference_limits_derating_resistor_power_reaches_zero_at_121_degc():
    assert outcome("derating", "derating-resistor-power", resistor(rating=0.1), 121, 0.0).bound == pytest.approx(0.0)
    assert outcome("derating", "derating-resistor-power", resistor(rating=0.1), 140, 0.0).bound == 0.0
    assert outcome("derating", "derating-resistor-power", resistor(rating=0.1), 120, 0.0).bound > 0.0


def test_reference_limits_capacitor_voltage_rating_and_derating():
    cap = Part("C1", "capacitor", (("from", "a"), ("to", "gnd")), 1e-6, "F", props={"vmax": 10.0})
    # EEE-INST-002 ceramic: 0.60 x 10 V = 6 V; 6.5 V fails by 0.5 V. Rating: 10 V, margin 3.5 V.
    derated = outcome("derating", "derating-capacitor-voltage", cap, 25, 0.0, voltage=-6.5)
    assert derated.margin == pytest.approx(-0.5) and not derated.holds
    assert outcome("ratings", "rating-capacitor-voltage", cap, 25, 0.0, voltage=-6.5).margin == pytest.approx(3.5)


def diode(theta_ja, tj_max_c):
    return Part("D1", "diode", (("from", "a"), ("to", "gnd")),
                props={"theta_ja": theta_ja, "tj_max": tj_max_c + ZERO_C})


def test_reference_limits_junction_temperature_oracles():
    # JESD51-2A: T_J = T_A + P theta_JA. 0.25 W x 357 K/W + 25 degC = 114.25 degC.
    result = outcome("ratings", "rating-diode-junction-temp", diode(357.0, 150.0), 25, 0.25)
    assert result.value - ZERO_C == pytest.approx(114.25) and result.margin == pytest.approx(150 - 114.25)
    assert result.absolute and result.unit == "K"
    # Derated: min(150 - 40, 125) = 110 degC (from memory), exceeded by 4.25 K.
    derated = outcome("derating", "derating-diode-junction-temp", diode(357.0, 150.0), 25, 0.25)
    assert derated.bound - ZERO_C == pytest.approx(110.0) and derated.margin == pytest.approx(-4.25)
    # 0.1 W x 331.1 K/W + 85 degC = 118.11 degC (SOT-23 theta_JA of a TI datasheet as fixture input).
    result = outcome("ratings", "rating-diode-junction-temp", diode(331.1, 125.0), 85, 0.1)
    assert result.value - ZERO_C == pytest.approx(118.11)


def test_reference_limits_junction_temperature_of_a_multi_terminal_part():
    # 1 W x 62 K/W + 40 degC = 102 degC (TO-220 without heatsink); derated bound min(175 - 40, 125) = 125 degC.
    q1 = Part("Q1", "bjt", (("c", "a"), ("b", "bb"), ("e", "gnd")), flags=frozenset({"npn"}),
              props={"theta_ja": 62.0, "tj_max": 175.0 + ZERO_C})
    result = outcome("derating", "derating-bjt-junction-temp", q1, 40, 1.0)
    assert result.value - ZERO_C == pytest.approx(102.0) and result.margin == pytest.approx(23.0)


@pytest.mark.parametrize("ambient_c, power", [(25, 0.5), (75, 1 / 3)])
def test_reference_limits_zener_power_limit_from_datasheet_thermal_data(ambient_c, power):
    # 1N5250-series 0.5 W DO-35 zener datasheet: T_J,max 175 degC, R_thJA 300 K/W, so the
    # allowed power (T_J,max - T_A) / R_thJA is 0.5 W at 25 degC and 1/3 W at 75 degC:
    # at exactly that power the junction sits at its maximum, margin zero.
    zener = Part("Z1", "zener", (("from", "gnd"), ("to", "a")), props={"theta_ja": 300.0, "tj_max": 175.0 + ZERO_C})
    result = outcome("ratings", "rating-zener-junction-temp", zener, ambient_c, power)
    assert result.margin == pytest.approx(0.0, abs=1e-9)


def transistor(kind, flag, **ratings):
    pins = ("d", "g", "s") if kind == "mosfet" else ("c", "b", "e")
    return Part("Q1", kind, tuple((pin, f"n_{pin}") for pin in pins), flags=frozenset({flag}), props=ratings)


@pytest.mark.parametrize("part, limit_id, nets, value, margin", [
    # An nmos off against 24 V: V_DS = 24 V against a 20 V rating, 4 V over.
    (transistor("mosfet", "nmos", vds_max=20.0), "rating-mosfet-drain-source-voltage", {"n_d": 24.0}, 24.0, -4.0),
    # A pmos high-side switch off: source at 12 V, drain at 0 V, V_DS = -12 V against |-30 V|.
    (transistor("mosfet", "pmos", vds_max=30.0), "rating-mosfet-drain-source-voltage", {"n_s": 12.0}, 12.0, 18.0),
    # A gate driven to 15 V against a +/- 12 V rating, 3 V over.
    (transistor("mosfet", "nmos", vgs_max=12.0), "rating-mosfet-gate-source-voltage", {"n_g": 15.0}, 15.0, -3.0),
    # A pnp off: emitter at 15 V, collector at 0 V, V_CE = -15 V against |-45 V|.
    (transistor("bjt", "pnp", vce_max=45.0), "rating-bjt-collector-emitter-voltage", {"n_e": 15.0}, 15.0, 30.0),
])
def test_reference_limits_ratings_transistor_voltages_are_magnitudes(part, limit_id, nets, value, margin):
    result = outcome("ratings", limit_id, part, 25, 0.0, nets=nets)
    assert result.value == pytest.approx(value) and result.margin == pytest.approx(margin)
    assert result.holds is (margin >= 0)


def test_reference_limits_packs_skip_parts_without_the_property():
    design, ops = solved(Part("R1", "resistor", (("from", "a"), ("to", "gnd")), 1e3, "ohm"), 25, 1.0)
    for pack in ("ratings", "derating"):
        assert evaluate_limits([load_pack(pack)], [design], ops, TODAY) == ((), ())
