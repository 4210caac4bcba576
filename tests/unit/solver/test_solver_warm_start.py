"""Warm starts: Newton-Raphson started at a nearby operating point finds the same solution in
fewer iterations, follows the branch of that point in a circuit with several DC solutions,
and falls back to the usual first guess and continuation when it does not converge.

Iterations are counted through OperatingPoint.iterations, never timed. Every circuit is also
checked against a result computed outside the project: the diode string by scipy's brentq on
Shockley's law (W. Shockley, Bell System Technical Journal, 1949), the latch by brentq on the
Shichman-Hodges square law (H. Shichman & D. A. Hodges, IEEE J. Solid-State Circuits, 1968),
the cubic part by numpy.roots.
"""

from __future__ import annotations

import dataclasses
import math
from pathlib import Path

import numpy as np
import pytest
from scipy.optimize import brentq

from checker.design import Netlist, OperatingPoint, Part
from checker.devices import DEVICES
from checker.devices.base import Device, EdgeKind, Edges, NonlinearStamp, Triplets
from checker.language import parse_design
from checker.pipeline import load_designs
from checker.repo.config import load_config
from checker.solver import solve, solve_cases
from checker.solver.assembly import assemble
from checker.solver.newton import WARM_ITERATIONS
from checker.solver.results import warm_start

EXAMPLE = Path(__file__).resolve().parents[3] / "examples" / "weather_station" / "nodegate.yaml"
K, Q = 1.380649e-23, 1.602176634e-19  # exact SI 2019 values (SI Brochure, 9th ed., 2019, Table 1)
SHUNT = 1e-12  # S: in parallel with every junction and channel (docs/models.md)
SAME = 1e-9  # relative agreement demanded between warm and cold solutions

IRRIGATION = """circuit irrigation "Irrigation valve controller"
ground gnd
source    VIN   from vin to gnd        : 12 V, tol = 5%
diode     D_REV from vin to vprot      : vf = 0.7 V at 100 mA
regulator U_REG (in: vprot, out: v5, gnd: gnd) : vout = 5 V, dropout = 300 mV, iq = 2 mA, tol = 2%
converter U_BK  (in: vprot, out: v3, gnd: gnd) : vout = 3.3 V, efficiency = 88%, iq = 50 uA
load      MCU   from v3 to gnd         : 15 mA, tol = 10%
led       L_ON  from v5 to led_k       : vf = 2.0 V at 10 mA
resistor  R_LED from led_k to gnd      : 330 ohm, tol = 5%
resistor  R_B1  from v5 to base        : 47 kohm, tol = 5%
resistor  R_B2  from base to gnd       : 10 kohm, tol = 5%
bjt       Q1    (c: coil, b: base, e: gnd) : npn, beta = 120
resistor  R_COIL from vprot to coil    : 120 ohm, tol = 10%
resistor  R_G   from v5 to gate        : 1 kohm, tol = 1%
mosfet    M_PUMP (d: pump, g: gate, s: gnd) : nmos, vth = 1.5 V, k = 0.5 A/V^2, lambda = 0.02 V^-1
resistor  R_PUMP from vin to pump      : 24 ohm, tol = 5%
resistor  R_PD  from gate to gnd       : 100 kohm, tol = 5%
resistor  R_S1  from v5 to sense       : 10 kohm, tol = 1%
resistor  R_S2  from sense to gnd      : 22 kohm, tol = 1%
opamp     U_BUF (plus: sense, minus: soil, out: soil, rail_hi: v5, rail_lo: gnd) : gain = 100000
resistor  R_ADC from soil to gnd       : 47 kohm, tol = 5%
case dry_morning : VIN = 11 V, ambient = 5 degC
case hot_noon    : VIN = 13.5 V, ambient = 50 degC
"""

LATCH = """circuit door "Greenhouse door latch memory"
ground gnd
source   VDD     from vdd to gnd : 5 V
resistor RD1     from vdd to q   : 10 kohm, tol = 5%
resistor RD2     from vdd to qn  : 10 kohm, tol = 5%
mosfet   M1      (d: q, g: qn, s: gnd)  : nmos, vth = 1 V, k = 2 mA/V^2
mosfet   M2      (d: qn, g: q, s: gnd)  : nmos, vth = 1 V, k = 2 mA/V^2
resistor R_SET   from q to gnd   : 100 Mohm
resistor R_RESET from qn to gnd  : 100 Mohm
case hold  : R_SET = 100 Mohm
case set   : R_SET = 1 kohm
case reset : R_RESET = 1 kohm
"""


def moved(netlist: Netlist, factors: dict[str, float]) -> Netlist:
    """The netlist with the primary value (or a regulator's vout) of each named part scaled."""
    def scaled(part: Part) -> Part:
        factor = factors.get(part.name)
        if factor is None:
            return part
        if part.kind == "regulator":
            return dataclasses.replace(part, props={**part.props, "vout": part.props["vout"] * factor})
        return dataclasses.replace(part, value=part.value * factor)
    return dataclasses.replace(netlist, parts=tuple(scaled(p) for p in netlist.parts))


def random_boards(netlist: Netlist, count: int, seed: int) -> list[Netlist]:
    """`count` copies with every toleranced value moved uniformly within its band."""
    rng = np.random.default_rng(seed)
    toleranced = [(p.name, p.props["tol"]) for p in netlist.parts if p.props.get("tol")]
    return [moved(netlist, {name: 1.0 + tol * rng.uniform(-1.0, 1.0) for name, tol in toleranced})
            for _ in range(count)]


def assert_same(warm: OperatingPoint, cold: OperatingPoint) -> None:
    """Every net voltage and every pin current agree to SAME relative, against the largest of their kind."""
    volts = max(abs(v) for v in cold.nets.values())
    for name, value in cold.nets.items():
        assert warm.nets[name] == pytest.approx(value, rel=SAME, abs=SAME * volts), name
    amps = max(abs(i) for r in cold.parts.values() for i in r.pins.values())
    for name, result in cold.parts.items():
        for pin, current in result.pins.items():
            assert warm.parts[name].pins[pin] == pytest.approx(current, rel=SAME, abs=SAME * amps), (name, pin)


def example_netlists() -> tuple:
    return load_designs(load_config(EXAMPLE))[0].netlists


def test_warm_and_cold_agree_on_perturbed_nonlinear_circuits_in_fewer_iterations():
    design = parse_design(IRRIGATION, "irrigation.circuit")
    for netlist in design.netlists:
        nominal = solve(netlist)
        boards = random_boards(netlist, 12, seed=3)
        cold = solve_cases(boards)
        warm = solve_cases(boards, None, [nominal] * len(boards))
        for w, c in zip(warm, cold):
            assert_same(w, c)
            assert w.strategy == "newton" and w.iterations < c.iterations


def test_warm_and_cold_agree_on_the_example_board_in_fewer_iterations():
    netlists = example_netlists()
    nominal = solve_cases(netlists)
    for seed in range(4):
        boards = [random_boards(n, 1, seed)[0] for n in netlists]
        cold = solve_cases(boards)
        warm = solve_cases(boards, None, nominal)
        for w, c in zip(warm, cold):
            assert_same(w, c)
        assert all(w.iterations <= c.iterations for w, c in zip(warm, cold))
        assert sum(w.iterations for w in warm) < sum(c.iterations for c in cold)


def test_a_warm_diode_string_against_brentq():
    # 9 V through 1 kΩ ±5 % into two Shockley diodes (Is 1e-14 A, n = 1) in series at 25 °C.
    text = """circuit lamp "Bike lamp reference string"
ground gnd
source   VB from vb to gnd : 9 V
resistor R1 from vb to a   : 1 kohm, tol = 5%
diode    D1 from a to b    : isat = 1e-14 A
diode    D2 from b to gnd  : isat = 1e-14 A
"""
    netlist = parse_design(text, "lamp.circuit").netlists[0]
    nominal = solve(netlist)
    vt = K * 298.15 / Q
    for factor in (0.95, 1.0, 1.05):
        point = solve_cases([moved(netlist, {"R1": factor})], None, [nominal])[0]

        def kcl(i: float) -> float:  # volts around the loop at current i; SHUNT's 1e-12 S x 0.7 V is negligible
            return 9.0 - 1e3 * factor * i - 2.0 * vt * math.log1p(i / 1e-14)
        current = brentq(kcl, 1e-6, 9e-3, xtol=1e-18)
        assert point.parts["R1"].current == pytest.approx(current, rel=1e-6)
        assert point.iterations <= nominal.iterations and (factor != 1.0 or point.iterations == 1)


def test_started_at_its_own_solution_newton_converges_at_once():
    netlist = example_netlists()[1]
    nominal = solve(netlist)
    again = solve_cases([netlist], None, [nominal])[0]
    assert again.iterations == 1
    assert_same(again, nominal)


def test_the_start_vector_is_the_solution_or_the_net_voltages_by_name():
    netlists = example_netlists()
    day, night = netlists[3], netlists[1]  # the panel is present by day only: other nets, other unknowns
    day_point, night_point = solve(day), solve(night)
    system = assemble(day)
    own = warm_start(system, day_point)
    assert own.shape == (system.size,)
    assert [own[k] for k in range(system.n_nodes)] == [day_point.nets[n] for n in system.nets[1:]]
    assert np.any(own[system.n_nodes:] != 0.0)  # branch currents come along
    other = warm_start(system, night_point)
    assert [other[k] for k in range(system.n_nodes)] == [night_point.nets.get(n, 0.0) for n in system.nets[1:]]
    assert np.all(other[system.n_nodes:] == 0.0)
    assert_same(solve_cases([day], None, [night_point])[0], day_point)


def test_each_netlist_takes_its_own_guess_and_linear_ones_ignore_theirs():
    netlists = example_netlists()
    nominal = solve_cases(netlists)
    warm = solve_cases(netlists, None, [nominal[0], None, *nominal[2:]])
    assert [p.iterations for p in warm] == [1, nominal[1].iterations, 1, 1, 1]
    divider = parse_design("circuit d \"Divider\"\nground gnd\nsource V from a to gnd : 5 V\n"
                           "resistor R1 from a to b : 1 kohm\nresistor R2 from b to gnd : 1 kohm\n", "d.circuit")
    point = solve_cases(divider.netlists, None, [nominal[0]])[0]
    assert (point.strategy, point.nets["b"]) == ("linear", pytest.approx(2.5, rel=1e-12))
    with pytest.raises(ValueError):
        solve_cases(netlists, None, nominal[:2])


def drain_current(vgs: float, vds: float, k: float = 2e-3, vth: float = 1.0) -> float:
    """Shichman-Hodges, lambda = 0, for vds >= 0 (Shichman & Hodges 1968)."""
    vov = vgs - vth
    if vov <= 0.0:
        return 0.0
    return k * (vov * vds - vds ** 2 / 2.0) if vds < vov else k / 2.0 * vov ** 2


def test_a_bistable_latch_follows_the_branch_of_its_guess():
    # Two cross-coupled nmos inverters hold either state once R_SET/R_RESET let go; from the
    # symmetric first guess plain Newton finds the third (metastable) solution q = qn.
    design = parse_design(LATCH, "door.circuit")
    hold, set_, reset = (design.netlist(case) for case in ("hold", "set", "reset"))
    cold = solve(hold)
    meta = brentq(lambda v: (5.0 - v) / 1e4 - drain_current(v, v) - v / 1e8, 1.0, 5.0, xtol=1e-15)
    assert cold.nets["q"] == pytest.approx(meta, abs=1e-8) and cold.nets["qn"] == pytest.approx(meta, abs=1e-8)
    low_q = solve_cases([hold], None, [solve(set_)])[0]
    high_q = solve_cases([hold], None, [solve(reset)])[0]
    for point, low, high in ((low_q, "q", "qn"), (high_q, "qn", "q")):
        # The high side: RD into the off transistor (SHUNT only) and 100 MΩ; the low side: RD into the
        # transistor in triode with its gate at the high side.
        v_high = brentq(lambda v: (5.0 - v) / 1e4 - v / 1e8 - SHUNT * v, 0.0, 5.0, xtol=1e-15)
        v_low = brentq(lambda v: (5.0 - v) / 1e4 - drain_current(v_high, v) - v / 1e8 - SHUNT * v, 0.0, 1.0,
                       xtol=1e-15)
        assert point.nets[high] == pytest.approx(v_high, abs=1e-7)
        assert point.nets[low] == pytest.approx(v_low, abs=1e-7)
        assert point.iterations <= 5
    # A tolerance analysis of the held state stays on that state for every board.
    for board in random_boards(hold, 20, seed=5):
        point = solve_cases([board], None, [low_q])[0]
        assert point.nets["q"] < 0.2 and point.nets["qn"] > 4.9


class Cycler(Device):
    """i = v^3 - 2 v from `from` to `to`: Newton on v^3 - 2 v + 2 = 0 from v = 0 goes 0 -> 1 -> 0 -> ...
    (a textbook cycle of Newton's method, e.g. Burden & Faires, "Numerical Analysis"; from memory)."""

    kind = "warm_cycler"
    nonlinear = True

    def edges(self) -> Edges:
        rows = np.arange(len(self.parts))
        return Edges(self.nodes[:, 0], self.nodes[:, 1], np.full(rows.size, EdgeKind.CONDUCTIVE), rows)

    def _v(self, x):
        return x[self.nodes[:, 0]] - x[self.nodes[:, 1]]

    def evaluate(self, x) -> NonlinearStamp:
        a, b = self.nodes[:, 0], self.nodes[:, 1]
        v = self._v(x)
        i, g = v ** 3 - 2.0 * v, 3.0 * v ** 2 - 2.0
        jacobian = Triplets(np.concatenate([a, a, b, b]), np.concatenate([a, b, a, b]), np.concatenate([g, -g, -g, g]))
        return NonlinearStamp(np.concatenate([a, b]), np.concatenate([i, -i]), jacobian)

    def pin_currents(self, x):
        v = self._v(x)
        return np.column_stack([v ** 3 - 2.0 * v, 2.0 * v - v ** 3])


def test_a_warm_start_that_cannot_converge_falls_back(monkeypatch):
    monkeypatch.setitem(DEVICES, Cycler.kind, Cycler)

    def circuit(amps: float) -> Netlist:
        return Netlist("cyc", "default", 300.0, "gnd", (
            Part("I1", "source", (("from", "x"), ("to", "gnd")), amps, "A"),
            Part("N1", Cycler.kind, (("from", "x"), ("to", "gnd")))))
    at_rest = solve(circuit(0.0))  # 0 V: one of the three roots of v^3 - 2 v = 0
    assert at_rest.nets["x"] == 0.0
    alone = solve(circuit(2.0))
    warm = solve_cases([circuit(2.0)], None, [at_rest])[0]
    # KCL at x: N1 carries -2 A, so v^3 - 2 v + 2 = 0, whose one real root numpy.roots finds.
    root = next(r.real for r in np.roots([1.0, 0.0, -2.0, 2.0]) if abs(r.imag) < 1e-12)
    assert warm.nets["x"] == pytest.approx(root, abs=1e-9) == alone.nets["x"]
    assert warm.strategy == alone.strategy
    assert warm.iterations == WARM_ITERATIONS + alone.iterations
