"""Speed figures for the solver, printed one per line with units; nothing is asserted.

Run from the repository root: `python benchmarks/run.py [NAME ...]`. Each benchmark is one
function returning (label, value, unit) lines, so new ones are added to BENCHMARKS under a
name; with names given, only the sections whose name contains one of them run
(`python benchmarks/run.py worst-case`), and `--list` prints the names.
Short measurements are the best of REPEATS runs (the least disturbed by other work
on the machine); docs/models.md ("Performance") records the figures and how to read them.
"""

from __future__ import annotations

import contextlib
import dataclasses
import datetime
import sys
import time
from pathlib import Path
from typing import Callable, Iterator

import numpy as np
import scipy.sparse as sp
from scipy.sparse.linalg import splu

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from checker.design import Netlist, Part  # noqa: E402
from checker.solver import solve, solve_cases  # noqa: E402

Figure = tuple[str, float, str]
R_GRID = 100.0  # Ω per grid resistor
V_SOURCE = 1.0  # V across the grid's opposite corners
REPEATS = 3
EXAMPLE = Path(__file__).resolve().parents[1] / "examples" / "weather_station"


def _net(side: int, row: int, col: int) -> str:
    return f"g{row * side + col}"


def grid_netlist(side: int, volts: float = V_SOURCE, case: str = "default") -> Netlist:
    """A side x side resistor mesh, grounded at one corner, driven from the opposite corner."""
    parts = [Part(f"RH{r}_{c}", "resistor", (("from", _net(side, r, c)), ("to", _net(side, r, c + 1))),
                  R_GRID, "ohm") for r in range(side) for c in range(side - 1)]
    parts += [Part(f"RV{r}_{c}", "resistor", (("from", _net(side, r, c)), ("to", _net(side, r + 1, c))),
                   R_GRID, "ohm") for r in range(side - 1) for c in range(side)]
    parts.append(Part("V1", "source", (("from", _net(side, side - 1, side - 1)), ("to", _net(side, 0, 0))),
                      volts, "V"))
    return Netlist("grid", case, 298.15, _net(side, 0, 0), tuple(parts))


def grid_matrix(side: int) -> tuple[sp.csc_matrix, np.ndarray]:
    """The same grid's nodal matrix and source vector, built directly with numpy."""
    ids = np.arange(side * side).reshape(side, side)
    a = np.concatenate([ids[:, :-1].ravel(), ids[:-1, :].ravel()])
    b = np.concatenate([ids[:, 1:].ravel(), ids[1:, :].ravel()])
    g = np.full(a.size, 1.0 / R_GRID)
    n = side * side
    branch = n  # the source's current, one extra unknown
    top = n - 1
    rows = np.concatenate([a, b, a, b, [top, branch]])
    cols = np.concatenate([a, b, b, a, [branch, top]])
    values = np.concatenate([g, g, -g, -g, [1.0, 1.0]])
    full = sp.csc_matrix((values, (rows, cols)), shape=(n + 1, n + 1))
    keep = np.arange(1, n + 1)  # drop the grounded corner, node 0
    rhs = np.zeros(n)
    rhs[-1] = V_SOURCE
    return full[keep][:, keep].tocsc(), rhs


def _seconds(action: Callable[[], object], repeats: int = 1) -> float:
    """Wall-clock seconds of `action`, the best of `repeats` runs."""
    best = float("inf")
    for _ in range(repeats):
        start = time.perf_counter()
        action()
        best = min(best, time.perf_counter() - start)
    return best


def bench_large_grid(side: int = 500) -> Iterator[Figure]:
    """solve() on a side^2-net grid against scipy's own factor-and-solve of the same matrix."""
    netlist = grid_netlist(side)
    matrix, rhs = grid_matrix(side)
    ours = _seconds(lambda: solve(netlist))
    direct = _seconds(lambda: splu(matrix).solve(rhs))
    yield f"solve() on a {side}x{side} resistor grid ({side * side:,} nets, {len(netlist.parts):,} parts)", ours, "s"
    yield f"scipy splu factor+solve of the same matrix ({matrix.shape[0]:,} unknowns)", direct, "s"
    yield "solve() overhead ratio over splu alone", ours / direct, "x"


def source_cases(side: int, count: int) -> list[Netlist]:
    """`count` cases of one grid that only change the source, sharing every other Part object as
    the elaborator's case overrides do."""
    base = grid_netlist(side)
    source = base.parts[-1]
    return [dataclasses.replace(base, case=f"c{k}", parts=base.parts[:-1] + (
        dataclasses.replace(source, value=V_SOURCE + k / count),)) for k in range(count)]


def bench_cases(side: int = 100, count: int = 100) -> Iterator[Figure]:
    """Many cases that only change the source: one assembly and one factorisation shared by all."""
    netlists = source_cases(side, count)
    shared = _seconds(lambda: solve_cases(netlists), REPEATS)
    alone = _seconds(lambda: [solve(netlist) for netlist in netlists])
    built = [grid_netlist(side, volts=V_SOURCE + k / count, case=f"c{k}") for k in range(count)]
    separate = _seconds(lambda: solve_cases(built), REPEATS)
    yield f"solve_cases(): {count} source-only cases on a {side}x{side} grid", shared, "s"
    yield "  per case", 1e3 * shared / count, "ms"
    yield f"solve() one by one: the same {count} cases", alone, "s"
    yield "  per case", 1e3 * alone / count, "ms"
    yield "  shared over one by one", alone / shared, "x faster"
    yield "solve_cases() per case, netlists built separately (no Part objects shared)", 1e3 * separate / count, "ms"


def lit_grid_netlist(side: int) -> Netlist:
    """A lighting panel of our own: a side x side copper mesh (Ω per segment) fed at one corner by a
    5 V regulator from 12 V, with an LED and its 330 Ω resistor from every mesh node to ground."""
    parts = [Part(f"RH{r}_{c}", "resistor", (("from", _net(side, r, c)), ("to", _net(side, r, c + 1))), 0.05, "ohm")
             for r in range(side) for c in range(side - 1)]
    parts += [Part(f"RV{r}_{c}", "resistor", (("from", _net(side, r, c)), ("to", _net(side, r + 1, c))), 0.05, "ohm")
              for r in range(side - 1) for c in range(side)]
    for node in range(side * side):
        parts.append(Part(f"R{node}", "resistor", (("from", f"g{node}"), ("to", f"k{node}")), 330.0, "ohm"))
        parts.append(Part(f"D{node}", "led", (("from", f"k{node}"), ("to", "gnd"))))
    parts.append(Part("V1", "source", (("from", "in"), ("to", "gnd")), 12.0, "V"))
    parts.append(Part("U1", "regulator", (("in", "in"), ("out", "g0"), ("gnd", "gnd")),
                      props={"vout": 5.0, "dropout": 0.3, "iq": 1e-3}))
    return Netlist("panel", "default", 298.15, "gnd", tuple(parts))


def bench_nonlinear(sides: tuple[int, ...] = (32, 100)) -> Iterator[Figure]:
    """Newton-Raphson on thousands of parts, a quarter of them LEDs."""
    for side in sides:
        netlist = lit_grid_netlist(side)
        start = time.perf_counter()
        point = solve(netlist)
        seconds = time.perf_counter() - start
        yield f"solve() on a {side}x{side} LED panel ({len(netlist.parts):,} parts, {side * side:,} LEDs)", seconds, "s"
        yield f"  Newton iterations ({point.strategy})", point.iterations, ""
        yield "  time per Newton iteration", 1e3 * seconds / point.iterations, "ms"


def tolerance_circuit() -> tuple:
    """A small sensor front end (our own scenario): a supply, a divider with a load, two cases."""
    from checker.language import parse_design
    from checker.limits import compile_limits, load_limit_text
    design = parse_design("""circuit sensor "Tolerance benchmark"
ground gnd
source   VIN   from vin to gnd  : 5 V, tol = 2%
resistor R1    from vin to mid  : 10 kohm, tol = 1%
resistor R2    from mid to gnd  : 10 kohm, tol = 1%
resistor R3    from mid to out  : 4.7 kohm, tol = 5%
resistor R4    from out to gnd  : 22 kohm, tol = 1%
load     LOAD  from out to gnd  : 50 uA, tol = 10%
case low  : VIN = 4.5 V
case high : VIN = 5.5 V
""", "sensor.circuit")
    limits = load_limit_text("limits:\n  - id: out-range\n    about: output in range\n"
                             "    check: voltage(out) in 1 V .. 3 V\n", "limits.yaml")
    return design, compile_limits([limits], [design])


def bench_tolerances(samples: int = 200) -> Iterator[Figure]:
    """Worst-case corners and a Monte Carlo run of a six-part, two-case linear circuit."""
    from checker.analysis import analyse
    from checker.findings import Analysis
    design, limit_set = tolerance_circuit()
    today = datetime.date(2030, 1, 1)
    worst = _seconds(lambda: analyse(limit_set, [design], today, Analysis("worst-case")), REPEATS)
    sampled = _seconds(lambda: analyse(limit_set, [design], today, Analysis("monte-carlo", samples, 1)), REPEATS)
    yield "worst-case analysis: 6 toleranced parts, 2 cases", worst, "s"
    yield f"monte-carlo analysis: {samples} samples, 2 cases", sampled, "s"
    yield "  samples per second", samples / sampled, "/s"


def example_board() -> tuple:
    """The bundled weather station (nonlinear: diodes, LED, MOSFET, regulator, converter)."""
    from checker.limits import compile_limits
    from checker.pipeline import load_designs, load_limit_files
    from checker.repo.config import load_config
    config = load_config(EXAMPLE / "nodegate.yaml")
    designs = load_designs(config)
    return designs, compile_limits(load_limit_files(config), designs)


@contextlib.contextmanager
def counted_starts(warm: bool) -> Iterator[list[int]]:
    """Tolerance analyses with warm starts on, or off (every board solved from the solver's first
    guess, as before warm starts); yields the Newton iterations of every nonlinear solve (a batch of
    worst-case variants solved as one joint circuit, checker.analysis.blocks, counts once)."""
    import checker.analysis.blocks
    spent: list[int] = []

    def solve(netlists, cache=None, guesses=None, fallback=True):
        points = solve_cases(netlists, cache, guesses if warm else None, fallback)
        spent.extend(p.iterations for p in points if p.strategy != "linear")
        return points
    analysis = checker.analysis
    saved = [(module, module.solve_cases)  # the modules that solve perturbed boards
             for module in (analysis.blocks,)]
    for module, _ in saved:
        module.solve_cases = solve
    import checker.analysis.boxpoints
    import checker.analysis.samples
    batched = checker.analysis.samples._batch, checker.analysis.boxpoints.Tiled
    if not warm:  # batched Newton-Raphson starts warm by design: cold runs leave every point to the solver
        checker.analysis.samples._batch = lambda work, deviations: (None, np.zeros(len(deviations), bool))
        checker.analysis.boxpoints.Tiled = _NoTiling
    try:
        yield spent
    finally:
        for module, original in saved:
            module.solve_cases = original
        checker.analysis.samples._batch, checker.analysis.boxpoints.Tiled = batched


class _NoTiling:
    @classmethod
    def of(cls, *args):
        return None


def bench_example_monte_carlo(samples: int = 200) -> Iterator[Figure]:
    """Monte Carlo on the example board: every sample solves every case with Newton-Raphson, started
    at the case's nominal point (warm) or, for comparison, at the solver's first guess (cold)."""
    from checker.analysis import analyse
    from checker.findings import Analysis
    designs, limit_set = example_board()
    design = designs[0]
    cases = len(design.netlists)
    today = datetime.date(2030, 1, 1)
    iterations = sum(point.iterations for point in solve_cases(design.netlists)) / cases
    yield f"monte-carlo on the example board ({len(design.parts)} parts, {cases} nonlinear cases)", samples, "samples"
    yield "  Newton iterations per nominal case", iterations, ""
    for label, warm in (("warm", True), ("cold", False)):
        with counted_starts(warm) as spent:
            seconds = _seconds(lambda: analyse(limit_set, designs, today, Analysis("monte-carlo", samples, 1)), REPEATS)
        yield f"  {label} starts: samples per second", samples / seconds, "/s"
        yield f"  {label} starts: per case solved", 1e3 * seconds / (samples * cases), "ms"
        yield f"  {label} starts: Newton iterations per ordinary solve ({len(spent)} solves)", \
            sum(spent) / max(len(spent), 1), ""


def bench_example_worst_case() -> Iterator[Figure]:
    """Worst-case corners of the example board (swings and corners of every case), warm and cold."""
    from checker.analysis import analyse
    from checker.findings import Analysis
    designs, limit_set = example_board()
    today = datetime.date(2030, 1, 1)
    for label, warm in (("warm", True), ("cold", False)):
        with counted_starts(warm) as spent:
            seconds = _seconds(lambda: analyse(limit_set, designs, today, Analysis("worst-case")), REPEATS)
        yield f"worst-case analysis of the example board, {label} starts", seconds, "s"
        yield f"  {label} starts: Newton iterations per ordinary solve ({len(spent)} solves)", \
            sum(spent) / max(len(spent), 1), ""


LADDER_SECTIONS = 24
LADDER_TOLERANCED = ("RB0", "RT1", "RT6", "RT12", "RT18", "RT24", "RB1", "RB6", "RB12", "RB18", "RB24",
                     "RR0", "RR12", "RR24")  # with VREF and ISNS: 16 toleranced values, 65,536 vertices
VERTEX_GOAL = 20_000  # vertex solves per second the worst-case rewrite set out to reach on 2 cores
CROSS_CHECKS = 20  # random vertices solved again from their own perturbed matrix


def ladder_text(sections: int = LADDER_SECTIONS) -> str:
    """A sensor front end of our own: a 5 V reference drives two 220 Ω ladders (nets a0..a24 and
    b0..b24, the bottom one returned to ground through RB0) joined by a 10 kΩ rung at every node,
    and the sensor's 200 µA excitation is drawn from the far end. 51 nets with ground; 16 values
    toleranced."""
    def tol(name: str) -> str:
        return ", tol = 1%" if name in LADDER_TOLERANCED else ""
    lines = ['circuit ladder "Sensor front-end ladder"', "ground gnd",
             "source   VREF from a0 to gnd : 5 V, tol = 1%",
             f"resistor RB0  from b0 to gnd : 1 kohm{tol('RB0')}"]
    for k in range(1, sections + 1):
        lines.append(f"resistor RT{k} from a{k - 1} to a{k} : 220 ohm{tol(f'RT{k}')}")
        lines.append(f"resistor RB{k} from b{k - 1} to b{k} : 220 ohm{tol(f'RB{k}')}")
    lines += [f"resistor RR{k} from a{k} to b{k} : 10 kohm{tol(f'RR{k}')}" for k in range(sections + 1)]
    lines.append(f"load     ISNS from a{sections} to gnd : 200 uA, tol = 5%")
    return "\n".join(lines) + "\n"


LADDER_LIMITS = """limits:
  - id: mid-tap
    about: The mid-ladder tap stays inside the ADC's window
    check: voltage(a12) in 3.0 V .. 3.4 V
  - id: far-end
    about: The sensor's excitation end stays inside its common-mode range
    check: voltage(a24) in 2.5 V .. 2.95 V
  - id: bridge-difference
    about: The two ladders differ by at most 300 mV at the mid tap
    check: abs(voltage(a12) - voltage(b12)) <= 300 mV
  - id: feed-resistor-power
    about: The first top resistor dissipates at most 600 uW
    check: power(RT1) <= 600 uW
"""


def ladder_board() -> tuple:
    from checker.language import parse_design
    from checker.limits import compile_limits, load_limit_text
    design = parse_design(ladder_text(), "ladder.circuit")
    return design, compile_limits([load_limit_text(LADDER_LIMITS, "limits.yaml")], [design])


def vertex_deviations(fractions: np.ndarray) -> np.ndarray:
    """Every vertex of the box: row i has value j at +tol where bit j of i is set, −tol otherwise."""
    index = np.arange(1 << fractions.size, dtype=np.int64)[:, None]
    signs = 2.0 * ((index >> np.arange(fractions.size, dtype=np.int64)) & 1) - 1.0
    return signs * fractions


@contextlib.contextmanager
def counted_boxes() -> Iterator[list]:
    """Worst-case analyses with every case's BoxPoints kept, to read its solves afterwards (and the
    points the ordinary solver confirmed, as `confirmed`)."""
    from checker.analysis import worstcase
    made: list = []
    original = worstcase.BoxPoints

    class Counted(original):
        def __init__(self, *args, **kwargs):
            super().__init__(*args, **kwargs)
            self.confirmed = 0
            made.append(self)

        def solve(self, deviations):
            self.confirmed += len(np.atleast_2d(deviations))
            return super().solve(deviations)
    worstcase.BoxPoints = Counted
    try:
        yield made
    finally:
        worstcase.BoxPoints = original


def bench_worst_case_vertices() -> Iterator[Figure]:
    """Every vertex of a 16-value tolerance box of a linear board: LinearBox.solve alone (one
    factorisation, Woodbury per point) and the whole worst-case analysis, with a cross-check of
    LinearBox.solve against scipy's spsolve of the perturbed matrices."""
    from scipy.sparse.linalg import spsolve
    from checker.analysis import analyse
    from checker.analysis.linearbox import LinearBox
    from checker.analysis.tolerances import perturbed, toleranced
    from checker.findings import Analysis
    from checker.solver import Cache
    from checker.solver.assembly import assemble
    design, limit_set = ladder_board()
    netlist = design.netlists[0]
    tolerances = toleranced(netlist)
    fractions = np.array([t.fraction for t in tolerances])
    vertices = vertex_deviations(fractions)
    count = len(vertices)
    cache = Cache()
    box = LinearBox.of(netlist, tolerances, cache)
    solved = box.solve(vertices)  # once outside the timing: numpy's first call warms up
    seconds = _seconds(lambda: box.solve(vertices), REPEATS)
    yield (f"LinearBox.solve on a sensor ladder ({len(netlist.parts)} parts, {len(netlist.nets) - 1} nets, "
           f"{len(tolerances)} toleranced values)"), count, "vertices"
    yield "  vertex solves per second (goal: 20,000 /s)", count / seconds, "/s"
    yield "  over the goal", count / seconds / VERTEX_GOAL, "x"
    today = datetime.date(2030, 1, 1)
    with counted_boxes() as boxes:
        whole = _seconds(lambda: analyse(limit_set, [design], today, Analysis("worst-case")), REPEATS)
    findings = analyse(limit_set, [design], today, Analysis("worst-case"))
    runs = len(boxes) // len(design.netlists)
    yield f"worst-case analyse() on the ladder, {len(limit_set.limits)} limits", whole, "s"
    yield "  vertices per second, whole analysis (goal: 20,000 /s)", count / whole, "/s"
    yield "  points solved per run (LinearBox, vertices included)", sum(b.solves for b in boxes) / runs, ""
    yield "  points confirmed by the ordinary solver per run", sum(b.confirmed for b in boxes) / runs, ""
    yield "  items proved by the vertices", sum(o.proved is True for f in findings.findings for o in f.outcomes), \
        f"of {sum(len(f.outcomes) for f in findings.findings)}"
    rng = np.random.default_rng(1)
    picked = rng.choice(count, CROSS_CHECKS, replace=False)
    worst, scale = 0.0, 0.0
    for i in picked:
        moved = perturbed(netlist, {t.part: float(d) for t, d in zip(tolerances, vertices[i])})
        system = assemble(moved, cache.topology(moved))
        direct = spsolve(system.matrix.tocsc(), system.rhs)
        worst = max(worst, float(np.max(np.abs(solved[i] - direct))))
        scale = max(scale, float(np.max(np.abs(direct))))
    yield f"  cross-check at {CROSS_CHECKS} random vertices: largest |LinearBox.solve - spsolve|", worst, "(V or A)"
    yield "  the same, relative to the largest unknown", worst / scale, ""


def bench_example_analysis_ratios(samples: int = 1000) -> Iterator[Figure]:
    """The example board's check (load, compile, analyse) in each tolerance mode against nominal."""
    from checker.pipeline import load_designs, run_check
    from checker.repo.config import load_config
    config = load_config(EXAMPLE / "nodegate.yaml")
    cases = sum(len(design.netlists) for design in load_designs(config))
    today = datetime.date(2030, 1, 1)
    modes = {"nominal": dataclasses.replace(config, tolerances="nominal"),
             "worst-case": dataclasses.replace(config, tolerances="worst-case"),
             "monte-carlo": dataclasses.replace(config, tolerances="monte-carlo", samples=samples, seed=1)}
    nominal = _seconds(lambda: run_check(modes["nominal"], today), REPEATS)
    yield "example board: nominal check wall time", nominal, "s"
    with counted_boxes() as boxes:
        worst = _seconds(lambda: run_check(modes["worst-case"], today))
    yield "example board: worst-case check wall time", worst, "s"
    yield "  worst-case / nominal", worst / nominal, "x"
    yield "  points solved (every case; batches of variants solved as joint circuits)", \
        sum(b.solves for b in boxes), ""
    yield "  points confirmed by the ordinary solver", sum(b.confirmed for b in boxes), ""
    sampled = _seconds(lambda: run_check(modes["monte-carlo"], today))
    yield f"example board: monte-carlo check wall time, {samples} samples", sampled, "s"
    yield "  monte-carlo / nominal", sampled / nominal, "x"
    yield "  boards solved (samples x cases)", samples * cases, ""


BENCHMARKS: dict[str, Callable[[], Iterator[Figure]]] = {
    "large-grid": bench_large_grid,
    "cases": bench_cases,
    "nonlinear": bench_nonlinear,
    "tolerances": bench_tolerances,
    "example-monte-carlo": bench_example_monte_carlo,
    "example-worst-case": bench_example_worst_case,
    "worst-case-vertices": bench_worst_case_vertices,
    "example-analysis-ratios": bench_example_analysis_ratios,
}


def main(names: list[str]) -> None:
    if names == ["--list"]:
        print("\n".join(BENCHMARKS))
        return
    chosen = [name for name in BENCHMARKS if not names or any(wanted in name for wanted in names)]
    if not chosen:
        sys.exit(f"no benchmark named like {' '.join(names)}; --list prints the names")
    for name in chosen:
        for label, value, unit in BENCHMARKS[name]():
            print(f"{label}: {value:.3g} {unit}".rstrip(), flush=True)


if __name__ == "__main__":
    main(sys.argv[1:])
