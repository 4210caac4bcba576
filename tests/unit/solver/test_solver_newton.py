"""The Newton-Raphson loop, driven by small nonlinear devices defined here.

Each operating point is checked against scipy.optimize.brentq solving the same
single-node Kirchhoff current equation written by hand.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.optimize import brentq

from checker.design import Netlist, Part
from checker.devices import DEVICES
from checker.devices.base import Device, EdgeKind, Edges, NonlinearStamp, Triplets
from checker.errors import Location, NoSolutionError
from checker.solver import solve, solve_cases
from checker.solver.newton import MAX_ITERATIONS, STRATEGIES

# V: thermal voltage kT/q at 300 K from the exact defining constants (SI Brochure, 9th ed., 2019, Table 1).
VT = 1.380649e-23 * 300.0 / 1.602176634e-19


class TwoTerminalLaw(Device):
    """A nonlinear two-terminal part whose current from -> to is law(v) with slope slope(v)."""

    nonlinear = True

    @staticmethod
    def law(v):
        raise NotImplementedError

    @staticmethod
    def slope(v):
        raise NotImplementedError

    def edges(self) -> Edges:
        rows = np.arange(len(self.parts))
        return Edges(self.nodes[:, 0], self.nodes[:, 1], np.full(rows.size, EdgeKind.CONDUCTIVE), rows)

    def _voltage(self, x):
        return x[self.nodes[:, 0]] - x[self.nodes[:, 1]]

    def evaluate(self, x) -> NonlinearStamp:
        a, b = self.nodes[:, 0], self.nodes[:, 1]
        v = self._voltage(x)
        i, g = self.law(v), self.slope(v)
        jacobian = Triplets(np.concatenate([a, a, b, b]), np.concatenate([a, b, a, b]), np.concatenate([g, -g, -g, g]))
        return NonlinearStamp(np.concatenate([a, b]), np.concatenate([i, -i]), jacobian)

    def pin_currents(self, x):
        i = self.law(self._voltage(x))
        return np.column_stack([i, -i])


class Cubic(TwoTerminalLaw):
    """i = g v + k v^3: monotone, so exactly one operating point."""

    kind = "cubic"

    @staticmethod
    def law(v):
        return 1e-3 * v + 2e-4 * v ** 3

    @staticmethod
    def slope(v):
        return 1e-3 + 6e-4 * v ** 2


class Junction(TwoTerminalLaw):
    """Shockley's ideal junction i = Is (exp(v / Vt) - 1) (W. Shockley, Bell System
    Technical Journal, 1949), with a crude step limit to exercise the hook."""

    kind = "junction"
    limited = []

    @staticmethod
    def law(v):
        return 1e-14 * np.expm1(v / VT)

    @staticmethod
    def slope(v):
        return 1e-14 / VT * np.exp(v / VT)

    def limit(self, x_new, x_old):
        step = np.clip(x_new - x_old, -0.1, 0.1)  # at most 0.1 V per iteration on any unknown
        Junction.limited.append(bool(np.any(step != x_new - x_old)))
        return x_old + step


class Cycler(TwoTerminalLaw):
    """i = v^3 - 2 v: with 2 A pushed in, Newton from 0 V cycles 0 -> 1 -> 0 (a textbook
    failure case of Newton's method, e.g. Burden & Faires, "Numerical Analysis"; from memory)."""

    kind = "cycler"

    @staticmethod
    def law(v):
        return v ** 3 - 2 * v

    @staticmethod
    def slope(v):
        return 3 * v ** 2 - 2


class Saturating(TwoTerminalLaw):
    """i = tanh(v): bounded by 1 A in both directions."""

    kind = "saturating"

    @staticmethod
    def law(v):
        return np.tanh(v)

    @staticmethod
    def slope(v):
        return 1.0 / np.cosh(np.clip(v, -300, 300)) ** 2


@pytest.fixture(autouse=True)
def nonlinear_kinds(monkeypatch):
    for cls in (Cubic, Junction, Cycler, Saturating):
        monkeypatch.setitem(DEVICES, cls.kind, cls)


def two(name, kind, a, b, value=None, unit=None):
    return Part(name, kind, (("from", a), ("to", b)), value, unit)


def net(*parts, case="default"):
    return Netlist("probe", case, 300.0, "gnd", tuple(parts), case_location=Location("probe.circuit", 9, 6))


def test_cubic_against_brentq():
    op = solve(net(two("V1", "source", "in", "gnd", 5.0, "V"), two("R1", "resistor", "in", "x", 1e3, "ohm"),
                   two("N1", "cubic", "x", "gnd")))
    v = brentq(lambda u: (5.0 - u) / 1e3 - Cubic.law(u), 0.0, 5.0, xtol=1e-15)
    assert op.nets["x"] == pytest.approx(v, abs=1e-9)
    assert op.strategy == "newton" and 1 < op.iterations < MAX_ITERATIONS
    assert op.parts["N1"].current == pytest.approx(op.parts["R1"].current, rel=1e-9)


def test_junction_with_limiting_against_brentq():
    Junction.limited.clear()
    op = solve(net(two("V1", "source", "in", "gnd", 5.0, "V"), two("R1", "resistor", "in", "a", 1e3, "ohm"),
                   two("D1", "junction", "a", "gnd")))
    v = brentq(lambda u: (5.0 - u) / 1e3 - Junction.law(u), 0.0, 1.0, xtol=1e-15)
    assert op.nets["a"] == pytest.approx(v, abs=1e-9)
    assert any(Junction.limited) and not Junction.limited[-1]


def test_result_satisfies_kirchhoff_and_tellegen():
    op = solve(net(two("I1", "source", "gnd", "x", 3e-3, "A"), two("N1", "cubic", "x", "y"),
                   two("R1", "resistor", "y", "gnd", 470.0, "ohm"), two("D1", "junction", "y", "gnd")))
    assert op.parts["N1"].current == pytest.approx(3e-3, rel=1e-9)
    assert op.parts["R1"].current + op.parts["D1"].current == pytest.approx(3e-3, rel=1e-9)
    powers = [p.power for p in op.parts.values()]
    assert abs(sum(powers)) <= 1e-9 * sum(map(abs, powers))


def test_continuation_rescues_a_cycling_newton_against_brentq():
    op = solve(net(two("I1", "source", "x", "gnd", 2.0, "A"), two("N1", "cycler", "x", "gnd")))
    # KCL at x: 2 A leaves through I1 (x -> gnd), so N1 carries -2 A: v^3 - 2 v + 2 = 0, one real root.
    v = brentq(lambda u: Cycler.law(u) + 2.0, -3.0, -1.0, xtol=1e-15)
    assert op.nets["x"] == pytest.approx(v, abs=1e-9)
    assert op.strategy in ("shunt stepping", "source stepping")


def test_no_convergence_is_a_no_solution_error_naming_the_case_strategies_and_net():
    # tanh(v) never exceeds 1 A, so 2 A pushed into x has no operating point at all.
    with pytest.raises(NoSolutionError) as caught:
        solve(net(two("I1", "source", "gnd", "x", 2.0, "A"), two("N1", "saturating", "x", "gnd")))
    message = caught.value.message
    assert "no DC operating point" in message and "in case `default`" in message
    # Gain stepping is tried, and named, only in circuits with amplifiers.
    assert all(words in message for name, words in STRATEGIES.items() if name != "gain stepping")
    assert STRATEGIES["gain stepping"] not in message
    assert caught.value.notes == ("the largest current imbalance is at net `x`, which connects I1, N1",)
    assert caught.value.location.line == 9


def test_nonlinear_cases_are_solved_one_by_one():
    cases = [net(two("V1", "source", "in", "gnd", v, "V"), two("R1", "resistor", "in", "x", 1e3, "ohm"),
                 two("N1", "cubic", "x", "gnd"), case=f"v{v}") for v in (1.0, 3.0)]
    points = solve_cases(cases)
    for point, volts in zip(points, (1.0, 3.0)):
        v = brentq(lambda u: (volts - u) / 1e3 - Cubic.law(u), 0.0, volts, xtol=1e-15)
        assert point.case == f"v{volts}" and point.nets["x"] == pytest.approx(v, abs=1e-9)
