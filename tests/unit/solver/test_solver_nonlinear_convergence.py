"""Newton-Raphson with limiting and continuation on circuits of the nonlinear kinds.

Stress circuits (long diode chains, back-to-back junctions, far starts, random seeded
circuits), Kirchhoff and Tellegen at every solution, the "cannot converge" and
"outside the model" paths, and every device's Jacobian against finite differences.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.optimize import brentq, root

from checker.design import Netlist, Part
from checker.errors import DesignError, Location, NoSolutionError
from checker.solver import solve
from checker.solver.assembly import assemble
from checker.solver.newton import STRATEGIES, Equations, newton

K, Q = 1.380649e-23, 1.602176634e-19  # exact SI 2019 values (SI Brochure, 9th ed., 2019)
T25 = 298.15
VT = K * T25 / Q
SHUNT = 1e-12


def two(name, kind, a, b, value=None, unit=None, at=None, line=None, **props):
    location = Location("board.circuit", line, 1) if line else None
    return Part(name, kind, (("from", a), ("to", b)), value, unit, props=props, at=at or {}, location=location)


def multi(name, kind, pins, flags=(), **props):
    return Part(name, kind, tuple(pins.items()), flags=frozenset(flags), props=props)


def net(*parts, ambient=T25, case="default"):
    return Netlist("board", case, ambient, "gnd", tuple(parts), case_location=Location("board.circuit", 30, 6))


def assert_kirchhoff_and_tellegen(op):
    """Currents into every net sum to zero, pins of every part sum to zero, and the parts'
    powers sum to zero (Tellegen's theorem, Tellegen 1952; from memory)."""
    into = {name: 0.0 for name in op.nets}
    scale = {name: 0.0 for name in op.nets}
    for part in op.netlist.parts:
        result = op.parts[part.name]
        assert abs(sum(result.pins.values())) <= 1e-12 * max(1e-3, max(map(abs, result.pins.values())))
        for pin, netname in part.pins:
            into[netname] += result.pins[pin]
            scale[netname] += abs(result.pins[pin])
    for name in op.nets:
        assert abs(into[name]) <= 1e-12 + 1e-8 * scale[name]
    powers = [p.power for p in op.parts.values()]
    assert abs(sum(powers)) <= 1e-9 * sum(map(abs, powers)) + 1e-15  # W: a floor for circuits carrying only pA


def test_fifty_diodes_in_series():
    # 40 V through 1 kΩ into 50 diodes: by symmetry each carries the same current, so KCL
    # reduces to one equation, (40 - 50 v)/1k = Is (exp(v/Vt) - 1) + SHUNT v, solved by brentq.
    parts = [two("V1", "source", "n0", "gnd", 40.0, "V"), two("R1", "resistor", "n0", "n1", 1e3, "ohm")]
    parts += [two(f"D{k}", "diode", f"n{k}", f"n{k + 1}" if k < 50 else "gnd") for k in range(1, 51)]
    op = solve(net(*parts))
    v = brentq(lambda u: 1e-14 * math.expm1(u / VT) + SHUNT * u - (40.0 - 50 * u) / 1e3, 0.0, 0.8, xtol=1e-15)
    assert op.parts["D25"].voltage == pytest.approx(v, rel=1e-6)
    assert op.parts["R1"].current == pytest.approx((40.0 - 50 * v) / 1e3, rel=1e-6)
    assert op.strategy == "newton"
    assert_kirchhoff_and_tellegen(op)


def test_diode_ladder():
    # 20 rungs of series resistor then a diode to ground: every diode forward-biased, voltages falling.
    parts = [two("V1", "source", "n0", "gnd", 12.0, "V")]
    for k in range(1, 21):
        parts += [two(f"R{k}", "resistor", f"n{k - 1}", f"n{k}", 100.0, "ohm"), two(f"D{k}", "diode", f"n{k}", "gnd")]
    op = solve(net(*parts))
    volts = [op.nets[f"n{k}"] for k in range(1, 21)]
    assert all(0.3 < v < 0.9 for v in volts) and all(np.diff(volts) < 0)
    assert_kirchhoff_and_tellegen(op)


def test_back_to_back_junctions_pass_only_leakage():
    # Two diodes cathode to cathode across 5 V: the reverse-biased one sets the current at about
    # its saturation current; KCL at the middle node by brentq on the two Shockley laws.
    op = solve(net(two("V1", "source", "a", "gnd", 5.0, "V"), two("D1", "diode", "a", "m", isat=1e-12),
                   two("D2", "diode", "gnd", "m", isat=1e-12)))

    def kcl(vm):  # current into m through D1 (a -> m) plus through D2 (gnd -> m)
        return (1e-12 * math.expm1((5.0 - vm) / VT) + SHUNT * (5.0 - vm)) + (1e-12 * math.expm1(-vm / VT) - SHUNT * vm)

    vm = brentq(kcl, 0.0, 5.0, xtol=1e-15)
    assert op.nets["m"] == pytest.approx(vm, rel=1e-9)
    assert op.parts["D1"].current == pytest.approx(1e-12 * math.expm1((5.0 - vm) / VT) + SHUNT * (5.0 - vm), rel=1e-6)
    assert_kirchhoff_and_tellegen(op)


def test_a_start_far_from_the_solution_still_converges():
    # A 1 kV supply into an LED through 100 kΩ: the first guess puts 1 kV across the LED.
    op = solve(net(two("V1", "source", "hv", "gnd", 1000.0, "V"), two("R1", "resistor", "hv", "a", 100e3, "ohm"),
                   two("LED1", "led", "a", "gnd")))
    nvt = 2 * VT
    isat = 0.01 / math.expm1(2.0 / nvt)
    v = brentq(lambda u: isat * math.expm1(u / nvt) + SHUNT * u - (1000.0 - u) / 100e3, 0.0, 3.0, xtol=1e-15)
    assert op.nets["a"] == pytest.approx(v, rel=1e-6)
    assert op.iterations < 60


def test_newton_returns_its_strategy_and_iterations():
    system = assemble(net(two("V1", "source", "a", "gnd", 1.0, "V"), two("R1", "resistor", "a", "b", 1e3, "ohm"),
                          two("D1", "diode", "b", "gnd")))
    x, iterations, strategy = newton(system)
    assert strategy == "newton" and 1 <= iterations < 30 and np.all(np.isfinite(x))


@pytest.mark.parametrize("seed", range(12))
def test_random_diode_networks_against_scipy_root(seed):
    # Seeded random networks of resistors and diodes (random orientation) fed by sources. Such
    # networks have exactly one operating point (monotone elements; Chua, Desoer & Kuh, "Linear
    # and Nonlinear Circuits", 1987 — from memory), so scipy.optimize.root on the KCL written
    # here, started from a perturbed point, must land on the solver's answer.
    rng = np.random.default_rng(seed)
    count = int(rng.integers(3, 7))
    names = [f"n{k}" for k in range(count)]
    parts = [two("V1", "source", "n0", "gnd", float(rng.uniform(1.0, 6.0)), "V")]
    branches = []  # (kind, a, b, value): resistor value in Ω, diode isat in A
    for k in range(1, count):
        other = names[int(rng.integers(0, k))]
        branches.append(("resistor", other, names[k], float(rng.uniform(50, 5e3))))
    for _ in range(count + 2):
        a, b = rng.choice(names + ["gnd"], size=2, replace=False)
        if rng.random() < 0.5 and {a, b} != {"n0", "gnd"}:  # not straight across the source
            branches.append(("diode", str(a), str(b), float(10 ** rng.uniform(-15, -9))))
        else:
            branches.append(("resistor", str(a), str(b), float(rng.uniform(50, 5e3))))
    for k, (kind, a, b, value) in enumerate(branches):
        parts.append(two(f"R{k}", "resistor", a, b, value, "ohm") if kind == "resistor"
                     else two(f"D{k}", "diode", a, b, isat=value))
    op = solve(net(*parts))
    assert_kirchhoff_and_tellegen(op)
    unknown = names[1:]
    index = {name: k for k, name in enumerate(unknown)}
    v0 = op.nets["n0"]

    def voltage(v, name):
        return 0.0 if name == "gnd" else v0 if name == "n0" else v[index[name]]

    def kcl(v):  # in mA: current leaving each unknown net
        out = np.zeros(len(unknown))
        for kind, a, b, value in branches:
            u = voltage(v, a) - voltage(v, b)
            i = u / value if kind == "resistor" else value * math.expm1(min(u / VT, 700.0)) + SHUNT * u
            if a in index:
                out[index[a]] += i
            if b in index:
                out[index[b]] -= i
        return 1e3 * out

    mine = np.array([op.nets[name] for name in unknown])
    assert np.max(np.abs(kcl(mine))) < 1e-9  # the solver's answer balances the independent equations
    found = root(kcl, mine + rng.uniform(-0.01, 0.01, mine.size), method="lm", options={"xtol": 1e-15, "ftol": 1e-15})
    assert found.success
    assert found.x == pytest.approx(mine, rel=1e-6, abs=1e-9)


def test_mixed_board_satisfies_kirchhoff_and_tellegen():
    # Every nonlinear kind at once: a small sensor board of our own.
    op = solve(net(
        two("VBAT", "source", "bat", "gnd", 7.4, "V"),
        two("DIN", "diode", "bat", "vin", at={"vf": 0.5}, vf=0.7, rseries=0.05),
        multi("U1", "regulator", {"in": "vin", "out": "v3", "gnd": "gnd"}, vout=3.3, dropout=0.3, iq=20e-6),
        multi("U2", "converter", {"in": "vin", "out": "v12", "gnd": "gnd"}, vout=12.0, efficiency=0.8, iq=1e-4),
        two("HEAT", "load", "v12", "gnd", 0.6, "W"),
        two("LED1", "led", "v3", "k", at={"vf": 5e-3}, vf=1.9), two("RLED", "resistor", "k", "gnd", 220.0, "ohm"),
        two("RZ", "resistor", "v12", "z", 1e3, "ohm"), two("Z1", "zener", "gnd", "z", at={"vz": 5e-3}, vz=5.6, rz=10.0),
        two("RB", "resistor", "v3", "b", 22e3, "ohm"), two("RC", "resistor", "v12", "c", 4.7e3, "ohm"),
        multi("Q1", "bjt", {"c": "c", "b": "b", "e": "gnd"}, {"npn"}, beta=200.0),
        two("RG", "resistor", "v3", "g", 10e3, "ohm"), two("RD", "resistor", "v12", "d", 100.0, "ohm"),
        multi("M1", "mosfet", {"d": "d", "g": "g", "s": "gnd"}, {"nmos"}, vth=1.5, k=0.8),
        multi("A1", "opamp", {"plus": "z", "minus": "fb", "out": "ao", "rail_hi": "v12", "rail_lo": "gnd"},
              swing=0.1),
        two("RF", "resistor", "ao", "fb", 10e3, "ohm"), two("RFG", "resistor", "fb", "gnd", 10e3, "ohm")))
    assert op.nets["v3"] == pytest.approx(3.3, rel=1e-9) and op.nets["v12"] == pytest.approx(12.0, rel=1e-12)
    # Non-inverting gain 2 on the zener's 5.6 V, inside the 0.1 V..11.9 V output range:
    # Vout = (A Vz + Vmid)/(1 + A/2) with Vmid = 6 V (finite-gain closed form, as in the reference tests).
    assert op.nets["ao"] == pytest.approx((1e5 * op.nets["z"] + 6.0) / (1 + 0.5e5), rel=1e-9)
    assert op.strategy == "newton"
    assert_kirchhoff_and_tellegen(op)


def test_cannot_converge_names_the_case_and_the_strategies():
    # 5 V behind 10 Ω can deliver at most E^2/(4R) = 0.625 W; a 1 W constant-power load has no
    # operating point, yet every net has a DC path, so only Newton can find out.
    with pytest.raises(NoSolutionError) as caught:
        solve(net(two("V1", "source", "in", "gnd", 5.0, "V"), two("R1", "resistor", "in", "x", 10.0, "ohm"),
                  two("L1", "load", "x", "gnd", 1.0, "W"), case="brownout"))
    message = caught.value.message
    assert "no DC operating point" in message and "case `brownout`" in message
    # Gain stepping is tried, and named, only in circuits with amplifiers.
    assert all(words in message for name, words in STRATEGIES.items() if name != "gain stepping")
    assert STRATEGIES["gain stepping"] not in message
    assert caught.value.notes[0].startswith("the largest current imbalance is at net `")
    assert caught.value.location.line == 30


def test_a_diode_straight_across_a_source_is_reported_not_solved():
    with pytest.raises(NoSolutionError) as caught:
        solve(net(two("V1", "source", "a", "gnd", 5.0, "V"), two("D1", "diode", "a", "gnd", line=4)))
    assert "nothing in the circuit limits its current" in caught.value.message
    assert caught.value.location.line == 4


def test_a_converter_with_a_dead_input_is_reported():
    with pytest.raises(NoSolutionError) as caught:
        solve(net(two("V1", "source", "in", "gnd", 0.0, "V"),
                  multi("U1", "converter", {"in": "in", "out": "o", "gnd": "gnd"}, vout=5.0),
                  two("L1", "load", "o", "gnd", 10e-3, "A")))
    assert "cannot draw the input power" in caught.value.message


def test_mosfet_gate_fed_only_through_a_resistor_passes_the_diagnosis():
    op = solve(net(two("V1", "source", "vdd", "gnd", 5.0, "V"), two("RG", "resistor", "vdd", "g", 1e6, "ohm"),
                   two("RD", "resistor", "vdd", "d", 1e3, "ohm"),
                   multi("M1", "mosfet", {"d": "d", "g": "g", "s": "gnd"}, {"nmos"}, vth=1.0, k=0.01)))
    assert op.nets["g"] == pytest.approx(5.0, rel=1e-12)  # the gate draws no current


def test_a_gate_connected_to_nothing_else_floats():
    with pytest.raises(NoSolutionError, match="floats at DC"):
        solve(net(two("V1", "source", "vdd", "gnd", 5.0, "V"), two("RD", "resistor", "vdd", "d", 1e3, "ohm"),
                  multi("M1", "mosfet", {"d": "d", "g": "g", "s": "gnd"}, {"nmos"})))


@pytest.mark.parametrize("part, words", [
    (two("D9", "diode", "a", "gnd", isat=-1.0, line=7), "isat above zero"),
    (two("D9", "diode", "a", "gnd", ideality=0.0, line=7), "ideality above zero"),
    (two("D9", "led", "a", "gnd", at={"vf": 1.0}, vf=2.0, rseries=5.0, line=7), "no voltage for the junction"),
    (two("D9", "diode", "a", "gnd", vf=0.7, line=7), "needs a test current"),
    (two("Z9", "zener", "gnd", "a", line=7), "breakdown voltage"),
    (two("Z9", "zener", "gnd", "a", at={"vz": 5e-3}, vz=5.1, rz=-1.0, line=7), "negative rz"),
    (two("L9", "load", "a", "gnd", -1.0, "W", line=7), "must not be negative"),
])
def test_bad_nonlinear_values_are_design_errors_at_the_part(part, words):
    with pytest.raises(DesignError) as caught:
        solve(net(two("V1", "source", "a", "gnd", 1.0, "V"), two("R1", "resistor", "a", "gnd", 1.0, "ohm"), part))
    assert words in caught.value.message and caught.value.location.line == 7


def test_transistor_flags_are_required():
    with pytest.raises(DesignError, match="either `npn` or `pnp`"):
        solve(net(two("V1", "source", "a", "gnd", 1.0, "V"), multi("Q1", "bjt", {"c": "a", "b": "a", "e": "gnd"})))


JACOBIAN_CIRCUIT = net(
    two("V1", "source", "s1", "gnd", 3.0, "V"), two("V2", "source", "s2", "gnd", -2.0, "V"),
    two("D1", "diode", "n1", "n2", rseries=3.0), two("D2", "led", "n2", "gnd"),
    two("Z1", "zener", "n3", "n1", at={"vz": 1e-3}, vz=0.9, rz=2.0),
    multi("Q1", "bjt", {"c": "n1", "b": "n2", "e": "n3"}, {"pnp"}),
    multi("M1", "mosfet", {"d": "n3", "g": "n1", "s": "n4"}, {"nmos"}, vth=0.5, k=0.3, **{"lambda": 0.05}),
    multi("U1", "regulator", {"in": "n4", "out": "n5", "gnd": "n2"}, vout=1.0, dropout=0.2, iq=1e-3),
    multi("U2", "converter", {"in": "n1", "out": "n6", "gnd": "gnd"}, vout=2.0, efficiency=0.7),
    multi("A1", "opamp", {"plus": "n2", "minus": "n3", "out": "n7", "rail_hi": "s1", "rail_lo": "s2"}, gain=3.0),
    two("L1", "load", "n5", "n6", 0.2, "W"),
    *[two(f"R{k}", "resistor", f"n{k}", "s1", 100.0 * k, "ohm") for k in range(1, 8)])


@pytest.mark.parametrize("seed", range(6))
def test_every_device_jacobian_matches_central_differences(seed):
    # The Jacobian is d(residual)/d(unknowns): compare with (F(x + h e) - F(x - h e)) / 2h at random
    # points spread over every region (forward, reverse, triode, saturation, dropout, clipping).
    equations = Equations(assemble(JACOBIAN_CIRCUIT))
    rng = np.random.default_rng(seed)
    x = rng.uniform(-1.5, 1.5, equations.size)
    x[equations.nodes:] = rng.uniform(-0.05, 0.05, equations.size - equations.nodes)
    _, jacobian, _ = equations.linearise(x)
    numeric = np.empty((equations.size, equations.size))
    for k in range(equations.size):
        h = 1e-7
        step = np.zeros(equations.size)
        step[k] = h
        numeric[:, k] = (equations.linearise(x + step)[0] - equations.linearise(x - step)[0]) / (2 * h)
    exact = jacobian.toarray()
    assert exact == pytest.approx(numeric, rel=1e-4, abs=1e-6 * (1 + np.abs(exact).max()))
