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
from dataclasses import dataclass, field
from typing import Callable, Iterator, Sequence

import numpy as np

from checker.analysis.sensitivity import Key, Target, outcomes_at
from checker.analysis.tolerances import toleranced
from checker.design import Design, OperatingPoint
from checker.findings import Outcome

PROGRESS_STEPS = 10  # report progress every tenth of the samples
RUN = 1000  # samples solved as one batch per (case, state): whole progress steps, at least this many


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
                self.keep(key, case, outcome)
                if not outcome.holds:
                    failing.add(key)
        for key in failing:
            self.failed[key] = self.failed.get(key, 0) + 1

    def keep(self, key: Key, case: tuple[str, str], outcome: Outcome) -> None:
        """`outcome` becomes the worst of (key, case) when its margin is lower (an earlier sample wins a tie)."""
        seen = self.worst.setdefault(key, {})
        if case not in seen or outcome.margin < seen[case].margin:
            seen[case] = outcome


@dataclass
class ChunkTally:
    """What one (case, state) found over a run of samples: per target, its worst outcome there and
    which of the samples it failed in (a bool array); `Tally` merges these in sample order."""

    case: tuple[str, str]
    worst: dict[Key, Outcome]
    fails: dict[Key, np.ndarray]


def part_names(design: Design) -> tuple[str, ...]:
    """Every part toleranced in at least one case, in order of first appearance."""
    return tuple(dict.fromkeys(t.part for netlist in design.netlists for t in toleranced(netlist)))


def generator(seed: int, circuit: str) -> np.random.Generator:
    """The circuit's own reproducible stream (see the module docstring)."""
    return np.random.default_rng([seed, zlib.crc32(circuit.encode("utf-8"))])


def draws(design: Design, samples: int, seed: int) -> np.ndarray:
    """(samples, parts) uniform draws on [−1, 1], one row per board, columns in `part_names` order:
    the same numbers, in the same order, as one draw of every part per sample."""
    return generator(seed, design.name).uniform(-1.0, 1.0, (samples, len(part_names(design))))


def monte_carlo(design: Design, points: Sequence[OperatingPoint], targets: Sequence[Target],
                samples: int, seed: int, report: Callable[[str], None],
                scheduler: str | None = None) -> tuple[Tally, int]:
    """The tally over `samples` boards and the number of samples actually drawn.

    A circuit without toleranced parts has one board only: its nominal one (every
    sample would be the same), so it is evaluated once and counted as one sample.
    Samples are solved in runs (`runs`) of every (case, state) at once (`checker.analysis.samples`);
    with `scheduler` (a Dask scheduler's address) the runs go to it (`checker.analysis.distributed`).
    """
    netlists = [point.netlist for point in points]  # a case with several stable states once per state
    active = {n.case: [t for t in targets if t.limit.applies_to(n.case)] for n in netlists}
    tally = Tally()
    names = part_names(design)
    if not names:
        tally.add({state_key(p): outcomes_at(active[p.case], p) for p in points})
        return tally, 1
    from checker.analysis.samples import Work, evaluate
    table = draws(design, samples, seed)
    jobs = [Work(point, tuple(active[point.case]), table[:, [names.index(t.part) for t in toleranced(point.netlist)]])
            for point in points]
    step = max(samples // PROGRESS_STEPS, 1)
    runs = list(_runs(samples, step))
    reported = 0
    if scheduler:
        from checker.analysis.distributed import evaluate_remote
        results = evaluate_remote(scheduler, jobs, runs)
    else:
        results = ([evaluate(job, first, last)] for first, last in runs for job in jobs)
    run_results = iter(results)
    for first, last in runs:
        fails: dict[Key, np.ndarray] = {}  # this run's samples failing in any case
        for _ in jobs:
            for chunk in next(run_results):
                for key, outcome in chunk.worst.items():
                    tally.keep(key, chunk.case, outcome)
                for key, failing in chunk.fails.items():
                    fails[key] = fails[key] | failing if key in fails else failing
        for key, failing in fails.items():
            if failing.any():
                tally.failed[key] = tally.failed.get(key, 0) + int(failing.sum())
        while reported + step <= last or (last == samples and reported < samples):
            reported = min(reported + step, samples)
            report(f"{design.name}: {reported} of {samples} samples")
    return tally, samples


def _runs(samples: int, step: int) -> Iterator[tuple[int, int]]:
    """Runs of whole progress steps (0-based, end exclusive), each at least RUN samples long."""
    size = step * max(1, -(-RUN // step))
    for first in range(0, samples, size):
        yield first, min(first + size, samples)


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
