"""solve_cases shares one LU factorisation among cases with the same matrix.

The factorisation is counted by wrapping scipy's splu where the solver calls it;
results are compared with separate solve() calls and with the divider closed form
(Alexander & Sadiku, "Fundamentals of Electric Circuits", 5th ed., 2013, sec. 2.7;
section number from memory).
"""

from __future__ import annotations

import pytest
from scipy.sparse.linalg import splu

import checker.solver.linear
from checker.design import Netlist, Part
from checker.solver import solve, solve_cases


def two(name, kind, a, b, value=None, unit=None, **props):
    return Part(name, kind, (("from", a), ("to", b)), value, unit, props=props)


def logger(case: str, volts: float, drain: float = 1e-3, ambient: float = 298.15, fitted: bool = True) -> Netlist:
    """A greenhouse logger: battery, a divider to the ADC (one resistor with a tempco), an MCU drain."""
    parts = [two("VBAT", "source", "vbat", "gnd", volts, "V"),
             two("R_TOP", "resistor", "vbat", "adc", 100e3, "ohm", tempco=100e-6),
             two("R_BOT", "resistor", "adc", "gnd", 47e3, "ohm"),
             two("R_FEED", "resistor", "vbat", "rail", 2.2, "ohm"),
             two("MCU", "load", "rail", "gnd", drain, "A")]
    if fitted:
        parts.append(two("R_PULL", "resistor", "rail", "adc", 1e6, "ohm"))
    return Netlist("logger", case, ambient, "gnd", tuple(parts))


@pytest.fixture
def factorisations(monkeypatch):
    calls = []

    def counting(matrix, *args, **kwargs):
        calls.append(matrix.shape)
        return splu(matrix, *args, **kwargs)

    monkeypatch.setattr(checker.solver.linear, "splu", counting)
    return calls


def test_source_only_cases_share_one_factorisation(factorisations):
    cases = [logger("cold", 3.0, 2e-3), logger("nominal", 3.7), logger("full", 4.2, 30e-3)]
    points = solve_cases(cases)
    assert len(factorisations) == 1
    for point, netlist in zip(points, cases):
        alone = solve(netlist)
        assert point.case == netlist.case
        assert point.nets == pytest.approx(alone.nets, rel=1e-13, abs=1e-15)
        for name in alone.parts:
            assert point.parts[name].current == pytest.approx(alone.parts[name].current, rel=1e-12, abs=1e-18)


def test_unloaded_divider_case_matches_closed_form():
    point = solve_cases([logger("bare", 4.2, fitted=False)])[0]
    assert point.nets["adc"] == pytest.approx(4.2 * 47e3 / (100e3 + 47e3), rel=1e-12)


def test_ambient_or_topology_changes_need_their_own_factorisation(factorisations):
    cases = [logger("a", 3.7), logger("b", 4.2), logger("hot", 3.7, ambient=358.15), logger("variant", 3.7, fitted=False)]
    points = solve_cases(cases)
    assert len(factorisations) == 3
    assert [p.case for p in points] == ["a", "b", "hot", "variant"]
    assert points[2].nets["adc"] != pytest.approx(points[0].nets["adc"], rel=1e-9)


def test_no_cases_gives_no_points():
    assert solve_cases([]) == []


def test_netlist_with_only_ground_solves():
    point = solve(Netlist("empty", "default", 298.15, "gnd", (two("R1", "resistor", "gnd", "gnd", 1.0, "ohm"),)))
    assert point.nets == {"gnd": 0.0} and point.parts["R1"].current == 0.0
