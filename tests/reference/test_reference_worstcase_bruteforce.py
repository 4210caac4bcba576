"""Worst-case analysis against brute force: every vertex of the tolerance box, plus a bounded optimiser.

The reference never touches `checker/analysis/`:
- Linear circuits are solved by a dense modified nodal analysis written below (KCL at every net,
  one extra row and unknown per voltage source: Ho, Ruehli & Brennan, "The modified nodal approach
  to network analysis", IEEE Trans. Circuits and Systems, 1975; from memory), at every vertex of the
  box (itertools.product over ±tol) and from several starts of scipy.optimize.minimize (L-BFGS-B with
  bounds; Byrd, Lu, Nocedal & Zhu, SIAM J. Sci. Comput., 1995; from memory).
- Nonlinear circuits use nodegate's *solver* (checker.solver) on netlists perturbed here with
  dataclasses.replace, at every vertex and from several optimiser starts.
- Margins follow RULES.md ("Margins", restated in docs/limits.md), implemented here for each form:
  `a <= b` -> b - a; `a >= b` -> a - b; `x in lo .. hi` -> min(x - lo, hi - x); `and` -> min,
  `or` -> max, `not` flips the sign.

Why vertices prove the worst case of a voltage or current in a linear circuit (derived here): by
Cramer's rule every net voltage and branch current is N/D, where N and D are affine in any single
element value (a conductance or a source value; for a resistance R multiply both by R). So each is
linear-fractional, hence monotone, in each value separately, and so is any difference of two of them
(same D). A function monotone in each coordinate of a box takes its minimum and maximum at vertices.
That is not so for powers (V^2/R peaks inside the box: maximum power transfer), nor for the minimum
of `or`, `abs(x) >= b`, `max(x, y) >= b` or `not (x in ..)`, which may lie where x crosses a level.

The reference reports margins at points it really evaluated, so it can only be too high (a point
missed), never too low: nodegate reporting a margin above it means nodegate flatters.
"""

from __future__ import annotations

import dataclasses
import datetime
import itertools
from dataclasses import dataclass
from typing import Callable, Sequence

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy import optimize

from checker.analysis import analyse  # the engine under test; never used for a reference value
from checker.design import Netlist, OperatingPoint
from checker.findings import Analysis, Finding
from checker.language import parse_design
from checker.limits import compile_limits, load_limit_text
from checker.solver import Cache, solve, solve_cases

TODAY = datetime.date(2030, 1, 1)
RESOLUTION = 1e-9  # of the quantity's scale: how far nodegate may differ from an exact reference


# ---------------------------------------------------------------------------------------------
# The reference solver: dense MNA over a batch of value vectors
# ---------------------------------------------------------------------------------------------

@dataclass(frozen=True)
class Element:
    """One linear part: kind "R" (ohm), "V" (volts, v(a) - v(b)) or "I" (amps from a to b through it)."""

    name: str
    kind: str
    a: str
    b: str
    value: float
    tol: float = 0.0


@dataclass(frozen=True)
class Solution:
    """Net voltages (m, nets) and element voltage/current/power (m, elements) for m value vectors."""

    nets: dict[str, np.ndarray]
    voltage: dict[str, np.ndarray]
    current: dict[str, np.ndarray]
    power: dict[str, np.ndarray]


def mna(ground: str, elements: Sequence[Element], values: np.ndarray) -> Solution:
    """Solve the circuit for each row of `values` (m, len(elements)), element values in SI."""
    values = np.atleast_2d(values)
    m = values.shape[0]
    nets = [ground] + sorted({n for e in elements for n in (e.a, e.b)} - {ground})
    index = {net: i - 1 for i, net in enumerate(nets)}  # ground is -1: no row
    sources = [k for k, e in enumerate(elements) if e.kind == "V"]
    size = len(nets) - 1 + len(sources)
    matrix, rhs = np.zeros((m, size, size)), np.zeros((m, size))
    for k, e in enumerate(elements):
        a, b, x = index[e.a], index[e.b], values[:, k]
        if e.kind == "R":  # conductance stamp
            for p, q, sign in ((a, a, 1), (b, b, 1), (a, b, -1), (b, a, -1)):
                if p >= 0 and q >= 0:
                    matrix[:, p, q] += sign / x
        elif e.kind == "I":  # current x leaves net a through the part and enters net b
            if a >= 0:
                rhs[:, a] -= x
            if b >= 0:
                rhs[:, b] += x
        else:  # voltage source: branch current j (a -> b through it) is one more unknown
            j = len(nets) - 1 + sources.index(k)
            for p, sign in ((a, 1), (b, -1)):
                if p >= 0:
                    matrix[:, p, j] += sign
                    matrix[:, j, p] += sign
            rhs[:, j] = x
    x = np.linalg.solve(matrix, rhs[..., None])[..., 0]
    v = {net: (x[:, index[net]] if index[net] >= 0 else np.zeros(m)) for net in nets}
    voltage, current = {}, {}
    for k, e in enumerate(elements):
        voltage[e.name] = v[e.a] - v[e.b]
        if e.kind == "V":
            current[e.name] = x[:, len(nets) - 1 + sources.index(k)]
        else:
            current[e.name] = voltage[e.name] / values[:, k] if e.kind == "R" else values[:, k]
    power = {name: voltage[name] * current[name] for name in voltage}
    return Solution(v, voltage, current, power)


def values_at(elements: Sequence[Element], deviations: np.ndarray) -> np.ndarray:
    """Element values (m, n) for deviations (m, t) of the toleranced elements, in element order."""
    deviations = np.atleast_2d(deviations)
    values = np.tile([e.value for e in elements], (deviations.shape[0], 1))
    for column, k in enumerate(k for k, e in enumerate(elements) if e.tol > 0):
        values[:, k] *= 1.0 + deviations[:, column]
    return values


def vertices(tols: Sequence[float]) -> np.ndarray:
    """Every vertex of the box, (2^t, t)."""
    return np.array(list(itertools.product(*[(-t, t) for t in tols])), dtype=float).reshape(-1, len(tols))


# ---------------------------------------------------------------------------------------------
# Limits: the text nodegate reads and the margin computed from the same tree, by the rules
# ---------------------------------------------------------------------------------------------

Lookup = Callable[[str, str], np.ndarray]  # (measure, name) -> values over the batch


def number(value: float, unit: str) -> str:
    return f"{value:.12g} {unit}"


def exact(value: float) -> float:
    """The float nodegate reads back from `number`."""
    return float(f"{value:.12g}")


@dataclass(frozen=True)
class Leaf:
    measure: str  # voltage | current | power
    name: str

    def text(self) -> str:
        return f"{self.measure}({self.name})"

    def value(self, lookup: Lookup) -> np.ndarray:
        return lookup(self.measure, self.name)

    def monotone(self) -> bool:
        return self.measure != "power"

    def magnitudes(self, lookup: Lookup) -> list[np.ndarray]:
        return [np.abs(self.value(lookup))]


@dataclass(frozen=True)
class Const:
    amount: float
    unit: str

    def text(self) -> str:
        return number(self.amount, self.unit)

    def value(self, lookup: Lookup) -> float:
        return self.amount

    def monotone(self) -> bool:
        return True

    def magnitudes(self, lookup: Lookup) -> list[np.ndarray]:
        return [np.abs(np.asarray(self.amount))]


@dataclass(frozen=True)
class Sum:
    left: object
    right: object
    sign: int  # +1 or -1

    def text(self) -> str:
        return f"{self.left.text()} {'+' if self.sign > 0 else '-'} {self.right.text()}"

    def value(self, lookup: Lookup) -> np.ndarray:
        return self.left.value(lookup) + self.sign * self.right.value(lookup)

    def monotone(self) -> bool:
        return self.left.monotone() and self.right.monotone()

    def magnitudes(self, lookup: Lookup) -> list[np.ndarray]:
        return self.left.magnitudes(lookup) + self.right.magnitudes(lookup) + [np.abs(self.value(lookup))]


@dataclass(frozen=True)
class Call:
    function: str  # abs | min | max
    args: tuple

    def text(self) -> str:
        return f"{self.function}({', '.join(a.text() for a in self.args)})"

    def value(self, lookup: Lookup) -> np.ndarray:
        values = [a.value(lookup) for a in self.args]
        if self.function == "abs":
            return np.abs(values[0])
        return (np.minimum if self.function == "min" else np.maximum)(values[0], values[1])

    def monotone(self) -> bool:
        return all(a.monotone() for a in self.args)

    def magnitudes(self, lookup: Lookup) -> list[np.ndarray]:
        return [m for a in self.args for m in a.magnitudes(lookup)]


@dataclass(frozen=True)
class Compare:
    expr: object
    op: str  # <= | >=
    bound: float
    unit: str

    def text(self) -> str:
        return f"{self.expr.text()} {self.op} {number(self.bound, self.unit)}"

    def margin(self, lookup: Lookup) -> np.ndarray:
        x = self.expr.value(lookup)
        return exact(self.bound) - x if self.op == "<=" else x - exact(self.bound)  # RULES: b - a, a - b

    def monotone(self) -> bool:
        return self.expr.monotone()

    def magnitudes(self, lookup: Lookup) -> list[np.ndarray]:
        return self.expr.magnitudes(lookup) + [np.abs(np.asarray(exact(self.bound)))]


@dataclass(frozen=True)
class Within:
    expr: object
    low: float
    high: float
    unit: str

    def text(self) -> str:
        return f"{self.expr.text()} in {number(self.low, self.unit)} .. {number(self.high, self.unit)}"

    def margin(self, lookup: Lookup) -> np.ndarray:
        x = self.expr.value(lookup)
        return np.minimum(x - exact(self.low), exact(self.high) - x)  # RULES: min(x - lo, hi - x)

    def monotone(self) -> bool:
        return self.expr.monotone()

    def magnitudes(self, lookup: Lookup) -> list[np.ndarray]:
        return self.expr.magnitudes(lookup) + [np.abs(np.asarray(exact(self.low))),
                                               np.abs(np.asarray(exact(self.high)))]


@dataclass(frozen=True)
class Join:
    word: str  # and | or
    left: object
    right: object

    def text(self) -> str:
        return f"({self.left.text()}) {self.word} ({self.right.text()})"

    def margin(self, lookup: Lookup) -> np.ndarray:
        pick = np.minimum if self.word == "and" else np.maximum  # RULES: and -> min, or -> max
        return pick(self.left.margin(lookup), self.right.margin(lookup))

    def monotone(self) -> bool:
        return self.left.monotone() and self.right.monotone()

    def magnitudes(self, lookup: Lookup) -> list[np.ndarray]:
        return self.left.magnitudes(lookup) + self.right.magnitudes(lookup)


@dataclass(frozen=True)
class Negation:
    inner: object

    def text(self) -> str:
        return f"not ({self.inner.text()})"

    def margin(self, lookup: Lookup) -> np.ndarray:
        return -self.inner.margin(lookup)  # RULES: not flips the sign

    def monotone(self) -> bool:
        return self.inner.monotone()

    def magnitudes(self, lookup: Lookup) -> list[np.ndarray]:
        return self.inner.magnitudes(lookup)


def scale_of(condition, lookups: Sequence[Lookup]) -> float:
    """max of |value|, |bound| and 1e-12 over every compared quantity, at the given points."""
    return max([1e-12] + [float(np.max(m)) for lookup in lookups for m in condition.magnitudes(lookup)])


def linear_lookup(solution: Solution) -> Lookup:
    def lookup(measure: str, name: str) -> np.ndarray:
        if measure == "voltage":
            return solution.nets[name] if name in solution.nets else solution.voltage[name]
        return getattr(solution, measure)[name]
    return lookup


def op_lookup(points: Sequence[OperatingPoint]) -> Lookup:
    def lookup(measure: str, name: str) -> np.ndarray:
        if measure == "voltage" and name in points[0].nets:
            return np.array([p.nets[name] for p in points])
        return np.array([getattr(p.parts[name], measure) for p in points])
    return lookup


# ---------------------------------------------------------------------------------------------
# The engine under test, and the brute-force minimum
# ---------------------------------------------------------------------------------------------

def engine(circuit: str, conditions: Sequence) -> list[Finding]:
    """nodegate's worst-case findings, one per condition, in order."""
    design = parse_design(circuit, "board.circuit")
    lines = ["limits:"]
    for k, condition in enumerate(conditions):
        lines += [f"  - id: lim-{k}", f"    about: limit {k}", f"    check: {condition.text()}"]
    limit_set = compile_limits([load_limit_text("\n".join(lines) + "\n", "limits.yaml")], [design])
    findings = analyse(limit_set, [design], TODAY, Analysis(mode="worst-case")).findings
    by_id = {f.limit.id: f for f in findings}
    return [by_id[f"lim-{k}"] for k in range(len(conditions))]


def brute_minimum(margins: Callable[[np.ndarray], np.ndarray], tols: Sequence[float], starts: int = 3,
                  polish: int = 2, floor: float = 1e-12) -> tuple[float, np.ndarray, float]:
    """(lowest margin found, its deviations, lowest vertex margin).

    Every vertex; then L-BFGS-B (gradients by forward differences, one batch per gradient) from
    nominal and from the `starts` best vertices pulled a little inside; then a compass search
    (coordinate and a few fixed random directions, step halved down to `floor` when nothing improves:
    Kolda, Lewis & Torczon, SIAM Review, 2003; from memory) polishes the `polish` best ends, because
    L-BFGS-B stops at kinks (abs, min/max, `or`) that a derivative-free search walks along.
    """
    tols = np.asarray(tols, dtype=float)
    dims = len(tols)
    corners = vertices(tols)
    at_corners = margins(corners)
    best = int(np.argmin(at_corners))
    found, where, vertex_min = float(at_corners[best]), corners[best], float(at_corners[best])

    def batch(us: np.ndarray) -> np.ndarray:  # u in [-1, 1]^t, deviations u * tol
        return margins(np.clip(us, -1.0, 1.0) * tols)

    def value_and_gradient(u: np.ndarray) -> tuple[float, np.ndarray]:
        steps = np.where(u + 1e-7 > 1.0, -1e-7, 1e-7)  # forward differences, backward at the upper bound
        values = batch(np.vstack([u, u + np.diag(steps)]))
        return float(values[0]), (values[1:] - values[0]) / steps

    initial = [np.zeros(dims)] + [0.9 * corners[i] / tols for i in np.argsort(at_corners, kind="stable")[:starts]]
    ends = []
    for u0 in initial:
        result = optimize.minimize(value_and_gradient, u0, jac=True, method="L-BFGS-B",
                                   bounds=[(-1.0, 1.0)] * dims, options={"maxiter": 200})
        u = np.clip(result.x, -1.0, 1.0)
        ends.append((float(batch(u[None, :])[0]), tuple(u)))
    directions = np.vstack([np.eye(dims), np.random.default_rng(7).normal(size=(2 * dims, dims))])
    directions = np.vstack([directions, -directions])
    for _, u in sorted(ends)[:polish]:
        u, value, step = np.array(u), float(batch(np.array(u)[None, :])[0]), 0.25
        while step > floor:
            trials = np.clip(u + step * directions, -1.0, 1.0)
            values = batch(trials)
            k = int(np.argmin(values))
            if values[k] < value:
                u, value = trials[k], float(values[k])
            else:
                step /= 2
        ends.append((value, tuple(u)))
    value, u = min(ends)
    if value < found:
        found, where = value, np.array(u) * tols
    return found, where, vertex_min


def point_deviations(finding: Finding, names: Sequence[str], tols: Sequence[float]) -> np.ndarray:
    """The reported point as deviations in our order; asserts it names every toleranced value once, inside the box."""
    point = dict(finding.worst.point)
    assert len(point) == len(finding.worst.point), f"a value named twice in {finding.worst.point}"
    assert set(point) == set(names), f"point {finding.worst.point} should name exactly {sorted(names)}"
    deviations = np.array([point[name] for name in names])
    assert np.all(np.abs(deviations) <= np.asarray(tols) * (1 + 1e-12)), f"point outside the box: {point}"
    return deviations


def describe(circuit: str, condition, finding: Finding, reference: float, where: np.ndarray, names) -> str:
    worst = finding.worst
    return (f"\n{circuit}\nlimit: {condition.text()}\nnodegate: margin {worst.margin!r} method {worst.method!r} "
            f"proved {worst.proved} point {worst.point} corner {worst.corner!r}\nreference: margin {reference!r} at "
            f"{dict(zip(names, where.tolist()))}")


# ---------------------------------------------------------------------------------------------
# Hypothesis: small linear circuits in which every net reaches ground through resistors
# ---------------------------------------------------------------------------------------------

RESISTANCES = [100.0, 150.0, 220.0, 330.0, 470.0, 680.0, 1e3, 1.5e3, 2.2e3, 3.3e3, 4.7e3, 6.8e3, 10e3]
VOLTAGES = [1.8, 3.3, 5.0, 9.0, 12.0, 24.0]
CURRENTS = [1e-4, 2e-4, 5e-4, 1e-3, 2e-3]


@st.composite
def linear_circuits(draw):
    """(circuit text, elements): a resistor tree from ground (every net has a DC path to ground),
    extra resistors, 1-2 voltage sources forming no loop, 0-2 current sources; 3-8 values toleranced."""
    count = draw(st.integers(2, 5))
    nets = ["gnd"] + [f"n{k}" for k in range(1, count + 1)]
    links = [("R", nets[k], nets[draw(st.integers(0, k - 1))]) for k in range(1, count + 1)]
    for _ in range(draw(st.integers(0, 3))):
        a, b = draw(st.lists(st.sampled_from(nets), min_size=2, max_size=2, unique=True))
        links.append(("R", a, b))
    parent = {net: net for net in nets}  # union-find over voltage-source edges: no loop of sources

    def root(net: str) -> str:
        while parent[net] != net:
            net = parent[net]
        return net
    for _ in range(draw(st.integers(1, 2))):
        a, b = draw(st.lists(st.sampled_from(nets[1:] + ["gnd"]), min_size=2, max_size=2, unique=True))
        if root(a) != root(b):
            parent[root(a)] = root(b)
            links.append(("V", a, b))
    if not any(kind == "V" for kind, _, _ in links):
        links.append(("V", nets[1], "gnd"))  # n1 and gnd are never joined yet by a source here
    for _ in range(draw(st.integers(0, 2))):
        a, b = draw(st.lists(st.sampled_from(nets), min_size=2, max_size=2, unique=True))
        links.append(("I", a, b))
    counters: dict[str, int] = {}
    elements = []
    for kind, a, b in links:
        counters[kind] = counters.get(kind, 0) + 1
        name = {"R": "R", "V": "VS", "I": "IS"}[kind] + str(counters[kind])
        value = draw(st.sampled_from({"R": RESISTANCES, "V": VOLTAGES, "I": CURRENTS}[kind]))
        elements.append(Element(name, kind, a, b, value))
    chosen = draw(st.lists(st.sampled_from(range(len(elements))), min_size=3,
                           max_size=min(8, len(elements)), unique=True))
    elements = [dataclasses.replace(e, tol=draw(st.integers(1, 10)) / 100) if k in chosen else e
                for k, e in enumerate(elements)]
    return circuit_text(elements), elements


def circuit_text(elements: Sequence[Element]) -> str:
    lines = ['circuit bench "Greenhouse sensor bench (our own scenario)"', "ground gnd"]
    for e in elements:
        kind = "resistor" if e.kind == "R" else "source"
        unit = {"R": "ohm", "V": "V", "I": "A"}[e.kind]
        tol = f", tol = {round(e.tol * 100)}%" if e.tol else ""
        lines.append(f"{kind} {e.name} from {e.a} to {e.b} : {e.value:g} {unit}{tol}")
    return "\n".join(lines) + "\n"


def quantities(elements: Sequence[Element]) -> list[tuple[object, str]]:
    """Every quantity the generated limits may read, with its unit."""
    nets = sorted({n for e in elements for n in (e.a, e.b)} - {"gnd"})
    resistors = [e.name for e in elements if e.kind == "R"]
    found = [(Leaf("voltage", n), "V") for n in nets]
    found += [(Sum(Leaf("voltage", a), Leaf("voltage", b), -1), "V") for a, b in itertools.combinations(nets, 2)]
    found += [(Leaf("voltage", r), "V") for r in resistors] + [(Leaf("current", r), "A") for r in resistors]
    found += [(Leaf("power", r), "W") for r in resistors]
    found += [(Sum(Leaf("power", a), Leaf("power", b), +1), "W") for a, b in itertools.combinations(resistors, 2)]
    return found


def significant(pool: list[tuple[object, str]], lookup: Lookup) -> list[tuple[object, str]]:
    """Leave out quantities that are zero but for rounding (a net tied to ground through an idle part):
    their margins would be decided by the last bits of two solvers, not by the circuit."""
    size = {q.text(): float(np.max(np.abs(q.value(lookup)))) for q, _ in pool}
    largest = {unit: max(size[q.text()] for q, u in pool if u == unit) for _, unit in pool}
    return [(q, unit) for q, unit in pool if size[q.text()] > 1e-6 * largest[unit]]


FORMS = ["<=", ">=", "in-centred", "in-offset", "abs<=", "abs>=", "min>=", "max<=", "max>=", "min<=",
         "and", "or", "not-in", "not<="]


@st.composite
def limits_for(draw, elements: Sequence[Element], nominal_lookup: Lookup, vertex_lookup: Lookup):
    """One condition of a drawn form; its bounds are placed inside and around the quantity's vertex range."""
    pool = significant(quantities(elements), vertex_lookup)
    form = draw(st.sampled_from(FORMS))

    def quantity(unit: str | None = None, besides=None):
        """A quantity (of `unit`), other than `besides` when the pool has another."""
        options = [q for q in pool if (unit is None or q[1] == unit) and q[0] != besides]
        return draw(st.sampled_from(options or [q for q in pool if q[0] == besides]))

    def level(expr, low: float = -0.3, high: float = 1.3) -> float:
        values = np.asarray(expr.value(vertex_lookup), dtype=float)
        lo, hi = float(values.min()), float(values.max())
        return exact(lo + draw(st.floats(low, high)) * (hi - lo or max(abs(lo), 1e-6)))

    def comparison(expr, unit):
        return Compare(expr, draw(st.sampled_from(["<=", ">="])), level(expr), unit)

    expr, unit = quantity()
    if form in ("<=", ">="):
        return Compare(expr, form, level(expr), unit)
    if form in ("in-centred", "not-in"):
        centre = float(np.asarray(expr.value(nominal_lookup)).ravel()[0])
        spread = abs(level(expr) - centre) or 1e-6
        within = Within(expr, exact(centre - spread), exact(centre + spread), unit)
        return Negation(within) if form == "not-in" else within
    if form == "in-offset":
        low, high = sorted([level(expr), level(expr)])
        return Within(expr, low, high if high > low else exact(high + abs(high) * 0.01 + 1e-6), unit)
    if form in ("abs<=", "abs>="):
        shifted = Sum(expr, Const(level(expr, 0.0, 1.0), unit), -1) if draw(st.booleans()) else expr
        return Compare(Call("abs", (shifted,)), form[3:], abs(level(Call("abs", (shifted,)))), unit)
    if form in ("min>=", "max<=", "max>=", "min<="):
        other, _ = quantity(unit, expr)
        call = Call(form[:3], (expr, other))
        return Compare(call, form[3:], level(call), unit)
    if form in ("and", "or"):
        other, _ = quantity(unit, expr)
        return Join(form, comparison(expr, unit), comparison(other, unit))
    return Negation(Compare(expr, "<=", level(expr), unit))  # not<=


@st.composite
def linear_cases(draw):
    text, elements = draw(linear_circuits())
    tols = [e.tol for e in elements if e.tol > 0]
    nominal = linear_lookup(mna("gnd", elements, values_at(elements, np.zeros((1, len(tols))))))
    corners = linear_lookup(mna("gnd", elements, values_at(elements, vertices(tols))))
    conditions = [draw(limits_for(elements, nominal, corners)) for _ in range(draw(st.integers(1, 3)))]
    return text, elements, conditions


@settings(max_examples=60, deadline=None, derandomize=True,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])
@given(linear_cases())
def test_linear_worst_case_never_flatters_and_vertices_are_exact(case):
    text, elements, conditions = case
    names = [e.name for e in elements if e.tol > 0]
    tols = [e.tol for e in elements if e.tol > 0]
    for condition, finding in zip(conditions, engine(text, conditions)):
        def margins(deviations: np.ndarray, condition=condition) -> np.ndarray:
            return condition.margin(linear_lookup(mna("gnd", elements, values_at(elements, deviations))))
        reference, where, _ = brute_minimum(margins, tols)
        worst = finding.worst
        lookups = [linear_lookup(mna("gnd", elements, values_at(elements, d)))
                   for d in (np.zeros(len(tols)), vertices(tols), where)]
        scale = scale_of(condition, lookups)
        message = describe(text, condition, finding, reference, where, names)
        assert not worst.error, message  # a linear circuit of positive resistors always has an operating point
        # never flatters: the worst reported is no better than a point we evaluated
        assert worst.margin <= reference + RESOLUTION * scale, message
        if worst.method == "vertices" and condition.monotone():
            assert worst.margin == pytest.approx(reference, abs=RESOLUTION * scale), message
        # the reported point is real: our own solver reproduces its margin
        at_point = float(margins(point_deviations(finding, names, tols)[None, :])[0])
        assert worst.margin == pytest.approx(at_point, abs=RESOLUTION * scale), message
        if abs(worst.margin) > RESOLUTION * scale:  # at 0 the truth is the comparison's (`not` makes it strict)
            assert worst.holds == (worst.margin > 0), message


# ---------------------------------------------------------------------------------------------
# The reference itself against closed forms (these pass without the engine)
# ---------------------------------------------------------------------------------------------

def test_reference_divider_vertices_give_the_closed_form():
    # Voltage divider (Ohm's law and KCL): V = Vin R2 / (R1 + R2); its extremes over +-5 % are at
    # vertices: 10 * 0.95 / (0.95 + 1.05) = 4.75 V and 10 * 1.05 / (1.05 + 0.95) = 5.25 V.
    elements = [Element("VS", "V", "top", "gnd", 10.0), Element("R1", "R", "top", "tap", 1e3, 0.05),
                Element("R2", "R", "tap", "gnd", 1e3, 0.05)]
    tap = mna("gnd", elements, values_at(elements, vertices([0.05, 0.05]))).nets["tap"]
    assert tap.min() == pytest.approx(10 * 0.95 / (0.95 + 1.05), rel=1e-12)
    assert tap.max() == pytest.approx(10 * 1.05 / (1.05 + 0.95), rel=1e-12)
    within = Within(Leaf("voltage", "tap"), 4.9, 5.1, "V")
    found, _, vertex_min = brute_minimum(
        lambda d: within.margin(linear_lookup(mna("gnd", elements, values_at(elements, d)))), [0.05, 0.05])
    assert found == pytest.approx(-0.15, abs=1e-12) and vertex_min == pytest.approx(-0.15, abs=1e-12)


def test_reference_bridge_difference_and_its_abs_kink():
    # Wheatstone bridge (each side a divider, Ohm's law and KCL): Va - Vb is largest with R2, R3 high and
    # R1, R4 low: 10 (1.01 / 2) - 10 (0.99 / 2) = 0.1 V. abs(Va - Vb) >= 1 mV fails inside the box at
    # the balance (Va = Vb), margin -1 mV, which no vertex shows (every vertex is 0 or >= 49.75 mV off).
    elements = [Element("VS", "V", "top", "gnd", 10.0), Element("R1", "R", "top", "a", 1e3, 0.01),
                Element("R2", "R", "a", "gnd", 1e3, 0.01), Element("R3", "R", "top", "b", 1e3, 0.01),
                Element("R4", "R", "b", "gnd", 1e3, 0.01)]
    tols = [0.01] * 4
    difference = Sum(Leaf("voltage", "a"), Leaf("voltage", "b"), -1)
    solution = mna("gnd", elements, values_at(elements, vertices(tols)))
    spread = difference.value(linear_lookup(solution))
    assert spread.max() == pytest.approx(10 * 1.01 / 2 - 10 * 0.99 / 2, rel=1e-12)
    upper = Compare(Call("abs", (difference,)), "<=", 0.02, "V")
    found, _, _ = brute_minimum(
        lambda d: upper.margin(linear_lookup(mna("gnd", elements, values_at(elements, d)))), tols)
    assert found == pytest.approx(0.02 - 0.1, abs=1e-12)
    # A kink the vertices cannot show: shift the bridge off balance by making R4 1.5 % high nominally.
    shifted = [dataclasses.replace(e, value=1015.0) if e.name == "R4" else e for e in elements]
    lower = Compare(Call("abs", (difference,)), ">=", 0.001, "V")

    def margins(d):
        return lower.margin(linear_lookup(mna("gnd", shifted, values_at(shifted, d))))
    found, where, vertex_min = brute_minimum(margins, tols)
    assert vertex_min > 0.001  # every vertex holds ...
    assert found < 0 and found == pytest.approx(-0.001, abs=2e-5)  # ... but a balanced point inside fails


def test_reference_maximum_power_transfer_is_found_inside_the_box():
    # Maximum power transfer theorem (Jacobi's law; any circuits text): P_L = V^2 R_L / (R_S + R_L)^2 is
    # largest at R_L = R_S, P = V^2 / (4 R_S). R_S fixed at 100 ohm, R_L 110 ohm +-20 %: 100 ohm is inside.
    elements = [Element("VS", "V", "src", "gnd", 10.0), Element("RS", "R", "src", "out", 100.0),
                Element("RL", "R", "out", "gnd", 110.0, 0.2)]
    limit = Compare(Leaf("power", "RL"), "<=", 0.0, "W")
    found, where, vertex_min = brute_minimum(
        lambda d: limit.margin(linear_lookup(mna("gnd", elements, values_at(elements, d)))), [0.2])
    assert -found == pytest.approx(10.0 ** 2 / (4 * 100.0), rel=1e-9)
    assert 110 * (1 + where[0]) == pytest.approx(100.0, rel=1e-3)
    assert -vertex_min < -found - 1e-3  # both vertices are clearly below the peak


def test_reference_current_source_and_superposition():
    # Superposition (any circuits text): 1 mA pushed into n1 of R1 = 1 kohm to ground, with VS = 5 V
    # through R2 = 4 kohm to n1: V(n1) = (5 / 4k + 1 mA) / (1/1k + 1/4k) = 1.8 V.
    elements = [Element("IS", "I", "gnd", "n1", 1e-3), Element("R1", "R", "n1", "gnd", 1e3),
                Element("VS", "V", "top", "gnd", 5.0), Element("R2", "R", "top", "n1", 4e3)]
    solution = mna("gnd", elements, values_at(elements, np.zeros((1, 0))))
    assert solution.nets["n1"][0] == pytest.approx((5 / 4e3 + 1e-3) / (1 / 1e3 + 1 / 4e3), rel=1e-12)
    # Tellegen's theorem: absorbed powers sum to zero; the source delivers (negative power).
    assert sum(p[0] for p in solution.power.values()) == pytest.approx(0.0, abs=1e-15)
    assert solution.power["VS"][0] < 0 and solution.current["VS"][0] < 0


def test_reference_agrees_with_nodegate_solver_on_generated_circuits():
    # Cross-check of the two solvers at nominal on a few drawn circuits (not of the analysis).
    @settings(max_examples=15, deadline=None, derandomize=True)
    @given(linear_circuits())
    def agree(case):
        text, elements = case
        op = solve(parse_design(text, "board.circuit").netlists[0])
        ours = mna("gnd", elements, values_at(elements, np.zeros((1, sum(e.tol > 0 for e in elements)))))
        for net, v in op.nets.items():
            assert v == pytest.approx(ours.nets[net][0], rel=1e-9, abs=1e-12)
        for e in elements:
            assert op.parts[e.name].current == pytest.approx(ours.current[e.name][0], rel=1e-9, abs=1e-15)
    agree()


# ---------------------------------------------------------------------------------------------
# Nonlinear circuits: nodegate's solver is the reference at every vertex and optimiser point
# ---------------------------------------------------------------------------------------------

DIODE = """circuit frost "Frost sensor clamp (our own scenario)"
ground gnd
source   VS from vs to gnd : 5 V, tol = 5%
resistor R1 from vs to a   : 470 ohm, tol = 5%
diode    D1 from a to gnd
resistor R2 from a to gnd  : 1 kohm, tol = 2%
"""
LEDS = """circuit bike "Bike light LED string (our own scenario)"
ground gnd
source   VS from vs to gnd : 12 V, tol = 5%
resistor R1 from vs to l1  : 220 ohm, tol = 5%
led      D1 from l1 to l2
led      D2 from l2 to l3
led      D3 from l3 to gnd
"""
REGULATOR = """circuit station "Weather station rail (our own scenario)"
ground gnd
source    VIN from vin to gnd             : 5 V, tol = 10%
regulator U1 (in: vin, out: out, gnd: gnd) : vout = 3.3 V, tol = 3%, dropout = 300 mV
resistor  RL from out to gnd              : 47 ohm, tol = 5%
resistor  RS from vin to out              : 1 kohm, tol = 1%
"""

NONLINEAR = {  # circuit, then (quantity, unit, form) checked on it
    "diode": (DIODE, [(Leaf("current", "D1"), "A", "<="), (Leaf("voltage", "a"), "V", "abs>="),
                      (Leaf("power", "D1"), "W", "in"),
                      (Sum(Leaf("power", "R1"), Leaf("power", "R2"), +1), "W", "<=")]),
    "leds": (LEDS, [(Leaf("current", "D1"), "A", "in"), (Leaf("power", "R1"), "W", ">="),
                    (Leaf("voltage", "l1"), "V", "not-in")]),
    "regulator": (REGULATOR, [(Leaf("power", "U1"), "W", "<="), (Leaf("voltage", "out"), "V", "in"),
                              (Sum(Leaf("voltage", "vin"), Leaf("voltage", "out"), -1), "V", "abs>="),
                              (Sum(Leaf("voltage", "vin"), Leaf("voltage", "out"), -1), "V", "not-in")]),
}


def moved(netlist: Netlist, names: Sequence[str], deviations: Sequence[float]) -> Netlist:
    """The netlist with each toleranced value times (1 + d): a part's value, or `PART.vout`."""
    by_name = dict(zip(names, deviations))
    parts = []
    for part in netlist.parts:
        if part.name in by_name:
            part = dataclasses.replace(part, value=part.value * (1 + by_name[part.name]))
        elif f"{part.name}.vout" in by_name:
            props = dict(part.props)
            props["vout"] *= 1 + by_name[f"{part.name}.vout"]
            part = dataclasses.replace(part, props=props)
        parts.append(part)
    return dataclasses.replace(netlist, parts=tuple(parts))


def toleranced_values(netlist: Netlist) -> tuple[list[str], list[float]]:
    """Names and tolerances as docs/analysis.md defines them (read from the parts, not from checker.analysis)."""
    names, tols = [], []
    for part in netlist.parts:
        if part.props.get("tol", 0) > 0:
            names.append(f"{part.name}.vout" if part.kind == "regulator" else part.name)
            tols.append(part.props["tol"])
    return names, tols


def nonlinear_condition(quantity, unit: str, form: str, vertex_values: np.ndarray, nominal: float):
    """A condition of `form` with bounds placed inside the quantity's vertex range, so that it is close."""
    lo, hi = float(vertex_values.min()), float(vertex_values.max())
    span = hi - lo
    if form in ("<=", ">="):
        return Compare(quantity, form, exact(lo + (0.8 if form == "<=" else 0.3) * span), unit)
    if form == "in":
        return Within(quantity, exact(nominal - 0.4 * span), exact(nominal + 0.4 * span), unit)
    if form == "abs>=":  # fails where the quantity crosses a level inside the box: a kink no vertex shows
        return Compare(Call("abs", (Sum(quantity, Const(exact(nominal + 0.1 * span), unit), -1),)), ">=",
                       exact(0.05 * span), unit)
    return Negation(Within(quantity, exact(nominal - 0.2 * span), exact(nominal + 0.3 * span), unit))


@pytest.mark.parametrize("name", sorted(NONLINEAR))
def test_nonlinear_worst_case_never_flatters(name):
    # Same resolution as for linear circuits: on these circuits nodegate's solver gives the same
    # quantities from a cold and a warm start to about 1e-14 relative (measured), far inside 1e-9.
    text, checks = NONLINEAR[name]
    netlist = parse_design(text, "board.circuit").netlists[0]
    names, tols = toleranced_values(netlist)
    nominal_point, cache, solved = solve(netlist), Cache(), {}

    def points(deviations: np.ndarray) -> list[OperatingPoint]:
        """Operating points by nodegate's solver (started at nominal), each point solved once."""
        keys = [tuple(d) for d in np.atleast_2d(deviations)]
        new = [k for k in dict.fromkeys(keys) if k not in solved]
        found = solve_cases([moved(netlist, names, k) for k in new], cache, [nominal_point] * len(new))
        solved.update(zip(new, found))
        return [solved[k] for k in keys]
    corner_points = points(vertices(tols))
    conditions = [nonlinear_condition(quantity, unit, form, quantity.value(op_lookup(corner_points)),
                                      float(quantity.value(op_lookup([nominal_point]))[0]))
                  for quantity, unit, form in checks]
    failures = []
    for condition, finding in zip(conditions, engine(text, conditions)):
        def margins(deviations: np.ndarray, condition=condition) -> np.ndarray:
            return condition.margin(op_lookup(points(deviations)))
        reference, where, _ = brute_minimum(margins, tols, starts=2, polish=1, floor=1e-9)
        worst = finding.worst
        scale = scale_of(condition, [op_lookup([nominal_point]), op_lookup(corner_points), op_lookup(points(where))])
        message = describe(text, condition, finding, reference, where, names)
        if worst.error or worst.margin > reference + RESOLUTION * scale:
            failures.append(message)
            continue
        at_point = float(margins(point_deviations(finding, names, tols))[0])
        if worst.margin != pytest.approx(at_point, abs=RESOLUTION * scale):
            failures.append(message + f"\nour solver at nodegate's point: {at_point!r}")
    assert not failures, "\n".join(failures)
