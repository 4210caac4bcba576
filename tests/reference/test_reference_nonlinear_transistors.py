"""MOSFETs against the square law solved by hand, BJTs against the Ebers-Moll equations
written independently here and solved with scipy.optimize.fsolve.

Scenarios are our own (a weather-station heater switch, a sensor preamp bias).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.optimize import fsolve

from checker.design import Netlist, Part
from checker.solver import solve

K, Q = 1.380649e-23, 1.602176634e-19  # exact SI 2019 values (SI Brochure, 9th ed., 2019)
T25 = 298.15


def two(name, kind, a, b, value=None, unit=None):
    return Part(name, kind, (("from", a), ("to", b)), value, unit)


def three(name, kind, pins, flag, **props):
    return Part(name, kind, tuple(pins.items()), flags=frozenset({flag}), props=props)


def net(*parts, ambient=T25):
    return Netlist("bench", "default", ambient, "gnd", tuple(parts))


def tellegen(op):
    powers = [p.power for p in op.parts.values()]
    return abs(sum(powers)) / sum(abs(p) for p in powers)


def common_source(vg, lam, flag="nmos", vdd=5.0, rd=1e3, k=2e-3, vth=1.0):
    """VDD - RD - drain; gate from a source; source at ground (mirrored for pmos)."""
    s = -1.0 if flag == "pmos" else 1.0
    return solve(net(two("VDD", "source", "vdd", "gnd", s * vdd, "V"), two("VG", "source", "g", "gnd", s * vg, "V"),
                     two("RD", "resistor", "vdd", "d", rd, "ohm"),
                     three("M1", "mosfet", {"d": "d", "g": "g", "s": "gnd"}, flag, vth=s * vth, k=k, **{"lambda": lam})))


@pytest.mark.parametrize("flag", ["nmos", "pmos"])
def test_common_source_in_saturation(flag):
    # Shichman & Hodges, IEEE J. Solid-State Circuits, 1968: Id = k/2 Vov^2 (1 + lambda Vds).
    # With Vds = VDD - RD Id the equation is linear in Id: Id = a (1 + lambda VDD) / (1 + a lambda RD).
    op = common_source(2.0, 0.02, flag)
    a = 2e-3 / 2 * (2.0 - 1.0) ** 2
    expected = a * (1 + 0.02 * 5.0) / (1 + a * 0.02 * 1e3)
    sign = -1.0 if flag == "pmos" else 1.0
    assert sign * op.parts["M1"].pins["d"] == pytest.approx(expected, rel=1e-6)
    assert 5.0 - 1e3 * expected > 1.0  # Vds above Vov: saturation indeed
    assert op.parts["M1"].pins["g"] == 0.0
    assert tellegen(op) < 1e-12


@pytest.mark.parametrize("flag", ["nmos", "pmos"])
def test_common_source_in_triode(flag):
    # Triode with lambda = 0: Id = k (Vov Vds - Vds^2/2) and Id = (VDD - Vds)/RD give the quadratic
    # (k/2) Vds^2 - (k Vov + 1/RD) Vds + VDD/RD = 0, whose smaller root lies below Vov.
    op = common_source(5.0, 0.0, flag)
    k, vov, rd, vdd = 2e-3, 4.0, 1e3, 5.0
    b = k * vov + 1 / rd
    vds = (b - math.sqrt(b * b - 2 * k * vdd / rd)) / k
    sign = -1.0 if flag == "pmos" else 1.0
    assert vds < vov
    assert sign * op.nets["d"] == pytest.approx(vds, rel=1e-6)
    assert sign * op.parts["M1"].pins["d"] == pytest.approx((vdd - vds) / rd, rel=1e-6)


def test_mosfet_below_threshold_passes_only_gmin():
    op = common_source(0.5, 0.02)
    assert op.nets["d"] == pytest.approx(5.0 - 1e3 * 5e-12, abs=1e-12)  # only SHUNT (1e-12 S) conducts
    assert op.parts["M1"].pins["d"] == pytest.approx(5e-12, rel=1e-6)


def test_mosfet_is_symmetric_when_drain_and_source_swap():
    # The same channel with its pins named the other way round carries the opposite current.
    def run(d, s):
        return solve(net(two("V1", "source", "top", "gnd", 0.3, "V"), two("VG", "source", "g", "gnd", 3.0, "V"),
                         three("M1", "mosfet", {"d": d, "g": "g", "s": s}, "nmos", vth=1.0, k=0.5,
                               **{"lambda": 0.05})))
    forward, backward = run("top", "gnd"), run("gnd", "top")
    # vds = 0.3 V < Vov = 2 V: triode, k (Vov Vds - Vds^2/2)(1 + lambda Vds) by hand, plus SHUNT.
    by_hand = 0.5 * (2.0 * 0.3 - 0.045) * (1 + 0.05 * 0.3) + 1e-12 * 0.3
    assert forward.parts["M1"].pins["d"] == pytest.approx(by_hand, rel=1e-9)
    assert backward.parts["M1"].pins["s"] == pytest.approx(by_hand, rel=1e-9)


def ebers_moll(vbe, vbc, isat, beta_f, vt, beta_r=1.0):
    """Ebers & Moll, Proc. IRE, 1954, transport form: (Ic, Ib) of an npn."""
    i_f, i_r = isat * math.expm1(vbe / vt), isat * math.expm1(vbc / vt)
    return i_f - i_r - i_r / beta_r, i_f / beta_f + i_r / beta_r


def isat_at(is25, t):
    """Is(T) = Is(T0) (T/T0)^3 exp(q 1.11 eV/(k T) (T/T0 - 1)) (Sze & Ng, 2007; from memory)."""
    return is25 * (t / T25) ** 3 * math.exp(Q * 1.11 / (K * t) * (t / T25 - 1.0))


@pytest.mark.parametrize("celsius", [-20.0, 25.0, 85.0])
def test_bjt_divider_bias_against_fsolve(celsius):
    # Sensor preamp: 9 V, R1 47k / R2 10k base divider, RC 2.2k, RE 470 Ω, beta 150.
    t = 273.15 + celsius
    op = solve(net(two("VCC", "source", "vcc", "gnd", 9.0, "V"), two("R1", "resistor", "vcc", "b", 47e3, "ohm"),
                   two("R2", "resistor", "b", "gnd", 10e3, "ohm"), two("RC", "resistor", "vcc", "c", 2.2e3, "ohm"),
                   two("RE", "resistor", "e", "gnd", 470.0, "ohm"),
                   three("Q1", "bjt", {"c": "c", "b": "b", "e": "e"}, "npn", beta=150.0, isat=5e-15), ambient=t))
    isat, vt = isat_at(5e-15, t), K * t / Q

    def kcl(v):  # in mA, so that fsolve's steps are well scaled
        vb, vc, ve = v
        ic, ib = ebers_moll(vb - ve, vb - vc, isat, 150.0, vt)
        return [1e3 * ((9.0 - vb) / 47e3 - vb / 10e3 - ib), 1e3 * ((9.0 - vc) / 2.2e3 - ic),
                1e3 * (ic + ib - ve / 470.0)]

    # Start from the first-order hand analysis: Thevenin base 1.58 V behind 8.25k, Vbe 0.65 V, Ie 1.77 mA.
    vb, vc, ve = fsolve(kcl, [1.48, 5.1, 0.83], xtol=1e-13)
    assert np.max(np.abs(kcl([vb, vc, ve]))) < 1e-12
    assert (op.nets["b"], op.nets["c"], op.nets["e"]) == pytest.approx((vb, vc, ve), rel=1e-6)
    ic, ib = ebers_moll(vb - ve, vb - vc, isat, 150.0, vt)
    assert op.parts["Q1"].pins["c"] == pytest.approx(ic, rel=1e-6)
    assert op.parts["Q1"].pins["b"] == pytest.approx(ib, rel=1e-6)
    assert op.parts["Q1"].pins["e"] == pytest.approx(-(ic + ib), rel=1e-6)
    assert tellegen(op) < 1e-12


def test_saturated_pnp_switch_against_fsolve():
    # High-side pnp switch driven hard (base pulled to ground through 4.7k) into a 100 Ω heater:
    # saturated, so the reverse junction matters. Ebers-Moll for a pnp: all voltages and currents negated.
    op = solve(net(two("VCC", "source", "vcc", "gnd", 5.0, "V"), two("RB", "resistor", "b", "gnd", 4.7e3, "ohm"),
                   two("RL", "resistor", "c", "gnd", 100.0, "ohm"),
                   three("Q1", "bjt", {"c": "c", "b": "b", "e": "vcc"}, "pnp", beta=80.0)))
    vt = K * T25 / Q

    def kcl(v):  # currents leaving nets b and c, in mA; the pnp's pin currents are minus the npn's
        vb, vc = v
        ic, ib = ebers_moll(-(vb - 5.0), -(vb - vc), 1e-14, 80.0, vt)
        return [1e3 * (-ib + vb / 4.7e3), 1e3 * (-ic + vc / 100.0)]

    # Hand analysis: Veb about 0.7 V, so Ib about 4.3 V / 4.7k; saturated, so vc just under 5 V.
    vb, vc = fsolve(kcl, [4.3, 4.9], xtol=1e-13)
    assert np.max(np.abs(kcl([vb, vc]))) < 1e-12
    assert (op.nets["b"], op.nets["c"]) == pytest.approx((vb, vc), rel=1e-6)
    assert 5.0 - vc < 0.2  # saturated: a small collector-emitter drop
    assert tellegen(op) < 1e-12


def test_pin_currents_of_a_bjt_sum_to_zero():
    op = solve(net(two("VCC", "source", "vcc", "gnd", 5.0, "V"), two("IB", "source", "gnd", "b", 20e-6, "A"),
                   three("Q1", "bjt", {"c": "vcc", "b": "b", "e": "gnd"}, "npn", beta=120.0)))
    pins = op.parts["Q1"].pins
    assert abs(sum(pins.values())) < 1e-15
    assert pins["c"] / pins["b"] == pytest.approx(120.0, rel=1e-3)  # forward active: Ic = beta Ib (+ tiny reverse terms)
    assert np.isfinite(op.parts["Q1"].power)
