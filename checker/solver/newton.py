"""Newton-Raphson on the modified nodal equations of a circuit with nonlinear devices.

The residual is F(x) = A x - s b + f(x) + shunt x_nets: the constant stamps, the
sources scaled by s, the nonlinear devices' currents, and a conductance shunt from
every net to ground. Each step solves J dx = -F with J = A + df/dx + shunt I
(Newton-Raphson as applied to circuits in Vlach & Singhal, "Computer Methods for
Circuit Analysis and Design", 1983, ch. 10 — chapter from memory). The Jacobian's
sparsity pattern is worked out once per topology and layout (kept in `topology`);
each iteration only refills its values with one vectorised pass per device kind.

Plain Newton (s = 1, shunt = 0) starts from a first guess: one linear solve with
every device linearised at 0 V (constant-power loads standing aside). When it does
not settle, continuation methods follow (Najm, "Circuit Simulation", 2010, ch. 5;
Allgower & Georg, "Introduction to Numerical Continuation Methods", 1990/2003,
ch. 1 and 2 on embedding a hard problem in a family solved from an easy member —
chapters from memory), each solution of the family starting Newton on the next:
gain stepping when the circuit has amplifiers (cap every open-loop gain low, where
a positive-feedback loop is benign, and raise the cap geometrically to the declared
gains), shunt stepping (solve with a large shunt, then lower it decade by decade to
zero) and source stepping (raise s from 0 to 1 in adaptive steps). docs/models.md
states the tolerances.

A warm start (tolerance analysis) first runs plain Newton from a given guess, the
solution of a nearby netlist, for at most WARM_ITERATIONS; only when that does not
converge does the sequence above follow. Started inside the basin of the nearby
solution, Newton converges quadratically to the solution on the same branch
(Kantorovich's theorem: Ortega & Rheinboldt, "Iterative Solution of Nonlinear
Equations in Several Variables", 1970, sec. 12.6 — section from memory).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp

from checker.devices import DEVICES
from checker.errors import NoSolutionError
from checker.solver.assembly import System
from checker.solver.linear import Factor
from checker.solver.topology import Pattern

VOLTAGE_FLOOR = 1e-9  # V: smallest voltage step (and branch-equation residual) that still counts
CURRENT_FLOOR = 1e-12  # A: smallest current step (and KCL residual) that still counts
RELATIVE_TOLERANCE = 1e-9
"""Relative tolerance of both tests, against the size of the unknown (step test) or
against the sum of the magnitudes of the currents meeting at the net (residual test).
Converged means every unknown's step and every row's residual are within
floor + RELATIVE_TOLERANCE * scale (the floor is VOLTAGE_FLOOR or CURRENT_FLOOR): the common practice of circuit solvers, set tight because
Newton-Raphson converges quadratically near the solution, so a tight test costs an
iteration or two while keeping margins to limits exact to many digits."""
MAX_ITERATIONS = 100  # plain Newton
WARM_ITERATIONS = 20  # plain Newton from a warm start, before falling back to the first guess
STEP_ITERATIONS = 40  # each continuation step
MAX_STEPS = 200  # continuation steps per method
CONTINUATION_BUDGET = 1000  # Newton iterations per continuation method, so that a hopeless case ends in bounded time
DIVERGED = 1e9  # V or A: an iterate beyond this has run away
HALVINGS = 20  # damping: a step whose end cannot be evaluated is halved at most this often
SHUNT_START = -2.0  # log10 S: shunt stepping starts at 10 mS from every net to ground
SHUNT_END = -12.0  # log10 S: the last nonzero shunt before zero
GAIN_START = -1.0  # log10 V/V: gain stepping starts with every open-loop gain capped at 0.1
MIN_STEP = 1e-3  # smallest continuation step: decades of shunt or gain, or fraction of full sources

STRATEGIES = {
    "newton": "plain Newton iteration from a first guess",
    "gain stepping": "raising the amplifiers' gain step by step",
    "shunt stepping": "raising a small conductance to ground on every net and lowering it step by step",
    "source stepping": "ramping all sources up from zero",
}


class Equations:
    """F(x) and J(x) of one system; the Jacobian's sparsity pattern is the topology's (see `topology`)."""

    def __init__(self, system: System):
        self.system = system
        self.size, self.nodes = system.size, system.n_nodes
        self.devices = system.nonlinear_devices
        self.netlist = system.netlist
        self.constant = system.matrix.tocoo()
        self.magnitude = abs(system.matrix)
        self.pattern: Pattern | None = None  # fixed by the first linearisation: device layouts do not depend on x

    def linearise(self, x: np.ndarray, shunt: float = 0.0, scale: float = 1.0, first: bool = False,
                  gain_cap: float = math.inf) -> tuple[np.ndarray, sp.csc_matrix, np.ndarray]:
        """Residual F(x), Jacobian J(x) and each row's scale for the residual test, with sources
        scaled by `scale` and amplifiers' gains capped at `gain_cap` (V/V)."""
        x_ext = np.append(x, 0.0)
        residual = self.system.matrix @ x - scale * self.system.rhs
        row_scale = self.magnitude @ np.abs(x) + scale * np.abs(self.system.rhs)
        values, layout = [self.constant.data], [(self.constant.row, self.constant.col)]
        for device in self.devices:
            device.scale, device.gain_cap = scale, gain_cap
            s = device.first_guess(x_ext) if first else device.evaluate(x_ext)
            keep_rows, jacobian = s.rows >= 0, s.jacobian
            keep = (jacobian.rows >= 0) & (jacobian.cols >= 0)
            rows, currents = s.rows[keep_rows], s.currents[keep_rows]
            residual += np.bincount(rows, currents, self.size)
            row_scale += np.bincount(rows, np.abs(currents), self.size)
            values.append(jacobian.values[keep])
            if self.pattern is None:
                layout.append((jacobian.rows[keep], jacobian.cols[keep]))
        residual[:self.nodes] += shunt * x[:self.nodes]
        row_scale[:self.nodes] += shunt * np.abs(x[:self.nodes])
        values.append(np.full(self.nodes, shunt))
        if self.pattern is None:
            diagonal = np.arange(self.nodes)
            layout.append((diagonal, diagonal))
            self.pattern = self.system.topology.pattern(np.concatenate([r for r, _ in layout]),
                                                        np.concatenate([c for _, c in layout]), self.size)
        data = self.pattern.data(np.concatenate(values))
        jacobian = sp.csc_matrix((data, self.pattern.indices, self.pattern.indptr), shape=(self.size, self.size))
        return residual, jacobian, row_scale

    def limit(self, x_new: np.ndarray, x_old: np.ndarray, amplifiers: bool = True) -> np.ndarray:
        """The step's end after every device's limiting; without `amplifiers`, the junctions' only
        (a pseudo-transient step is short enough for an op-amp output, `checker.solver.states`)."""
        new, old = np.append(x_new, 0.0), np.append(x_old, 0.0)
        for device in self.devices:
            if amplifiers or device.kind != "opamp":
                new = device.limit(new, old)
        return new[:-1]

    def tolerances(self) -> tuple[np.ndarray, np.ndarray]:
        """Absolute tolerance per unknown (step) and per row (residual)."""
        is_node = np.arange(self.size) < self.nodes
        return (np.where(is_node, VOLTAGE_FLOOR, CURRENT_FLOOR),
                np.where(is_node, CURRENT_FLOOR, VOLTAGE_FLOOR))

    def converged(self, step: np.ndarray, x: np.ndarray, residual: np.ndarray, row_scale: np.ndarray) -> bool:
        step_tol, residual_tol = self.tolerances()
        return bool(np.all(np.abs(step) <= step_tol + RELATIVE_TOLERANCE * np.abs(x))
                    and np.all(np.abs(residual) <= residual_tol + RELATIVE_TOLERANCE * row_scale))

    def first_guess(self, gain_cap: float = math.inf) -> np.ndarray:
        """Newton's starting point: the linear solve with devices linearised at 0 V, taken as a
        limited step from 0 V like any Newton step (zeros if that solve is singular)."""
        zero = np.zeros(self.size)
        residual, jacobian, _ = self.linearise(zero, first=True, gain_cap=gain_cap)
        try:
            return self.limit(Factor(jacobian, self.netlist, self.system.topology.orderings).solve(-residual), zero)
        except NoSolutionError:
            return zero

    def largest_gain(self) -> float:
        """The largest declared open-loop gain (V/V) of any amplifier; 0 without amplifiers."""
        return float(max((np.max(d.open_loop_gains(), initial=0.0) for d in self.devices), default=0.0))


@dataclass
class Run:
    """Where an attempt ended: its last iterate, iterations spent, and whether it converged."""

    x: np.ndarray
    iterations: int
    converged: bool


def iterate(equations: Equations, x: np.ndarray, shunt: float, scale: float, budget: int,
            gain_cap: float = math.inf) -> Run:
    """Damped Newton-Raphson from `x` at fixed shunt, source scale and gain cap, for at most `budget` iterations.

    Damping: junction limiting shortens steps (see the devices' `limit`), and a
    step whose end gives a non-finite residual is halved, at most HALVINGS times.
    """
    previous, halvings = None, 0
    for iteration in range(1, budget + 1):
        residual, jacobian, row_scale = equations.linearise(x, shunt, scale, gain_cap=gain_cap)
        if not np.all(np.isfinite(residual)):
            if previous is None or halvings >= HALVINGS:
                return Run(x, iteration, False)
            x, halvings = previous + 0.5 * (x - previous), halvings + 1
            continue
        try:
            target = x + Factor(jacobian, equations.netlist, equations.system.topology.orderings).solve(-residual)
        except NoSolutionError:
            return Run(x, iteration, False)
        x_new = equations.limit(target, x)
        if not np.all(np.isfinite(x_new)) or np.max(np.abs(x_new), initial=0.0) > DIVERGED:
            return Run(x, iteration, False)
        if equations.converged(x_new - x, x_new, residual, row_scale):
            return Run(x_new, iteration, True)
        previous, x = x, x_new
    return Run(x, budget, False)


def newton(system: System, guess: np.ndarray | None = None, fallback: bool = True) -> tuple[np.ndarray, int, str]:
    """The unknowns at the operating point, the Newton iterations spent in all, and the strategy that worked.

    With `guess` (unknowns: V for nets, A for branches), plain Newton starts there
    first ("newton" when it converges); the iterations of a warm start that failed
    count in the total. Raises NoSolutionError naming the case, the strategies tried
    and where the equations were furthest from balance, when none converges; with a guess
    and `fallback` false, as soon as the warm start fails.
    """
    equations = Equations(system)
    spent = 0
    if guess is not None:
        warm = iterate(equations, guess, 0.0, 1.0, WARM_ITERATIONS)
        if warm.converged:
            return warm.x, warm.iterations, "newton"
        if not fallback:  # the caller only wants points near the guess (a search's many trial points)
            raise no_convergence(equations, warm.x)
        spent = warm.iterations
    start = equations.first_guess()
    plain = iterate(equations, start, 0.0, 1.0, MAX_ITERATIONS)
    spent += plain.iterations
    if plain.converged:
        return plain.x, spent, "newton"
    for name, method in _continuations(equations, start):
        run = method()
        spent += run.iterations
        if run.converged:
            return run.x, spent, name
    raise no_convergence(equations, plain.x)


def _continuations(equations: Equations, start: np.ndarray) -> list:
    """(name, method) of the continuation methods that apply, in the order they are tried: gain
    stepping first when there are amplifiers, as a positive-feedback loop defeats the others."""
    methods = [("shunt stepping", lambda: shunt_stepping(equations, start)),
               ("source stepping", lambda: source_stepping(equations))]
    if equations.largest_gain() > 0.0:
        methods.insert(0, ("gain stepping", lambda: gain_stepping(equations)))
    return methods


def gain_stepping(equations: Equations) -> Run:
    """Cap every amplifier's open-loop gain at 0.1, where any loop through resistive feedback has a
    loop gain below one and so a single benign solution, then raise the cap geometrically (adaptively)
    until it reaches the largest declared gain, and finally solve with the declared gains.

    Along the way a comparator's output leaves its linear range for the rail its inputs favour
    and stays there, so Newton never has to cross the whole output range in one step."""
    start_cap = 10.0 ** GAIN_START
    run = iterate(equations, equations.first_guess(start_cap), 0.0, 1.0, STEP_ITERATIONS, start_cap)
    if not run.converged:
        return run
    decades = math.log10(equations.largest_gain()) - GAIN_START

    def settings(position: float) -> tuple[float, float, float, bool]:
        last = position >= decades
        return 0.0, 1.0, math.inf if last else 10.0 ** (GAIN_START + position), last
    return walk(equations, run, 1.0, settings)


def shunt_stepping(equations: Equations, start: np.ndarray) -> Run:
    """Solve with 10 mS from every net to ground, lower it a decade at a time (adaptively)
    to 1 pS, then remove it."""
    run = iterate(equations, start, 10.0 ** SHUNT_START, 1.0, STEP_ITERATIONS)
    if not run.converged:
        return run

    def settings(decades: float) -> tuple[float, float, float, bool]:
        exponent = SHUNT_START - decades
        return (0.0, 1.0, math.inf, True) if exponent < SHUNT_END else (10.0 ** exponent, 1.0, math.inf, False)
    return walk(equations, run, 1.0, settings)


def source_stepping(equations: Equations) -> Run:
    """Raise every source and device setpoint from zero, where 0 V everywhere is the solution, to full."""
    return walk(equations, Run(np.zeros(equations.size), 0, True), 0.1,
                 lambda scale: (0.0, min(scale, 1.0), math.inf, scale >= 1.0))


def walk(equations: Equations, run: Run, step: float, settings) -> Run:
    """Move a continuation parameter from 0 in steps; `settings(position)` gives (shunt, source
    scale, gain cap, whether this is the last position). A converged step is kept and the next one made
    half as long again; a failed one is retried a quarter as long, down to MIN_STEP."""
    x, spent, position = run.x, run.iterations, 0.0
    for _ in range(MAX_STEPS):
        if spent >= CONTINUATION_BUDGET:
            break
        shunt, scale, gain_cap, last = settings(position + step)
        attempt = iterate(equations, x, shunt, scale, STEP_ITERATIONS, gain_cap)
        spent += attempt.iterations
        if attempt.converged:
            if last:
                return Run(attempt.x, spent, True)
            x, position, step = attempt.x, position + step, step * 1.5
        else:
            step *= 0.25
            if step < MIN_STEP:
                break
    return Run(x, spent, False)


def no_convergence(equations: Equations, x: np.ndarray) -> NoSolutionError:
    """The error for a circuit none of the strategies could solve, naming where it is most out of balance."""
    netlist = equations.netlist
    residual, _, row_scale = equations.linearise(x)
    _, residual_tol = equations.tolerances()
    badness = np.abs(residual) / (residual_tol + RELATIVE_TOLERANCE * row_scale)
    badness[~np.isfinite(badness)] = np.inf
    tried = "; ".join([STRATEGIES["newton"]] + [STRATEGIES[name] for name, _ in _continuations(equations, x)])
    message = (f"circuit `{netlist.circuit}` has no DC operating point that could be found in case "
               f"`{netlist.case}`: none of these settled: {tried}")
    return NoSolutionError(message, netlist.case_location, (_worst(equations.system, int(np.argmax(badness))),))


def _worst(system: System, row: int) -> str:
    """Plain words for the equation furthest from balance: a net and its parts, or a part's branch."""
    if row < system.n_nodes:
        net = system.nets[row + 1]
        parts = [p.name for p in system.netlist.parts if net in p.nets]
        named = ", ".join(parts[:6]) + (f" and {len(parts) - 6} more" if len(parts) > 6 else "")
        return f"the largest current imbalance is at net `{net}`, which connects {named}"
    for device in system.devices:
        branch = getattr(device, "branch", None)
        if branch is not None and np.any(branch == row):
            part = device.parts[int(np.flatnonzero(branch == row)[0])]
            return f"the largest imbalance is in the output equation of {DEVICES[part.kind].describe(part)}"
    return "the largest imbalance is in a device's branch equation"


def check_models(system: System, x: np.ndarray) -> None:
    """Raise NoSolutionError for the first part whose converged state lies outside its model."""
    x_ext = np.append(x, 0.0)
    for device in system.nonlinear_devices:
        for part, reason in device.trouble(x_ext):
            note = f"in case `{system.netlist.case}` of circuit `{system.netlist.circuit}`"
            raise NoSolutionError(reason, part.location or system.netlist.case_location, (note,))
