"""Monte Carlo analysis: `samples` boards drawn at random, every case solved for each.

Each sample is one board: every toleranced part gets one deviation u x tol with u
uniform on [−1, 1], independent across parts, and keeps it in every case (a case
may override `tol`, which scales the same u). The draws come from
numpy.random.default_rng seeded with (seed, CRC-32 of the circuit name), so the same
seed gives the same report, and adding a circuit does not change another's draws.
Per item: the worst margin observed in each case (corner "sample N"), and the share
of samples in which the item fails in at least one of its cases. Newton-Raphson
starts each sample's case at that case's nominal operating point (a warm start, see
docs/analysis.md).
"""

from __future__ import annotations

import math
import zlib
from dataclasses import dataclass, field, replace
from typing import Callable, Sequence

import numpy as np

from checker.analysis.blocks import solve_each
from checker.analysis.sensitivity import Key, Target, outcomes_at
from checker.analysis.tolerances import Tolerance, perturbed, toleranced
from checker.design import Design, Netlist, OperatingPoint
from checker.findings import Outcome
from checker.solver import Cache

PROGRESS_STEPS = 10  # report progress every tenth of the samples


@dataclass
class Tally:
    """Per target: the worst outcome seen in each case (and stable state), and in how many samples it failed."""

    worst: dict[Key, dict[tuple[str, str], Outcome]] = field(default_factory=dict)
    failed: dict[Key, int] = field(default_factory=dict)

    def add(self, sample: dict[tuple[str, str], dict[Key, Outcome]]) -> None:
        """One sample's outcomes, (case, state) -> target -> outcome."""
        failing = set()
        for case, outcomes in sample.items():
            for key, outcome in outcomes.items():
                seen = self.worst.setdefault(key, {})
                if case not in seen or outcome.margin < seen[case].margin:
                    seen[case] = outcome
                if not outcome.holds:
                    failing.add(key)
        for key in failing:
            self.failed[key] = self.failed.get(key, 0) + 1


def part_names(design: Design) -> tuple[str, ...]:
    """Every part toleranced in at least one case, in order of first appearance."""
    return tuple(dict.fromkeys(t.part for netlist in design.netlists for t in toleranced(netlist)))


def generator(seed: int, circuit: str) -> np.random.Generator:
    """The circuit's own reproducible stream (see the module docstring)."""
    return np.random.default_rng([seed, zlib.crc32(circuit.encode("utf-8"))])


def _board(netlists: Sequence[Netlist], tolerances: Sequence[tuple[Tolerance, ...]],
           draw: dict[str, float]) -> list[Netlist]:
    return [perturbed(netlist, {t.part: draw[t.part] * t.fraction for t in tols})
            for netlist, tols in zip(netlists, tolerances)]


def monte_carlo(design: Design, points: Sequence[OperatingPoint], targets: Sequence[Target],
                samples: int, seed: int, report: Callable[[str], None]) -> tuple[Tally, int]:
    """The tally over `samples` boards and the number of samples actually drawn.

    A circuit without toleranced parts has one board only: its nominal one (every
    sample would be the same), so it is evaluated once and counted as one sample.
    """
    netlists = [point.netlist for point in points]  # a case with several stable states once per state
    active = {n.case: [t for t in targets if t.limit.applies_to(n.case)] for n in netlists}
    tally = Tally()
    names = part_names(design)
    if not names:
        tally.add({state_key(p): outcomes_at(active[p.case], p) for p in points})
        return tally, 1
    tolerances = [toleranced(netlist) for netlist in netlists]
    rng = generator(seed, design.name)
    step = max(samples // PROGRESS_STEPS, 1)
    cache = Cache()  # every sample has the nominal topologies: number nets and find patterns once
    nominal = {state_key(p): outcomes_at(active[p.case], p) for p in points}
    for sample in range(1, samples + 1):
        draw = dict(zip(names, rng.uniform(-1.0, 1.0, len(names))))
        corner = f"sample {sample}"
        solved = solve_each(_board(netlists, tolerances, draw), cache, points)
        tally.add({state_key(point): (outcomes_at(active[point.case], replace(found, state=point.state), corner)
                                      if not isinstance(found, str) else unsolved(nominal[state_key(point)], found, corner))
                   for point, found in zip(points, solved)})
        if sample % step == 0 or sample == samples:
            report(f"{design.name}: {sample} of {samples} samples")
    return tally, samples


def state_key(point: OperatingPoint) -> tuple[str, str]:
    """A case and its stable state: where a Monte Carlo tally keeps its worst outcomes."""
    return point.case, point.state


def unsolved(nominal: dict[Key, Outcome], message: str, corner: str) -> dict[Key, Outcome]:
    """Every limit of a case fails where the circuit has no operating point: value and bound unknown,
    margin −inf, the solver's message kept (docs/analysis.md: a verdict never passes what was not solved)."""
    return {key: Outcome(o.case, math.nan, math.nan, -math.inf, -math.inf, o.unit, o.absolute, holds=False,
                         corner=corner, error=message, state=o.state) for key, o in nominal.items()}


def outcomes_in_order(tally: Tally, key: Key, order: Sequence[tuple[str, str]]) -> list[Outcome]:
    """The worst outcome per case (and stable state) in the order given (`state_key` of each point)."""
    seen = tally.worst.get(key, {})
    return [seen[case] for case in order if case in seen]
