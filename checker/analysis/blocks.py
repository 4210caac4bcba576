"""Many variants of one nonlinear case solved as one circuit: each variant a block sharing ground.

A tolerance analysis solves the same board at hundreds of points. Solving each as
its own netlist costs Python per point (assembly, every Newton iteration's stamps).
Placed side by side in one netlist, the variants' equations are block-diagonal
(they meet only at ground, the reference, which is not an unknown), so one
Newton-Raphson run on the whole solves every block: the devices of a kind stamp all
blocks in one numpy call, and the convergence test is per unknown, so each block is
solved to the same tolerance as alone. Where the joint run fails (one block has no
operating point, or needs continuation), the batch is split in halves down to single
variants, which get the solver's full treatment and report their own error.
"""

from __future__ import annotations

import dataclasses
from typing import Sequence

from checker.analysis.stacked import Located
from checker.design import Netlist, OperatingPoint
from checker.errors import NodegateError
from checker.solver import Cache, solve_cases, stable_near

MARK = "#"  # joins a name and its block number; never part of a name in the circuit language


def solve_each(netlists: Sequence[Netlist], cache: Cache,
               guesses: Sequence[OperatingPoint | None]) -> list[OperatingPoint | str]:
    """Each netlist's operating point by the ordinary solver (full fallback), or the message of why it
    has none: one batch, and one netlist at a time only when the batch meets a point without one.
    Each point is a stable one, in the state of its guess where that state still exists (`stable_near`):
    tolerance analysis follows each stable state of a case and never reports an unstable point."""
    try:
        solved = solve_cases(netlists, cache, guesses)
    except NodegateError:
        return [_one(netlist, cache, guess) for netlist, guess in zip(netlists, guesses)]
    return [_stable(point, guess, cache) for point, guess in zip(solved, guesses)]


def _one(netlist: Netlist, cache: Cache, guess: OperatingPoint) -> OperatingPoint | str:
    try:
        return _stable(solve_cases([netlist], cache, [guess])[0], guess, cache)
    except NodegateError as error:
        return error.message


def _stable(point: OperatingPoint, guess: OperatingPoint | None, cache: Cache) -> OperatingPoint | str:
    try:
        return stable_near(point, guess, cache)
    except NodegateError as error:
        return error.message


class JointSolver:
    """Solves variants of one case (the same parts, other values) as blocks of one netlist."""

    def __init__(self, netlist: Netlist, nominal: OperatingPoint, cache: Cache):
        self.netlist, self.nominal, self.cache = netlist, nominal, cache
        self._names: list[tuple] = []  # per block: each part's name and pins there
        self._copies: list[tuple] = []  # per block: each part of the case renamed for it

    def _renamed(self, number: int) -> tuple:
        while len(self._names) <= number:
            suffix, ground = f"{MARK}{len(self._names)}", self.netlist.ground
            self._names.append(tuple(
                (part.name + suffix, tuple((pin, net if net == ground else net + suffix) for pin, net in part.pins))
                for part in self.netlist.parts))
        return self._names[number]

    def side_by_side(self, netlists: Sequence[Netlist]) -> Netlist:
        """One netlist with every given netlist as its own block (a part a variant leaves as it is
        reuses its renamed copy)."""
        parts = []
        for number, netlist in enumerate(netlists):
            fixed = self._fixed(number)
            parts += [fixed[m] if part is base else part.copy_with(name=name, pins=pins)
                      for m, (part, base, (name, pins)) in enumerate(zip(netlist.parts, self.netlist.parts,
                                                                            self._renamed(number)))]
        return dataclasses.replace(self.netlist, parts=tuple(parts))

    def _fixed(self, number: int) -> tuple:
        while len(self._copies) <= number:
            names = self._renamed(len(self._copies))
            self._copies.append(tuple(part.copy_with(name=name, pins=pins)
                                      for part, (name, pins) in zip(self.netlist.parts, names)))
        return self._copies[number]

    def solve(self, netlists: Sequence[Netlist], fallback: bool = True) -> list[Located | str]:
        """Each netlist's operating point and block number there, or the message of why it has none.
        Without `fallback`, a variant that Newton-Raphson cannot reach from the nominal point fails
        at once instead of trying continuation (see `solve_cases`)."""
        if len(netlists) == 1:
            try:
                return [(solve_cases(netlists, self.cache, [self.nominal], fallback)[0], -1)]
            except NodegateError as error:
                return [error.message]
        try:
            joint = solve_cases([self.side_by_side(netlists)], self.cache, [_Guess(self.nominal, len(netlists))],
                                fallback=False)[0]  # continuation on the whole may pick other branches
        except NodegateError:
            joint = None
        if joint is None:
            half = len(netlists) // 2
            return self.solve(netlists[:half], fallback) + self.solve(netlists[half:], fallback)
        return [(joint, number) for number in range(len(netlists))]


class _Guess:
    """A warm start for the joint netlist: every block at the nominal net voltages."""

    def __init__(self, nominal: OperatingPoint, count: int):
        ground = nominal.netlist.ground
        self.nets = {f"{net}{MARK}{number}": volts for number in range(count)
                     for net, volts in nominal.nets.items() if net != ground}
        self.parts: dict = {}
