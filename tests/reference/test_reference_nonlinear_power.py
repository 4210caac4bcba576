"""Constant-power loads, regulators, converters and op-amps against closed forms.

Scenarios are our own (a weather station's LDO and boost converter, a bike-light
sensor amplifier).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from checker.design import Netlist, Part
from checker.solver import solve

SMOOTH_V = 5e-3  # V, the corner width documented in docs/models.md


def two(name, kind, a, b, value=None, unit=None):
    return Part(name, kind, (("from", a), ("to", b)), value, unit)


def multi(name, kind, pins, **props):
    return Part(name, kind, tuple(pins.items()), props=props)


def net(*parts):
    return Netlist("bench", "default", 298.15, "gnd", tuple(parts))


def tellegen(op):
    powers = [p.power for p in op.parts.values()]
    return abs(sum(powers)) / sum(abs(p) for p in powers)


@pytest.mark.parametrize("e, r, p", [(5.0, 10.0, 0.5), (12.0, 2.0, 15.0), (3.7, 0.2, 1.2)])
def test_constant_power_load_takes_the_high_root(e, r, p):
    # (E - V)/R = P/V gives V^2 - E V + P R = 0; a real supply settles at the higher root
    # (the lower one has the load's negative incremental resistance beat the source's).
    op = solve(net(two("V1", "source", "in", "gnd", e, "V"), two("R1", "resistor", "in", "x", r, "ohm"),
                   two("L1", "load", "x", "gnd", p, "W")))
    v = (e + math.sqrt(e * e - 4 * p * r)) / 2
    assert op.nets["x"] == pytest.approx(v, rel=1e-9)
    assert op.parts["L1"].power == pytest.approx(p, rel=1e-9)
    assert tellegen(op) < 1e-12


REG = {"vout": 3.3, "dropout": 0.2, "iq": 50e-6}


def regulator_circuit(vin, rsource=0.0, rload=100.0):
    parts = [two("VIN", "source", "src", "gnd", vin, "V"),
             multi("U1", "regulator", {"in": "in", "out": "out", "gnd": "gnd"}, **REG),
             two("RL", "resistor", "out", "gnd", rload, "ohm")]
    parts.append(two("RS", "resistor", "src", "in", rsource, "ohm") if rsource else
                 two("RS", "inductor", "src", "in", 1e-6, "H"))
    return solve(net(*parts))


def test_regulator_in_regulation():
    op = regulator_circuit(5.0)
    assert op.nets["out"] == pytest.approx(3.3, rel=1e-9)
    u1 = op.parts["U1"]
    iout = 3.3 / 100.0
    assert (u1.pins["in"], u1.pins["out"], u1.pins["gnd"]) == pytest.approx((iout + 50e-6, -iout, -50e-6), rel=1e-9)
    assert u1.power == pytest.approx((5.0 - 3.3) * iout + 5.0 * 50e-6, rel=1e-9)  # (Vin - Vout) Iout + Vin iq
    assert tellegen(op) < 1e-12


def test_regulator_in_dropout_through_a_source_resistance():
    # Vout = Vin - dropout, Vin = 3.4 - 1 Ω (Vout/100 + iq): linear, so Vout = (3.4 - iq - 0.2)/(1 + 1/100).
    op = regulator_circuit(3.4, rsource=1.0)
    assert op.nets["out"] == pytest.approx((3.4 - 50e-6 - 0.2) / 1.01, rel=1e-9)
    assert op.nets["in"] - op.nets["out"] == pytest.approx(0.2, rel=1e-9)


def test_regulator_corner_is_smooth_monotone_and_close_to_the_minimum():
    inputs = np.linspace(3.3, 3.7, 81)
    outputs = np.array([regulator_circuit(v).nets["out"] for v in inputs])
    ideal = np.minimum(3.3, inputs - 0.2)
    assert np.all(np.diff(outputs) >= 0)
    assert np.all(outputs <= ideal + 1e-12) and np.all(outputs >= ideal - SMOOTH_V * math.log(2) - 1e-12)
    assert regulator_circuit(3.5).nets["out"] == pytest.approx(3.3 - SMOOTH_V * math.log(2), rel=1e-9)


def test_regulator_without_input_gives_no_output():
    assert abs(regulator_circuit(0.0).nets["out"]) < 1e-9


@pytest.mark.parametrize("rsource", [0.0, 0.5])
def test_converter_input_current_from_the_power_balance(rsource):
    # Boost for the anemometer: 5 V, 25 mA out, 85 % efficient, iq 80 uA. Pin = Pout/eff drawn at Vin:
    # (3.7 - Vin)/Rs = Pin/Vin + iq, i.e. Vin^2 - (3.7 - Rs iq) Vin + Pin Rs = 0, higher root.
    parts = [two("VBAT", "source", "bat", "gnd", 3.7, "V"),
             multi("U1", "converter", {"in": "in", "out": "v5", "gnd": "gnd"}, vout=5.0, efficiency=0.85, iq=80e-6),
             two("ANEMO", "load", "v5", "gnd", 25e-3, "A"),
             two("RS", "resistor", "bat", "in", rsource, "ohm") if rsource else two("RS", "inductor", "bat", "in")]
    op = solve(net(*parts))
    pin = 5.0 * 25e-3 / 0.85
    b = 3.7 - rsource * 80e-6
    vin = (b + math.sqrt(b * b - 4 * pin * rsource)) / 2 if rsource else 3.7
    assert op.nets["in"] == pytest.approx(vin, rel=1e-9)
    assert op.parts["U1"].pins["in"] == pytest.approx(pin / vin + 80e-6, rel=1e-9)
    assert op.parts["U1"].power == pytest.approx(pin - 5.0 * 25e-3 + vin * 80e-6, rel=1e-9)  # the losses
    assert tellegen(op) < 1e-12


def amplifier(vin, rails=(5.0, -5.0), swing=0.0, gain=None, rf=9e3, rg=1e3):
    props = {"swing": swing} if gain is None else {"swing": swing, "gain": gain}
    return solve(net(two("VP", "source", "vp", "gnd", rails[0], "V"), two("VN", "source", "vn", "gnd", rails[1], "V"),
                     two("VS", "source", "sig", "gnd", vin, "V"),
                     multi("U1", "opamp", {"plus": "sig", "minus": "fb", "out": "out", "rail_hi": "vp",
                                           "rail_lo": "vn"}, **props),
                     two("RF", "resistor", "out", "fb", rf, "ohm"), two("RG", "resistor", "fb", "gnd", rg, "ohm"),
                     two("RL", "resistor", "out", "gnd", 1e3, "ohm")))


@pytest.mark.parametrize("gain", [None, 2e3])
def test_non_inverting_gain_within_the_finite_gain_closed_form(gain):
    # Vout = A (V+ - V-) + Vmid and V- = beta Vout, beta = Rg/(Rf + Rg): Vout = (A Vin + Vmid)/(1 + A beta)
    # (the finite-gain non-inverting amplifier, e.g. Sedra & Smith, "Microelectronic Circuits",
    # 7th ed., 2015, ch. 2 — from memory); ideal gain 1 + Rf/Rg = 10.
    a = 1e5 if gain is None else gain
    for rails in ((5.0, -5.0), (5.0, 0.0)):
        vin = 0.3
        op = amplifier(vin, rails, gain=gain)
        mid = sum(rails) / 2
        expected = (a * vin + mid) / (1 + a * 0.1)
        assert op.nets["out"] == pytest.approx(expected, rel=1e-9)
        assert op.nets["out"] / vin == pytest.approx(10.0, rel=2 / (a * 0.1))
    assert tellegen(op) < 1e-12


@pytest.mark.parametrize("vin, expected", [(1.0, 4.8), (-1.0, -4.8)])
def test_output_clips_at_the_swing_inside_the_rails(vin, expected):
    op = amplifier(vin, swing=0.2)
    assert op.nets["out"] == pytest.approx(expected, rel=1e-9)
    u1 = op.parts["U1"]
    j = -u1.pins["out"]
    assert j == pytest.approx(expected / 1e3 + expected / 10e3, rel=1e-9)  # into RL and the feedback divider
    # Sourcing comes from rail_hi, sinking returns to rail_lo; inputs draw nothing.
    assert u1.pins["rail_hi" if vin > 0 else "rail_lo"] == pytest.approx(j, rel=1e-9)
    assert u1.pins["plus"] == 0.0 and u1.pins["minus"] == 0.0
    assert u1.power == pytest.approx((5.0 - 4.8) * abs(j), rel=1e-9)
    assert tellegen(op) < 1e-12
