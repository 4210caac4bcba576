"""Op-amps used as comparators (open loop, with hysteresis, as a window) against hand results.

Every expected value is derived here from Kirchhoff's current law on the resistor
network and the op-amp law of docs/models.md, Vout = sat(Vmid + A (V+ - V-)) between
Vlo + swing and Vhi - swing. The comparator with hysteresis and its two thresholds
follow Horowitz & Hill, "The Art of Electronics", 3rd ed., 2015, on comparators and
Schmitt triggers (section from memory); the thresholds are re-derived in the tests,
including the finite gain's offset of (limit - Vmid)/A at the inputs. Diode currents
follow Shockley's law (Shockley, Bell System Technical Journal, 1949) and are solved
with scipy's brentq. Scenarios are our own (a frost alarm, a greenhouse window
comparator, a soil-sensor buffer).

The smooth output limits differ from the hard ones by w exp(-|gap|/w) with w = 5 mV
(docs/models.md, after Boyd & Vandenberghe, "Convex Optimization", 2004, sec. 3.1.5,
section from memory). Every pinned output below has its open-loop value at least
10 V beyond the limit, so that deviation is below 1e-800, and the output is checked
against the limit to 1e-9 relative.
"""

from __future__ import annotations

import math

import pytest
from scipy.optimize import brentq

from checker.design import Netlist, Part
from checker.language import parse_design
from checker.solver import solve, solve_cases

K, Q = 1.380649e-23, 1.602176634e-19  # exact SI values (SI Brochure, 9th ed., 2019, Table 1)
VT = K * 298.15 / Q
SHUNT = 1e-12  # S across every junction (docs/models.md)
ISAT = 1e-14  # A: the diode default (docs/models.md)

FROST_ALARM = """\
circuit schmitt "Frost alarm comparator"
ground gnd
source   VCC  from vcc to gnd : 5 V
source   VIN  from vin to gnd : 1 V
resistor R1   from vcc to ref : 10 kohm
resistor R2   from ref to gnd : 10 kohm
resistor RF   from out to ref : 100 kohm
opamp    U1   (plus: ref, minus: vin, out: out, rail_hi: vcc, rail_lo: gnd) : swing = 0.1 V
case low  : VIN = 1 V
case high : VIN = 4 V
"""


def two(name, kind, a, b, value=None, unit=None, **props):
    return Part(name, kind, (("from", a), ("to", b)), value, unit, props=props)


def opamp(name, plus, minus, out, hi, lo, **props):
    return Part(name, "opamp", (("plus", plus), ("minus", minus), ("out", out), ("rail_hi", hi), ("rail_lo", lo)),
                props=props)


def net(*parts):
    return Netlist("bench", "default", 298.15, "gnd", tuple(parts))


def divider_node(sources):
    """KCL at a node fed through conductances: sum(G V) / sum(G); `sources` is ((V, R), ...)."""
    return sum(v / r for v, r in sources) / sum(1.0 / r for _, r in sources)


def test_frost_alarm_both_cases_against_the_hand_computation():
    # With out at a limit, KCL at ref: ref = (5/10k + out/100k) / (1/10k + 1/10k + 1/100k).
    # VIN = 1 V: out high (4.9 V) gives ref = 2.614 V > 1 V, consistent; out low would give 2.386 V > 1 V,
    # which drives the output high, so the low state is inconsistent. VIN = 4 V: the mirror image.
    design = parse_design(FROST_ALARM, "frost.circuit")
    low, high = solve_cases(design.netlists)
    for point, out in ((low, 4.9), (high, 0.1)):
        ref = divider_node(((5.0, 10e3), (0.0, 10e3), (out, 100e3)))
        assert point.nets["out"] == pytest.approx(out, rel=1e-9)
        assert point.nets["ref"] == pytest.approx(ref, rel=1e-9)
        # The open-loop output is far beyond the limit: the state is the only consistent one.
        assert 1e5 * abs(ref - point.nets["vin"]) > 10.0
        rf_current = (out - ref) / 100e3  # sourced from rail_hi when positive, sunk to rail_lo when negative
        u1 = point.parts["U1"]
        assert u1.pins["out"] == pytest.approx(-rf_current, rel=1e-9)
        assert u1.pins["rail_hi" if out > 2.5 else "rail_lo"] == pytest.approx(rf_current, rel=1e-9)
    assert low.nets["ref"] == pytest.approx(2.614, abs=5e-4) and high.nets["ref"] == pytest.approx(2.386, abs=5e-4)


def inverting_schmitt(vin, gain, rf, swing=0.1):
    """The frost-alarm topology: threshold divider on plus, feedback from out to plus, input on minus."""
    return solve(net(two("VCC", "source", "vcc", "gnd", 5.0, "V"), two("VIN", "source", "vin", "gnd", vin, "V"),
                     two("R1", "resistor", "vcc", "ref", 10e3, "ohm"), two("R2", "resistor", "ref", "gnd", 10e3, "ohm"),
                     two("RF", "resistor", "out", "ref", rf, "ohm"),
                     opamp("U1", "ref", "vin", "out", "vcc", "gnd", swing=swing, gain=gain)))


def inverting_states(vin, gain, rf, swing=0.1):
    """The three DC solutions' outputs (high, low, balance point) and the two thresholds.

    With out held, ref = c + beta out (KCL). High state: out = VOH, exists while
    Vmid + A (ref_hi - vin) >= VOH, i.e. vin <= ref_hi - (VOH - Vmid)/A (upper threshold).
    Low state: vin >= ref_lo + (Vmid - VOL)/A (lower threshold). Balance point, out in
    the linear range: u = ref - vin = (c - vin + beta Vmid)/(1 - A beta), out = Vmid + A u.
    """
    g = 1 / 10e3 + 1 / 10e3 + 1 / rf
    c, beta = (5.0 / 10e3) / g, (1 / rf) / g
    voh, vol, vmid = 5.0 - swing, swing, 2.5
    upper = c + beta * voh - (voh - vmid) / gain
    lower = c + beta * vol + (vmid - vol) / gain
    balance = vmid + gain * (c - vin + beta * vmid) / (1 - gain * beta)
    return voh, vol, balance, lower, upper


def non_inverting_schmitt(vin, gain, rf, swing=0.1):
    """Input through RI to plus, feedback RF from out to plus, the mid-rail reference on minus."""
    return solve(net(two("VCC", "source", "vcc", "gnd", 5.0, "V"), two("VIN", "source", "vin", "gnd", vin, "V"),
                     two("R1", "resistor", "vcc", "ref", 10e3, "ohm"), two("R2", "resistor", "ref", "gnd", 10e3, "ohm"),
                     two("RI", "resistor", "vin", "p", 10e3, "ohm"), two("RF", "resistor", "out", "p", rf, "ohm"),
                     opamp("U1", "p", "ref", "out", "vcc", "gnd", swing=swing, gain=gain)))


def non_inverting_states(vin, gain, rf, swing=0.1):
    """As `inverting_states`, with p = (vin/RI + out/RF)/(1/RI + 1/RF) against ref = 2.5 V.

    High state exists while p(VOH) - 2.5 >= (VOH - Vmid)/A, i.e. vin >= lower; low state while
    2.5 - p(VOL) >= (Vmid - VOL)/A, i.e. vin <= upper. Balance: out = Vmid + A (p - 2.5) solved for out.
    """
    a, b = (1 / 10e3) / (1 / 10e3 + 1 / rf), (1 / rf) / (1 / 10e3 + 1 / rf)  # p = a vin + b out
    voh, vol, vmid, ref = 5.0 - swing, swing, 2.5, 2.5
    lower = (ref + (voh - vmid) / gain - b * voh) / a
    upper = (ref - (vmid - vol) / gain - b * vol) / a
    balance = (vmid + gain * (a * vin - ref)) / (1 - gain * b)
    return voh, vol, balance, lower, upper


MARGIN = 5e-3  # V either side of a threshold: 1e4 / 1e6 gain turns it into 50 V / 5 kV beyond the output limit


@pytest.mark.parametrize("gain", [1e4, 1e5, 1e6])
@pytest.mark.parametrize("rf", [47e3, 100e3, 1e6])
@pytest.mark.parametrize("build, states, high_below", [(inverting_schmitt, inverting_states, True),
                                                       (non_inverting_schmitt, non_inverting_states, False)])
def test_schmitt_trigger_either_side_of_both_thresholds(build, states, high_below, gain, rf):
    _, _, _, lower, upper = states(0.0, gain, rf)
    assert lower < upper  # hysteresis: the band between the thresholds holds both states
    for vin in (lower - MARGIN, lower + MARGIN, upper - MARGIN, upper + MARGIN):
        voh, vol, balance, _, _ = states(vin, gain, rf)
        out = build(vin, gain, rf).nets["out"]
        if vin < lower or vin > upper:  # outside the band the state is unique
            expected = voh if (vin < lower) == high_below else vol
            assert out == pytest.approx(expected, rel=1e-9)
        else:  # inside it any of the three DC solutions is an answer of the equations
            assert min(abs(out - s) / abs(s) for s in (voh, vol, balance)) < 1e-6


@pytest.mark.parametrize("inverting", [False, True])
@pytest.mark.parametrize("vin", [-0.3, 1.2, 1.8, 4.4])
def test_open_loop_comparator_sits_at_the_limit_its_inputs_choose(inverting, vin):
    # Greenhouse heater switch: threshold 1.5 V from a 5 V divider (10k/20k), split ±5 V rails,
    # swing 0.2 V, a 2.2 kΩ load. Output: Vhi - swing when V+ > V-, Vlo + swing otherwise.
    threshold = 5.0 * 10e3 / (20e3 + 10e3)
    plus, minus = ("th", "in") if inverting else ("in", "th")
    op = solve(net(two("VP", "source", "vp", "gnd", 5.0, "V"), two("VN", "source", "vn", "gnd", -5.0, "V"),
                   two("VS", "source", "in", "gnd", vin, "V"),
                   two("RA", "resistor", "vp", "th", 20e3, "ohm"), two("RB", "resistor", "th", "gnd", 10e3, "ohm"),
                   opamp("U1", plus, minus, "out", "vp", "vn", swing=0.2),
                   two("RL", "resistor", "out", "gnd", 2.2e3, "ohm")))
    assert op.nets["th"] == pytest.approx(threshold, rel=1e-12)
    high = (vin > threshold) != inverting
    expected = 4.8 if high else -4.8
    assert op.nets["out"] == pytest.approx(expected, rel=1e-9)
    j = expected / 2.2e3  # into the load, out of the op-amp's output
    assert op.parts["U1"].pins["rail_hi" if high else "rail_lo"] == pytest.approx(j, rel=1e-9)


def window(vin):
    """Greenhouse window comparator: thresholds 5/3 V and 10/3 V from three equal 10 kΩ resistors;
    U1 high above the lower threshold, U2 high below the upper one; a diode AND (47 kΩ pull-up,
    one diode from `ok` down to each output) is high only when both are."""
    return solve(net(two("VCC", "source", "vcc", "gnd", 5.0, "V"), two("VIN", "source", "vin", "gnd", vin, "V"),
                     two("RT1", "resistor", "vcc", "th_hi", 10e3, "ohm"),
                     two("RT2", "resistor", "th_hi", "th_lo", 10e3, "ohm"),
                     two("RT3", "resistor", "th_lo", "gnd", 10e3, "ohm"),
                     opamp("U1", "vin", "th_lo", "above", "vcc", "gnd", swing=0.1),
                     opamp("U2", "th_hi", "vin", "below", "vcc", "gnd", swing=0.1),
                     two("RP", "resistor", "vcc", "ok", 47e3, "ohm"),
                     two("D1", "diode", "ok", "above"), two("D2", "diode", "ok", "below")))


@pytest.mark.parametrize("vin", [0.5, 1.6, 1.75, 2.5, 3.3, 3.4, 4.6])
def test_window_comparator_with_two_op_amps(vin):
    op = window(vin)
    lower, upper = 5.0 / 3.0, 10.0 / 3.0  # equal-resistor divider
    assert (op.nets["th_lo"], op.nets["th_hi"]) == (pytest.approx(lower, rel=1e-12), pytest.approx(upper, rel=1e-12))
    above = 4.9 if vin > lower else 0.1
    below = 4.9 if vin < upper else 0.1
    assert op.nets["above"] == pytest.approx(above, rel=1e-9)
    assert op.nets["below"] == pytest.approx(below, rel=1e-9)

    def kcl(ok):  # pull-up current in, minus both diodes' Shockley currents (with SHUNT) out
        diodes = sum(ISAT * math.expm1((ok - v) / VT) + SHUNT * (ok - v) for v in (above, below))
        return (5.0 - ok) / 47e3 - diodes

    ok = brentq(kcl, 0.0, 5.0, xtol=1e-15)
    assert op.nets["ok"] == pytest.approx(ok, rel=1e-9)
    inside = lower < vin < upper
    assert (op.nets["ok"] > 4.5) == inside and (op.nets["ok"] < 1.0) == (not inside)


@pytest.mark.parametrize("feed", ["bat", "v5"])
@pytest.mark.parametrize("swing", [0.0, 0.05])
def test_buffer_on_regulated_rails_with_its_divider_on_a_converter(feed, swing):
    # Soil-sensor buffer: a 3.7 V cell feeds a 5 V boost converter (85 %, iq 80 uA) and a 3.3 V LDO
    # (dropout 0.2 V, iq 50 uA) fed from `feed`; the LDO powers the op-amp, whose input is the
    # converter's 5 V halved by 10k/10k and whose follower output drives 1 kΩ. In Newton's first
    # guess the regulator's output, so the op-amp's whole output range, sits at 0 V; with swing 0 a
    # limiter that could not leave a limit froze the iteration there (the reported failure).
    # Follower with finite gain: Vout = (A Vin + Vmid)/(1 + A), Vmid = 3.3/2 (closed form as in
    # test_reference_nonlinear_power.py).
    op = solve(net(two("VBAT", "source", "bat", "gnd", 3.7, "V"),
                   Part("U2", "converter", (("in", "bat"), ("out", "v5"), ("gnd", "gnd")),
                        props={"vout": 5.0, "efficiency": 0.85, "iq": 80e-6}),
                   Part("U3", "regulator", (("in", feed), ("out", "v33"), ("gnd", "gnd")),
                        props={"vout": 3.3, "dropout": 0.2, "iq": 50e-6}),
                   two("RA", "resistor", "v5", "div", 10e3, "ohm"), two("RB", "resistor", "div", "gnd", 10e3, "ohm"),
                   opamp("U1", "div", "out", "out", "v33", "gnd", swing=swing),
                   two("RL", "resistor", "out", "gnd", 1e3, "ohm")))
    assert op.nets["v5"] == pytest.approx(5.0, rel=1e-12)
    assert op.nets["v33"] == pytest.approx(3.3, rel=1e-9)  # 0.4 V or more of headroom: exact to 1e-9
    assert op.nets["div"] == pytest.approx(2.5, rel=1e-12)
    out = (1e5 * 2.5 + 1.65) / (1 + 1e5)
    assert op.nets["out"] == pytest.approx(out, rel=1e-9)
    # Power balance: the LDO passes the buffer's load current plus its iq; the converter draws
    # Pout/efficiency at 3.7 V plus its iq, and Pout includes the LDO's input when it feeds it.
    ldo_in = out / 1e3 + 50e-6
    pout = 5.0 * (5.0 / 20e3 + (ldo_in if feed == "v5" else 0.0))
    battery = pout / 0.85 / 3.7 + 80e-6 + (ldo_in if feed == "bat" else 0.0)
    assert -op.parts["VBAT"].current == pytest.approx(battery, rel=1e-9)
