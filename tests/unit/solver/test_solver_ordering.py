"""The solver's fill-reducing ordering, its reuse, the solve of many cases through their span, and
the vectorised junction setup give the answers of the plain ways of doing the same.

References are computed outside the project's code path: scipy's default `splu` (COLAMD) of the
very matrix the solver assembles, and the part-by-part saturation-current function.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
import scipy.sparse as sp
from scipy.sparse.linalg import splu

import checker.solver.linear as linear
from checker.design import Netlist, Part
from checker.devices.diodes import Diode, Led
from checker.solver import Cache, solve, solve_cases
from checker.solver.assembly import assemble

EXAMPLE = Path(__file__).resolve().parents[3] / "examples" / "weather_station"


def grid(side: int, volts: float = 1.0, case: str = "default") -> Netlist:
    """A side x side mesh of 100 Ω resistors, grounded at one corner and driven at the opposite one."""
    def net(r, c):
        return f"g{r * side + c}"
    parts = [Part(f"RH{r}_{c}", "resistor", (("from", net(r, c)), ("to", net(r, c + 1))), 100.0, "ohm")
             for r in range(side) for c in range(side - 1)]
    parts += [Part(f"RV{r}_{c}", "resistor", (("from", net(r, c)), ("to", net(r + 1, c))), 100.0, "ohm")
              for r in range(side - 1) for c in range(side)]
    parts.append(Part("V1", "source", (("from", net(side - 1, side - 1)), ("to", net(0, 0))), volts, "V"))
    return Netlist("grid", case, 298.15, net(0, 0), tuple(parts))


def relative(a: np.ndarray, b: np.ndarray) -> float:
    return float(np.max(np.abs(a - b)) / np.max(np.abs(b)))


@pytest.mark.parametrize("side", [15, 40])
def test_grid_solution_agrees_with_scipy_default_splu(side):
    netlist = grid(side)
    system = assemble(netlist, Cache().topology(netlist))
    assert linear.ordering_for(system.matrix) == linear.ORDERING
    reference = splu(system.matrix).solve(system.rhs)
    point = solve(netlist)
    x = np.array([point.nets[net] for net in system.nets[1:]])
    assert relative(x, reference[:system.n_nodes]) < 1e-12


def test_reused_ordering_gives_the_same_factors_and_transposed_solves():
    netlist = grid(30)
    system = assemble(netlist, Cache().topology(netlist))
    orderings = linear.Orderings()
    first = linear.Factor(system.matrix, netlist, orderings)
    assert orderings.find(system.matrix) is not None
    scaled = sp.csc_matrix(system.matrix * 1.5)  # the same pattern, other values
    again = linear.Factor(scaled, netlist, orderings)
    assert isinstance(again.lu, linear._Ordered)
    rhs = np.random.default_rng(3).normal(size=system.size)
    assert relative(again.solve(rhs), splu(scaled).solve(rhs)) < 1e-12
    assert relative(again.lu.solve(rhs, trans="T"), splu(scaled).solve(rhs, trans="T")) < 1e-12
    assert relative(first.solve(rhs), splu(system.matrix).solve(rhs)) < 1e-12


def test_a_dense_column_is_ordered_by_colamd():
    rail = 200
    parts = [Part("V1", "source", (("from", "rail"), ("to", "gnd")), 5.0, "V")]
    parts += [Part(f"R{k}", "resistor", (("from", "rail"), ("to", f"a{k}")), 150.0, "ohm") for k in range(rail)]
    parts += [Part(f"RL{k}", "resistor", (("from", f"a{k}"), ("to", "gnd")), 330.0, "ohm") for k in range(rail)]
    netlist = Netlist("panel", "default", 298.15, "gnd", tuple(parts))
    system = assemble(netlist, Cache().topology(netlist))
    assert linear.ordering_for(system.matrix) == linear.DENSE_ORDERING
    point = solve(netlist)
    assert point.nets["a7"] == pytest.approx(5.0 * 330.0 / 480.0, rel=1e-12)


def test_many_cases_through_their_span_agree_with_solving_each():
    netlist = grid(20)
    system = assemble(netlist, Cache().topology(netlist))
    rng = np.random.default_rng(5)
    rhs = np.zeros((system.size, 12))
    rhs[[3, 50, system.size - 1]] = rng.normal(size=(3, 12))  # three source rows, twelve cases
    factor = linear.Factor(system.matrix, netlist)
    spanned = factor.solve_cases(rhs)
    for column in range(rhs.shape[1]):
        assert relative(spanned[:, column], splu(system.matrix).solve(rhs[:, column])) < 1e-12


def test_source_cases_solved_together_agree_with_each_alone():
    netlists = [grid(25, volts=1.0 + k / 7, case=f"c{k}") for k in range(7)]
    base = netlists[0]
    shared = [base] + [Netlist(base.circuit, n.case, n.ambient, n.ground, base.parts[:-1] + n.parts[-1:])
                       for n in netlists[1:]]
    together = solve_cases(shared)
    for point, netlist in zip(together, shared):
        alone = solve(netlist)
        for net, volts in alone.nets.items():
            assert point.nets[net] == pytest.approx(volts, rel=1e-12, abs=1e-15)


def test_example_board_agrees_with_scipy_default_ordering(monkeypatch):
    from checker.pipeline import load_designs
    from checker.repo.config import load_config
    designs = load_designs(load_config(EXAMPLE / "nodegate.yaml"))
    netlists = [netlist for design in designs for netlist in design.netlists]
    ours = solve_cases(netlists)
    monkeypatch.setattr(linear, "ORDERING", "COLAMD")
    monkeypatch.setattr(linear, "REUSE_SIZE", 10 ** 9)
    default = solve_cases(netlists)
    for a, b in zip(ours, default):
        for net, volts in b.nets.items():
            assert a.nets[net] == pytest.approx(volts, rel=1e-12, abs=1e-15)


@pytest.mark.parametrize("cls", [Diode, Led])
def test_vectorised_saturation_currents_are_those_of_each_part(cls):
    parts = [Part("D1", cls.kind, (("from", "a"), ("to", "b"))),
             Part("D2", cls.kind, (("from", "a"), ("to", "b")), props={"isat": 2e-12}),
             Part("D3", cls.kind, (("from", "a"), ("to", "b")), props={"vf": 1.9, "rseries": 2.0}, at={"vf": 20e-3}),
             Part("D4", cls.kind, (("from", "a"), ("to", "b")), props={"rseries": 3.3, "ideality": 1.7}),
             Part("D5", cls.kind, (("from", "a"), ("to", "b")), props={"ideality": 2.4})]
    nodes = np.zeros((len(parts), 2), dtype=np.int64)
    device = cls(parts, nodes, 0, 310.0)
    ideality = np.array([p.props.get("ideality", cls.default_ideality) for p in parts])
    rseries = np.array([p.props.get("rseries", 0.0) for p in parts])
    each = np.array([device._log_isat_ref(p, n, r) for p, n, r in zip(parts, ideality, rseries)])
    assert np.array_equal(device._log_isat_refs(ideality, rseries), each)


def test_cases_with_every_source_at_zero_solve_to_zero():
    netlist = grid(6)
    system = assemble(netlist, Cache().topology(netlist))
    factor = linear.Factor(system.matrix, netlist)
    assert np.array_equal(factor.solve_cases(np.zeros((system.size, 4))), np.zeros((system.size, 4)))
