"""DC operating points by modified nodal analysis.

`solve` handles one netlist; `solve_cases` handles many and factorises each distinct
system matrix once, so cases that only change source values (same topology, same
part values, same ambient) share one sparse LU factorisation. Every circuit is
diagnosed from its graph before factorising (see `diagnosis`).
"""

from __future__ import annotations

from typing import Sequence

import numpy as np

from checker.design import Netlist, OperatingPoint
from checker.solver.assembly import System, assemble
from checker.solver.diagnosis import diagnose
from checker.solver.linear import Factor
from checker.solver.newton import check_models, newton
from checker.solver.results import operating_point


def solve(netlist: Netlist) -> OperatingPoint:
    """The operating point of one netlist; NoSolutionError or DesignError when there is none."""
    return solve_cases([netlist])[0]


def solve_cases(netlists: Sequence[Netlist]) -> list[OperatingPoint]:
    """Operating points in the order given; linear cases with equal matrices share one LU factorisation."""
    systems = [_prepared(netlist) for netlist in netlists]
    points: list[OperatingPoint | None] = [None] * len(systems)
    groups: dict[bytes, list[int]] = {}
    for position, system in enumerate(systems):
        if system.nonlinear_devices:
            x, iterations, strategy = newton(system)
            check_models(system, x)
            points[position] = operating_point(system, x, iterations, strategy)
        else:
            groups.setdefault(system.fingerprint(), []).append(position)
    for members in groups.values():
        first = systems[members[0]]
        factor = Factor(first.matrix, first.netlist)
        solutions = factor.solve(np.column_stack([systems[m].rhs for m in members]))
        for column, position in enumerate(members):
            points[position] = operating_point(systems[position], solutions[:, column], 1, "linear")
    return points  # type: ignore[return-value]


def _prepared(netlist: Netlist) -> System:
    system = assemble(netlist)
    diagnose(system)
    return system


__all__ = ["solve", "solve_cases"]
