"""Linear DC circuits against closed forms from circuit-theory textbooks.

Scenarios are our own (a bike-light battery monitor, a weather-station bridge).
"""

from __future__ import annotations

import itertools

import pytest

from checker.design import Netlist, Part
from checker.solver import solve

T25 = 298.15  # K


def two(name, kind, a, b, value=None, unit=None, flags=(), **props):
    return Part(name, kind, (("from", a), ("to", b)), value, unit, frozenset(flags), props)


def net(*parts, ambient=T25):
    return Netlist("bench", "default", ambient, "gnd", tuple(parts))


def parallel(*resistances):
    return 1.0 / sum(1.0 / r for r in resistances)


def test_voltage_divider():
    # Voltage division v2 = v R2 / (R1 + R2): Alexander & Sadiku, "Fundamentals of
    # Electric Circuits", 5th ed., 2013, sec. 2.7 (section number from memory).
    op = solve(net(two("VBAT", "source", "vbat", "gnd", 4.2, "V"),
                   two("R_TOP", "resistor", "vbat", "adc", 100e3, "ohm"),
                   two("R_BOT", "resistor", "adc", "gnd", 47e3, "ohm")))
    assert op.nets["adc"] == pytest.approx(4.2 * 47e3 / 147e3, rel=1e-12)
    assert op.parts["R_TOP"].current == pytest.approx(4.2 / 147e3, rel=1e-12)
    assert op.parts["VBAT"].current == pytest.approx(-4.2 / 147e3, rel=1e-12)  # delivers: current runs to -> from
    assert op.parts["VBAT"].power == pytest.approx(-4.2 ** 2 / 147e3, rel=1e-12)


def test_loaded_divider():
    # A load RL across R2 makes the lower leg R2 || RL (Alexander & Sadiku, 2013,
    # sec. 2.7, parallel resistors and voltage division; from memory).
    r1, r2, rl, v = 10e3, 22e3, 33e3, 12.0
    op = solve(net(two("V1", "source", "in", "gnd", v, "V"),
                   two("R1", "resistor", "in", "out", r1, "ohm"),
                   two("R2", "resistor", "out", "gnd", r2, "ohm"),
                   two("RL", "load", "out", "gnd", rl, "ohm")))
    lower = parallel(r2, rl)
    assert op.nets["out"] == pytest.approx(v * lower / (r1 + lower), rel=1e-12)
    assert op.parts["RL"].current == pytest.approx(op.nets["out"] / rl, rel=1e-12)


def _bridge(r1, r2, r3, r4, vs, detector=None):
    parts = [two("VS", "source", "top", "gnd", vs, "V"),
             two("R1", "resistor", "top", "a", r1, "ohm"), two("R3", "resistor", "a", "gnd", r3, "ohm"),
             two("R2", "resistor", "top", "b", r2, "ohm"), two("R4", "resistor", "b", "gnd", r4, "ohm")]
    if detector is not None:
        parts.append(two("RG", "resistor", "a", "b", detector, "ohm"))
    return solve(net(*parts))


def test_wheatstone_bridge_off_balance():
    # Open-circuit bridge voltage v_ab = vs (R3/(R1+R3) - R4/(R2+R4)); with a
    # detector RG the Thevenin equivalent gives i_g = v_ab / (R1||R3 + R2||R4 + RG)
    # (Hayt, Kemmerly & Durbin, "Engineering Circuit Analysis", 8th ed., 2012,
    # Wheatstone bridge and Thevenin's theorem; chapter numbers from memory).
    r1, r2, r3, r4, vs, rg = 1000.0, 1200.0, 1000.0, 1100.0, 5.0, 470.0
    v_ab = vs * (r3 / (r1 + r3) - r4 / (r2 + r4))
    op = _bridge(r1, r2, r3, r4, vs)
    assert op.nets["a"] - op.nets["b"] == pytest.approx(v_ab, rel=1e-12)
    loaded = _bridge(r1, r2, r3, r4, vs, detector=rg)
    r_th = parallel(r1, r3) + parallel(r2, r4)
    assert loaded.parts["RG"].current == pytest.approx(v_ab / (r_th + rg), rel=1e-12)


def test_wheatstone_bridge_balanced_has_no_detector_current():
    # Balance condition R1/R3 = R2/R4 (Hayt, Kemmerly & Durbin, 2012; from memory).
    op = _bridge(1000.0, 2000.0, 1500.0, 3000.0, 9.0, detector=100.0)
    assert abs(op.parts["RG"].current) < 1e-15


@pytest.mark.parametrize("code", range(16))
def test_r2r_ladder_weights_bits_in_binary(code):
    # An R-2R ladder terminated in 2R gives v_out = v_ref * sum_i b_i 2^(i - N)
    # (Horowitz & Hill, "The Art of Electronics", 2nd ed., 1989, digital-to-analog
    # converters; chapter from memory). Each bit's 2R leg goes to the reference or
    # to ground through a pair of switches (one closed, one open).
    bits, r, vref = 4, 10e3, 2.5
    parts = [two("VREF", "source", "ref", "gnd", vref, "V"), two("RT", "resistor", "n0", "gnd", 2 * r, "ohm")]
    for i in range(bits):
        on = (code >> i) & 1
        parts += [two(f"R2_{i}", "resistor", f"n{i}", f"s{i}", 2 * r, "ohm"),
                  two(f"SH{i}", "switch", f"s{i}", "ref", flags={"closed" if on else "open"}),
                  two(f"SL{i}", "switch", f"s{i}", "gnd", flags={"open" if on else "closed"})]
        if i + 1 < bits:
            parts.append(two(f"R_{i}", "resistor", f"n{i}", f"n{i + 1}", r, "ohm"))
    op = solve(net(*parts))
    expected = vref * sum(((code >> i) & 1) * 2.0 ** (i - bits) for i in range(bits))
    assert op.nets[f"n{bits - 1}"] == pytest.approx(expected, rel=1e-12, abs=1e-15)


def test_thevenin_and_norton_equivalents():
    # Source vs through R1 into node x, R2 to ground, and a current is into x:
    # v_th = (vs/R1 + is) (R1||R2), R_th = R1||R2, i_N = v_th / R_th
    # (Thevenin's and Norton's theorems: Alexander & Sadiku, 2013, secs. 4.5-4.6,
    # from memory). Loads: a resistor, and a zero-ohm closed switch (exact short).
    vs, i_s, r1, r2 = 9.0, 2e-3, 4.7e3, 10e3
    r_th = parallel(r1, r2)
    v_th = (vs / r1 + i_s) * r_th
    base = [two("VS", "source", "in", "gnd", vs, "V"), two("R1", "resistor", "in", "x", r1, "ohm"),
            two("R2", "resistor", "x", "gnd", r2, "ohm"), two("IS", "source", "gnd", "x", i_s, "A")]
    for rl in (100.0, 3.3e3, 1e6):
        op = solve(net(*base, two("RL", "resistor", "x", "gnd", rl, "ohm")))
        assert op.nets["x"] == pytest.approx(v_th * rl / (r_th + rl), rel=1e-12)
    shorted = solve(net(*base, two("SW", "switch", "x", "gnd", flags={"closed"})))
    assert shorted.parts["SW"].current == pytest.approx(v_th / r_th, rel=1e-12)
    assert shorted.parts["SW"].voltage == 0.0
    norton = solve(net(two("IN", "source", "gnd", "x", v_th / r_th, "A"),
                       two("RN", "resistor", "x", "gnd", r_th, "ohm"),
                       two("RL", "resistor", "x", "gnd", 3.3e3, "ohm")))
    assert norton.nets["x"] == pytest.approx(v_th * 3.3e3 / (r_th + 3.3e3), rel=1e-12)


def test_millman_parallel_sources():
    # Millman's theorem: v = sum(E_k / R_k) / sum(1 / R_k) for sources with series
    # resistors in parallel (J. Millman, "A useful network theorem", Proc. IRE,
    # 1940; volume and pages from memory).
    sources = [(12.0, 0.5), (12.6, 0.8), (11.4, 0.3), (-3.0, 47.0)]
    parts = []
    for k, (e, r) in enumerate(sources):
        parts += [two(f"E{k}", "source", f"e{k}", "gnd", e, "V"), two(f"R{k}", "resistor", f"e{k}", "bus", r, "ohm")]
    op = solve(net(*parts, two("LOAD", "load", "bus", "gnd", 2e-3, "A")))
    # The constant-current load is one more Millman branch: a current source.
    expected = (sum(e / r for e, r in sources) - 2e-3) / sum(1 / r for _, r in sources)
    assert op.nets["bus"] == pytest.approx(expected, rel=1e-12)


@pytest.mark.parametrize("ambient_c", [-40.0, 0.0, 25.0, 85.0, 125.0])
def test_tempco_moves_resistance_linearly(ambient_c):
    # R(T) = R25 (1 + alpha (T - 25 degC)): the common definition of the temperature
    # coefficient of resistance (IEC 60115-1, fixed resistors; clause not seen).
    alpha, r25, v = -200e-6, 1e3, 5.0
    ambient = 273.15 + ambient_c
    op = solve(net(two("V1", "source", "in", "gnd", v, "V"),
                   two("RT", "resistor", "in", "mid", r25, "ohm", tempco=alpha),
                   two("RF", "resistor", "mid", "gnd", r25, "ohm"), ambient=ambient))
    r_t = r25 * (1 + alpha * (ambient_c - 25.0))
    assert op.parts["RT"].current == pytest.approx(v / (r_t + r25), rel=1e-12)
    assert op.nets["mid"] == pytest.approx(v * r25 / (r_t + r25), rel=1e-12)


def test_every_ladder_code_is_distinct_and_monotonic():
    # Binary weighting means codes map to evenly spaced outputs (step v_ref / 2^N).
    outputs = []
    for code in range(8):
        parts = [two("VREF", "source", "ref", "gnd", 1.0, "V"), two("RT", "resistor", "n0", "gnd", 2.0, "ohm")]
        for i, on in enumerate((code >> j) & 1 for j in range(3)):
            parts.append(two(f"R2_{i}", "resistor", f"n{i}", "ref" if on else "gnd", 2.0, "ohm"))
            if i < 2:
                parts.append(two(f"R_{i}", "resistor", f"n{i}", f"n{i + 1}", 1.0, "ohm"))
        outputs.append(solve(net(*parts)).nets["n2"])
    steps = [b - a for a, b in itertools.pairwise(outputs)]
    assert steps == pytest.approx([1.0 / 8] * 7, rel=1e-12)
