"""Every stable operating point of a case, found within a bounded effort (docs/models.md, "Several states").

A latch, a Schmitt trigger with its input inside the band, or a supply feeding a
constant-power load can have several operating points; the board rests in a stable one,
and a limit must hold in each. Newton-Raphson finds one point, maybe the unstable balance
between two states. From the points found so far the search starts Newton again:
- on both sides of every unstable point, along the mode that grows there;
- with each op-amp output set to each of its rails;
- at the end of continuations of the sources up from zero and down from above;
- from the first guess with every point found so far deflated: Newton on
  F(x) * prod_i (1/|x - r_i|^p + sigma), which keeps F's other roots but pushes the
  iteration away from the known ones (Farrell, Birkisson & Funke, "Deflation techniques
  for finding distinct solutions of nonlinear partial differential equations", SIAM
  Journal on Scientific Computing 37(4), 2015 — from memory). The deflated step is the
  Newton step scaled by 1 / (1 - grad(log m) . dx), so it costs no extra factorisation.
It stops when a round of starts brings no new point, or after MAX_RUNS Newton runs.

A circuit is searched only when its first point is unstable, or when it could have
several points (`may_have_several`): a feedback loop through a part with gain, or a
constant-power load. A network of positive resistors, sources and junctions has one
operating point (a strictly monotone network; Duffin, "Nonlinear networks IIa",
Bulletin of the AMS 53, 1947 — from memory).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Iterable, Iterator, Mapping

import numpy as np
import scipy.linalg
import scipy.sparse as sp

from checker.design import Netlist, Part
from checker.errors import NoSolutionError
from checker.solver.assembly import System
from checker.solver.linear import Factor
from checker.solver.newton import (
    MAX_ITERATIONS, RELATIVE_TOLERANCE, Equations, Run, iterate, source_stepping, walk,
)
from checker.solver.stability import DENSE_LIMIT, GROWTH, Stability, assess, branch_flips, charge_masses

MAX_RUNS = 24  # Newton runs per case spent looking for more operating points
DEFLATION_POWER = 2.0
DEFLATION_SHIFT = 1.0
SAME_VOLTS = 1e-6  # V, plus this share of the voltage: two points closer than this on every net are one
STEP_OFF = 0.05  # of the largest net voltage (at least 1 V): how far a restart steps off an unstable point
ABOVE = 2.0  # sources scaled down from twice their values
SETTLE_ITERATIONS = 150  # pseudo-time steps of one settling run
DEFLATED_ITERATIONS = 40  # Newton iterations of one deflated run
START_DAMPING = 10.0  # times the fastest mode's rate: the first pseudo-time steps are short against it
DECAY = 0.7  # the pseudo-time damping shrinks by this factor at every step
NEWTON_EVERY = 10  # pseudo-time steps between tries of plain Newton where no mode grows
SETTLE_RESIDUAL = 1e3  # times the convergence test's residual tolerance: close enough to finish with Newton
# (control pins, output pins) of the parts with gain, for the feedback test of `may_have_several`.
GAIN_PINS = {
    "bjt": (("b", "e"), ("c", "e")),
    "mosfet": (("g", "s"), ("d", "s")),
    "opamp": (("plus", "minus"), ("out",)),
    "regulator": (("in",), ("out",)),
    "converter": (("in",), ("out",)),
}


@dataclass
class Point:
    """One operating point the search found, with its stability."""

    x: np.ndarray
    stability: Stability


@dataclass
class Search:
    """The operating points of one case found so far, and the Newton runs spent."""

    equations: Equations
    points: list[Point] = field(default_factory=list)
    runs: int = 0

    @property
    def stable(self) -> list[Point]:
        return [point for point in self.points if point.stability.stable]

    def add(self, x: np.ndarray) -> bool:
        """Keep `x` when it is new; True if it was."""
        nodes = self.equations.nodes
        for point in self.points:
            if np.all(np.abs(point.x[:nodes] - x[:nodes]) <= SAME_VOLTS * (1.0 + np.abs(x[:nodes]))):
                return False
        self.points.append(Point(x, assess_at(self.equations, x)))
        return True

    def spend(self) -> bool:
        """Count one Newton run; False when the budget is gone."""
        if self.runs >= MAX_RUNS:
            return False
        self.runs += 1
        return True


def may_have_several(netlist: Netlist) -> bool:
    """Whether the circuit could have several operating points: it has a constant-power load or a
    converter input not held by sources (a falling characteristic), or a part with gain whose
    output can reach its own input.

    Several operating points need positive feedback, and a circuit of transistors, resistors and
    sources with no feedback loop through its transistors has one (Nielsen & Willson, "A fundamental
    result concerning the topology of transistor circuits with multiple equilibria", Proceedings of
    the IEEE 68(2), 1980 — from memory). Here a loop is looked for on the nets: nets joined by
    two-terminal parts influence each other both ways; a part with gain carries influence from its
    control pins to its output pins; a net held by voltage sources from ground carries none. Any loop
    counts, negative feedback included, which only costs a search that finds nothing more."""
    parts = netlist.parts
    group = _joined_nets(netlist)
    if any(_falls(part, group) for part in parts):
        return True
    arrows: dict[int, set[int]] = {}
    loops = []
    for part in parts:
        pins = GAIN_PINS.get(part.kind)
        if pins is None:
            continue
        controls = {group[part.net(pin)] for pin in pins[0]} - {None}
        outputs = {group[part.net(pin)] for pin in pins[1]} - {None}
        for control in controls:
            arrows.setdefault(control, set()).update(outputs)
        loops.append((controls, outputs))
    return any(_reaches(arrows, outputs, controls) for controls, outputs in loops)


def _falls(part: Part, group: dict[str, int | None]) -> bool:
    """A constant-power load, or a converter's input (which draws constant power), on nets not all
    held by sources: its current falls as its voltage rises, so a source resistance can meet it twice."""
    if part.kind == "load" and part.value_unit == "W":
        pins = part.nets
    elif part.kind == "converter":
        pins = (part.net("in"), part.net("gnd"))
    else:
        return False
    return any(group[net] is not None for net in pins)


def _joined_nets(netlist: Netlist) -> dict[str, int | None]:
    """Each net's group of nets joined by two-terminal parts, or None for a net voltage sources hold
    against ground (it passes no influence on)."""
    parts = netlist.parts
    held = {netlist.ground}
    grew = True
    while grew:
        grew = False
        for part in parts:
            if part.kind == "source" and part.value_unit == "V" and len(held & set(part.nets)) == 1:
                held |= set(part.nets)
                grew = True
    leader = {net: net for net in netlist.nets}

    def find(net: str) -> str:
        while leader[net] != net:
            leader[net] = leader[leader[net]]
            net = leader[net]
        return net
    for part in parts:
        if part.two_terminal and part.kind != "capacitor" and not held & set(part.nets):
            a, b = part.nets
            leader[find(a)] = find(b)
    numbers: dict[str, int] = {}
    return {net: None if net in held else numbers.setdefault(find(net), len(numbers)) for net in netlist.nets}


def _reaches(arrows: dict[int, set[int]], starts: set[int], goals: set[int]) -> bool:
    seen, todo = set(starts), list(starts)
    while todo:
        here = todo.pop()
        if here in goals:
            return True
        for there in arrows.get(here, ()):
            if there not in seen:
                seen.add(there)
                todo.append(there)
    return False


def search(system: System, x: np.ndarray, seeds: Iterable[np.ndarray] = ()) -> Search:
    """Every operating point found from the solution `x` and the given `seeds`, each with its stability."""
    found = Search(Equations(system))
    found.add(x)
    if not may_have_several(system.netlist) and found.points[0].stability.stable:
        return found
    for seed in [*seeds, *_continued(found.equations), *_rails(found)]:
        _settle_from(found, seed)
    searched = 0
    while searched < len(found.points) and found.runs < MAX_RUNS:
        fresh, searched = found.points[searched:], len(found.points)
        for start in _off_unstable(fresh, found.equations.nodes):
            _settle_from(found, start)
        _deflate(found)
    return found


def assess_at(equations: Equations, x: np.ndarray) -> Stability:
    """The stability of the point `x` (`stability.assess`, with the fold test)."""
    return assess(equations.system, equations.linearise(x)[1], x, lambda y: equations.linearise(y)[0])


def settled(equations: Equations, x: np.ndarray) -> tuple[Stability, list[np.ndarray]]:
    """The stability of `x` and the stable points reached from it: `[x]` itself when it is stable,
    otherwise those reached by settling from both sides of it along its growing mode (none when
    neither side reaches one)."""
    stability = assess_at(equations, x)
    if stability.stable:
        return stability, [x]
    found = Search(equations)
    for start in _off_unstable([Point(x, stability)], equations.nodes):
        _settle_from(found, start)
    return stability, [point.x for point in found.stable]


def _settle_from(found: Search, start: np.ndarray) -> None:
    if found.spend():
        run = settle(found.equations, start)
        if run.converged:
            found.add(run.x)


def settle(equations: Equations, x: np.ndarray) -> Run:
    """Where the circuit settles from `x`: pseudo-transient continuation, backward-Euler steps of
    M dx/dt = -D F with a unit capacitance on every net and a slow op-amp output (a compensated
    part's dominant pole), then plain Newton once the residual is small (Kelley & Keyes,
    "Convergence analysis of pseudo-transient continuation", SIAM Journal on Numerical Analysis
    35(2), 1998 — from memory). The first steps are short against the fastest mode and the time
    step grows geometrically, but never beyond half the time constant of a mode still growing: a
    backward-Euler step longer than that would pull the iterate back to the unstable point it is
    leaving. So unlike Newton, which is drawn to any root, it follows a disturbance down to a stable
    state, and an op-amp output started at a rail stays there while the circuit around it settles.
    Where no mode grows, plain Newton is tried every NEWTON_EVERY steps, to finish early when it
    reaches a stable point."""
    system = equations.system
    masses = branch_flips(system) * settling_masses(system)
    residual, jacobian, row_scale = equations.linearise(x)
    if not np.all(np.isfinite(residual)):
        return Run(x, 1, False)
    fastest, growth = _modes(jacobian, masses)
    damping = START_DAMPING * fastest
    _, residual_tol = equations.tolerances()
    spent = 0
    for iteration in range(1, SETTLE_ITERATIONS + 1):
        near = np.all(np.abs(residual) <= SETTLE_RESIDUAL * (residual_tol + RELATIVE_TOLERANCE * row_scale))
        if near or (not growth and iteration % NEWTON_EVERY == 1):
            run = iterate(equations, x, 0.0, 1.0, MAX_ITERATIONS)
            spent += run.iterations
            if near or (run.converged and _stable(equations, run.x)):
                return Run(run.x, iteration + spent, run.converged)
        try:
            step = Factor(jacobian + sp.diags(damping * masses), equations.netlist).solve(-residual)
        except NoSolutionError:
            return Run(x, iteration, False)
        x_new = equations.limit(x + step, x, amplifiers=False)
        new_residual, new_jacobian, new_scale = equations.linearise(x_new)
        if not (np.all(np.isfinite(new_residual)) and np.all(np.isfinite(x_new))):
            damping *= 10.0
            continue
        x, residual, jacobian, row_scale = x_new, new_residual, new_jacobian, new_scale
        if growth:
            growth = _modes(jacobian, masses)[1]
        damping = max(damping * DECAY, 2.0 * growth)
    return Run(x, SETTLE_ITERATIONS + spent, False)


def _stable(equations: Equations, x: np.ndarray) -> bool:
    """Whether a point Newton reached early is stable: Newton is drawn to any root, the unstable one
    the settling run started beside included."""
    return assess(equations.system, equations.linearise(x)[1]).stable


def settling_masses(system: System) -> np.ndarray:
    """Pseudo-time masses: 1 per net and per op-amp output branch, 0 for the other branches."""
    masses = charge_masses(system)
    for device in system.devices:
        if device.kind == "opamp":
            masses[device.branch] = 1.0
    return masses


def _modes(jacobian: sp.spmatrix, masses: np.ndarray) -> tuple[float, float]:
    """The rate of the fastest mode of M dx/dt = -D J x and that of the fastest-growing one (0: none
    grows), both in 1/s. A small system computes every finite eigenvalue; a large one estimates the
    fastest from the row sums of |J| over the rows that carry a mass, and reports no growth."""
    if jacobian.shape[0] <= DENSE_LIMIT:
        values = scipy.linalg.eigvals(-jacobian.toarray(), np.diag(masses))
        finite = values[np.isfinite(values)]
        if finite.size:
            fastest = float(np.max(np.abs(finite)))
            growth = float(np.max(finite.real))
            return fastest or 1.0, growth if growth > GROWTH * fastest else 0.0
    rows = np.asarray(abs(jacobian).sum(axis=1)).ravel()[masses != 0]
    return float(np.max(rows, initial=0.0)) or 1.0, 0.0


def _off_unstable(points: list[Point], nodes: int) -> Iterator[np.ndarray]:
    """Starts on both sides of each unstable point, along the mode that grows there."""
    for point in points:
        direction = point.stability.direction
        if not point.stability.stable and direction is not None and np.any(direction[:nodes]):
            step = STEP_OFF * max(1.0, float(np.max(np.abs(point.x[:nodes]), initial=0.0)))
            unit = direction / np.max(np.abs(direction[:nodes]))
            yield point.x + step * unit
            yield point.x - step * unit


def _continued(equations: Equations) -> Iterator[np.ndarray]:
    """The ends of the source continuations: up from zero, and down from above."""
    for run in (source_stepping(equations), _from_above(equations)):
        if run.converged:
            yield run.x


def _rails(found: Search) -> Iterator[np.ndarray]:
    """Each op-amp's output set to each of its rails, from the first point found."""
    base = found.points[0].x
    x_ext = np.append(base, 0.0)
    for device in found.equations.devices:
        if device.kind != "opamp":
            continue
        for plus, minus, out, hi, lo in device.nodes:
            if out < 0:
                continue
            for rail in (hi, lo):
                start = base.copy()
                start[out] = x_ext[rail]
                yield start


def _from_above(equations: Equations) -> Run:
    """Solve with every source at ABOVE times its value, then walk the sources down to their values."""
    run = iterate(equations, equations.first_guess(), 0.0, ABOVE, MAX_ITERATIONS)
    if not run.converged:
        return run
    return walk(equations, run, 0.25, lambda position: (0.0, max(ABOVE - position, 1.0), math.inf,
                                                          ABOVE - position <= 1.0))


def _deflate(found: Search) -> None:
    """Deflated Newton from the first guess and from the midpoints between stable points, until a
    run brings nothing new (see the module docstring)."""
    equations = found.equations
    starts = [equations.first_guess()]
    stable = found.stable
    starts += [0.5 * (a.x + b.x) for i, a in enumerate(stable) for b in stable[i + 1:]]
    for start in starts:
        while found.spend():
            run = _deflated(equations, start, [point.x for point in found.points])
            if not (run.converged and found.add(run.x)):
                break


def _deflated(equations: Equations, x: np.ndarray, roots: list[np.ndarray]) -> Run:
    """Newton on the deflated residual m(x) F(x): each step is the Newton step of F scaled by
    1 / (1 - grad(log m) . step), with m = prod_i (|x - r_i|^-p + sigma) over the net voltages."""
    nodes = equations.nodes
    for iteration in range(1, DEFLATED_ITERATIONS + 1):
        residual, jacobian, row_scale = equations.linearise(x)
        if not np.all(np.isfinite(residual)):
            return Run(x, iteration, False)
        try:
            step = Factor(jacobian, equations.netlist).solve(-residual)
        except NoSolutionError:
            return Run(x, iteration, False)
        gradient = np.zeros_like(x)
        for root in roots:
            gap = x[:nodes] - root[:nodes]
            distance = float(np.linalg.norm(gap))
            if distance == 0.0:
                return Run(x, iteration, False)
            inverse = distance ** -DEFLATION_POWER
            gradient[:nodes] += -DEFLATION_POWER * inverse / distance ** 2 * gap / (inverse + DEFLATION_SHIFT)
        denominator = 1.0 - float(gradient @ step)
        if denominator == 0.0 or not math.isfinite(denominator):
            return Run(x, iteration, False)
        x_new = equations.limit(x + step / denominator, x)
        if not np.all(np.isfinite(x_new)):
            return Run(x, iteration, False)
        if equations.converged(x_new - x, x_new, residual, row_scale):
            return Run(x_new, iteration, True)
        x = x_new
    return Run(x, DEFLATED_ITERATIONS, False)


def seeded(system: System, base: np.ndarray, starts: Mapping[str, float]) -> np.ndarray:
    """`base` with the nets named in `starts` set to their starting voltages (a case's `starts at`)."""
    x = base.copy()
    index = {net: k for k, net in enumerate(system.nets[1:])}
    for net, volts in starts.items():
        if net in index:
            x[index[net]] = volts
    return x
