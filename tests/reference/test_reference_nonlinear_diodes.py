"""Diodes, LEDs and zeners against closed forms and independently written equations.

Scenarios are our own (a bike light, a greenhouse logger's reference, a solar charger).
The physical constants are the exact SI 2019 values (SI Brochure, 9th ed., 2019, Table 1).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.optimize import brentq
from scipy.special import lambertw

from checker.design import Netlist, Part
from checker.solver import solve

K, Q = 1.380649e-23, 1.602176634e-19
T25 = 298.15


def two(name, kind, a, b, value=None, unit=None, at=None, **props):
    return Part(name, kind, (("from", a), ("to", b)), value, unit, props=props, at=at or {})


def net(*parts, ambient=T25):
    return Netlist("bench", "default", ambient, "gnd", tuple(parts))


def isat_at(is25, n, t, eg=1.11, m=3.0):
    """The saturation-current temperature law, written out again from its source:
    Is(T) = Is(T0) (T/T0)^(m/n) exp(q Eg/(n k T) (T/T0 - 1)) (Sze & Ng, "Physics of
    Semiconductor Devices", 3rd ed., 2007; Massobrio & Antognetti, "Semiconductor Device
    Modeling", 1993 — from memory)."""
    return is25 * (t / T25) ** (m / n) * math.exp(Q * eg / (n * K * t) * (t / T25 - 1.0))


def lambert_current(e, r, isat, n, t):
    """Banwell & Jayakumar, Electronics Letters, 2000: the exact current of a diode in series
    with R across E, I = (n Vt/R) W(Is R/(n Vt) exp((E + Is R)/(n Vt))) - Is."""
    nvt = n * K * t / Q
    return nvt / r * lambertw(isat * r / nvt * math.exp((e + isat * r) / nvt)).real - isat


def tellegen(op):
    """Sum of every part's absorbed power (W) over the sum of magnitudes (Tellegen's theorem: 0)."""
    powers = [p.power for p in op.parts.values()]
    return abs(sum(powers)) / sum(abs(p) for p in powers)


@pytest.mark.parametrize("celsius", [-20.0, 25.0, 85.0])
@pytest.mark.parametrize("e, r", [(5.0, 1e3), (3.3, 100.0), (12.0, 4.7e3)])
def test_diode_with_series_resistor_matches_lambert_w(celsius, e, r):
    t = 273.15 + celsius
    op = solve(net(two("V1", "source", "in", "gnd", e, "V"), two("R1", "resistor", "in", "a", r, "ohm"),
                   two("D1", "diode", "a", "gnd", isat=2e-14, ideality=1.05), ambient=t))
    expected = lambert_current(e, r, isat_at(2e-14, 1.05, t), 1.05, t)
    assert op.parts["D1"].current == pytest.approx(expected, rel=1e-6)
    assert op.nets["a"] == pytest.approx(e - r * expected, rel=1e-6)
    assert tellegen(op) < 1e-12


@pytest.mark.parametrize("celsius", [-20.0, 25.0, 85.0])
def test_diode_rseries_inside_the_part_matches_lambert_w(celsius):
    # The whole part across a source: its own rseries is the R of the closed form.
    t = 273.15 + celsius
    op = solve(net(two("V1", "source", "a", "gnd", 0.9, "V"),
                   two("D1", "diode", "a", "gnd", isat=1e-12, ideality=1.8, rseries=2.5), ambient=t))
    expected = lambert_current(0.9, 2.5, isat_at(1e-12, 1.8, t), 1.8, t)
    assert op.parts["D1"].current == pytest.approx(expected, rel=1e-6)


def test_vf_at_a_current_sets_isat_through_rseries():
    # vf = 0.72 V at 100 mA with 0.5 Ω inside: the part must carry exactly 100 mA at 0.72 V (at 25 degC).
    op = solve(net(two("V1", "source", "a", "gnd", 0.72, "V"),
                   two("D1", "diode", "a", "gnd", at={"vf": 0.1}, vf=0.72, rseries=0.5)))
    assert op.parts["D1"].current == pytest.approx(0.1, rel=1e-9)


def test_diode_forward_voltage_drifts_as_the_silicon_law_says():
    # Solar charger blocking diode at 10 mA from -20 to 85 degC, against brentq on the
    # junction equation with Is(T) written above; about -2 mV/K (common practice).
    volts = []
    for celsius in (-20.0, 85.0):
        t = 273.15 + celsius
        op = solve(net(two("I1", "source", "gnd", "a", 10e-3, "A"), two("D1", "diode", "a", "gnd", isat=1e-14),
                       ambient=t))
        isat, vt = isat_at(1e-14, 1.0, t), K * t / Q
        v = brentq(lambda u: isat * math.expm1(u / vt) + 1e-12 * u - 10e-3, 0.0, 1.5, xtol=1e-15)
        assert op.nets["a"] == pytest.approx(v, rel=1e-9)
        volts.append(op.nets["a"])
    assert -2.6e-3 < (volts[1] - volts[0]) / 105.0 < -1.5e-3


def test_led_with_resistor_current_from_its_equations():
    # Bike light: 3.3 V rail, 150 Ω, LED 2.0 V at 10 mA (ideality 2, Is from the point).
    # Current from brentq on KCL with the Shockley law written here, 1e-6 relative.
    op = solve(net(two("V1", "source", "rail", "gnd", 3.3, "V"), two("R1", "resistor", "rail", "k", 150.0, "ohm"),
                   two("LED1", "led", "k", "gnd", at={"vf": 0.01}, vf=2.0)))
    nvt = 2.0 * K * T25 / Q
    isat = 0.01 / math.expm1(2.0 / nvt)
    v = brentq(lambda u: isat * math.expm1(u / nvt) + 1e-12 * u - (3.3 - u) / 150.0, 0.0, 3.3, xtol=1e-15)
    assert op.parts["LED1"].current == pytest.approx((3.3 - v) / 150.0, rel=1e-6)
    assert 8e-3 < op.parts["LED1"].current < 10e-3  # a little under the 10 mA test point, as 1.3 V / 150 Ω
    assert tellegen(op) < 1e-12


def test_led_default_is_two_volts_at_ten_milliamps():
    op = solve(net(two("I1", "source", "gnd", "a", 10e-3, "A"), two("LED1", "led", "a", "gnd")))
    assert op.nets["a"] == pytest.approx(2.0, rel=1e-6)


def test_led_forward_voltage_falls_two_millivolts_per_kelvin():
    # The LED's band gap is chosen for -2 mV/K at 10 mA (common practice; from memory).
    volts = [solve(net(two("I1", "source", "gnd", "a", 10e-3, "A"), two("LED1", "led", "a", "gnd"),
                       ambient=T25 + dt)).nets["a"] for dt in (-0.5, 0.5)]
    assert volts[1] - volts[0] == pytest.approx(-2e-3, rel=1e-3)


@pytest.mark.parametrize("rz", [0.0, 8.0])
def test_zener_shunt_regulator_against_brentq(rz):
    # Greenhouse logger reference: 12 V, 1 kΩ, zener 5.1 V at 5 mA. The breakdown branch is
    # a junction of ideality 1 through rz, carrying 5 mA at 5.1 V; solved here with brentq on
    # the implicit equation u = rz I + Vt ln(I/Ib + 1) per branch, independently of the solver.
    op = solve(net(two("V1", "source", "in", "gnd", 12.0, "V"), two("R1", "resistor", "in", "ref", 1e3, "ohm"),
                   two("Z1", "zener", "gnd", "ref", at={"vz": 5e-3}, vz=5.1, rz=rz)))
    vt = K * T25 / Q
    ib = 5e-3 / math.expm1((5.1 - 5e-3 * rz) / vt)

    def breakdown(u):  # current of the breakdown branch at reverse voltage u
        return brentq(lambda i: rz * i + vt * math.log1p(i / ib) - u, 0.0, u / max(rz, 1e-3) + 1.0, xtol=1e-18) \
            if rz else ib * math.expm1(u / vt)

    u = brentq(lambda w: breakdown(w) + 1e-12 * w - (12.0 - w) / 1e3, 4.0, 6.0, xtol=1e-15)
    assert op.nets["ref"] == pytest.approx(u, rel=1e-6)
    assert op.parts["Z1"].current == pytest.approx(-(12.0 - u) / 1e3, rel=1e-6)
    assert tellegen(op) < 1e-12


def test_zener_forward_is_a_diode():
    op = solve(net(two("I1", "source", "gnd", "a", 10e-3, "A"),
                   two("Z1", "zener", "a", "gnd", at={"vz": 5e-3}, vz=5.1, isat=1e-14)))
    v = brentq(lambda u: 1e-14 * math.expm1(u * Q / (K * T25)) + 1e-12 * u - 10e-3, 0.0, 1.5, xtol=1e-15)
    assert op.nets["a"] == pytest.approx(v, rel=1e-9)


def test_reverse_biased_diode_leaks_isat_and_shunt():
    op = solve(net(two("V1", "source", "a", "gnd", 5.0, "V"), two("D1", "diode", "gnd", "a", isat=1e-9)))
    assert op.parts["D1"].current == pytest.approx(-(1e-9 + 1e-12 * 5.0), rel=1e-9)
    assert np.isfinite(op.parts["D1"].power)
