"""Monte Carlo speed, each figure printed as a ratio to its baseline measured in the same run.

Run from the repository root: `python benchmarks/montecarlo.py [SAMPLES]` (default 1000).

1. A linear 100-net board (a 10 x 10 resistor mesh, 181 toleranced parts, 190 limit items)
   against its ceiling: numpy's stacked dense solve of the same perturbed systems with the
   margins of the same items computed as arrays (no nodegate in the loop).
2. The example board (nonlinear, two circuits, 9 case states) against its own nominal check.

BLAS is pinned to one thread before numpy loads: stacked small solves lose to thread start-up
(and to the other work on a shared machine) when BLAS spreads them over cores. Each figure is
the best of REPEATS runs.
"""

from __future__ import annotations

import os

for _name in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_name, "1")

import dataclasses  # noqa: E402
import datetime  # noqa: E402
import sys  # noqa: E402
import time  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from checker.analysis import analyse  # noqa: E402
from checker.analysis.montecarlo import draws  # noqa: E402
from checker.analysis.tolerances import toleranced  # noqa: E402
from checker.findings import Analysis  # noqa: E402
from checker.solver import Cache  # noqa: E402
from checker.solver.assembly import assemble  # noqa: E402

REPEATS = 3
TODAY = datetime.date(2030, 1, 1)
SIDE = 10  # mesh of SIDE x SIDE nets, the far corner grounded
WATCHED = 10  # nets with a voltage window


def mesh_text(side: int = SIDE) -> str:
    """A sensor backplane of our own: a 1 kΩ ±1 % mesh fed with 5 V ±2 % at one corner, grounded at
    the other, with a 100 µA load at every tenth net."""
    def net(r: int, c: int) -> str:
        return "gnd" if (r, c) == (side - 1, side - 1) else f"n{r}_{c}"
    lines = ['circuit mesh "Backplane mesh"', "ground gnd", "source VIN from n0_0 to gnd : 5 V, tol = 2%"]
    for r in range(side):
        for c in range(side):
            if c + 1 < side:
                lines.append(f"resistor RH{r}_{c} from {net(r, c)} to {net(r, c + 1)} : 1 kohm, tol = 1%")
            if r + 1 < side:
                lines.append(f"resistor RV{r}_{c} from {net(r, c)} to {net(r + 1, c)} : 1 kohm, tol = 1%")
    lines += [f"load IL{k} from n{k}_{(3 * k) % side} to gnd : 100 uA" for k in range(side - 1)]
    return "\n".join(lines) + "\n"


def watched_nets(side: int = SIDE) -> list[str]:
    return [f"n{k}_{k}" for k in range(WATCHED - 1)] + ["n0_5"]


def mesh_limits() -> str:
    lines = ["limits:", "  - id: resistor-power", "    about: every mesh resistor within its rating",
             "    each: resistor", "    check: power(part) <= 5 mW"]
    for net in watched_nets():
        lines += [f"  - id: window-{net.replace('_', '-')}", f"    about: {net} inside its window",
                  f"    check: voltage({net}) in 0.2 V .. 4.9 V"]
    return "\n".join(lines) + "\n"


def mesh_board():
    from checker.language import parse_design
    from checker.limits import compile_limits, load_limit_text
    design = parse_design(mesh_text(), "mesh.circuit")
    return design, compile_limits([load_limit_text(mesh_limits(), "limits.yaml")], [design])


def best(*actions, repeats: int = REPEATS) -> list[float]:
    """The best wall time of each action over `repeats` rounds, the actions interleaved in each round so
    that load from other work on the machine falls on all of them alike."""
    times = [[] for _ in actions]
    for _ in range(repeats):
        for action, spent in zip(actions, times):
            start = time.perf_counter()
            action()
            spent.append(time.perf_counter() - start)
    return [min(spent) for spent in times]


def ceiling(design, samples: int):
    """The same samples solved and judged with plain numpy: dense perturbed matrices, one stacked
    solve, margins of the 190 items as arrays."""
    netlist = design.netlists[0]
    system = assemble(netlist, Cache().topology(netlist))
    tolerances = toleranced(netlist)
    table = draws(design, samples, 1)
    fractions = np.array([t.fraction for t in tolerances])
    index = {net: k for k, net in enumerate(system.nets[1:])}
    resistors = [p for p in netlist.parts if p.kind == "resistor"]
    ends = np.array([[index.get(net, -1) for _, net in p.pins] for p in resistors])
    column = {t.part: j for j, t in enumerate(tolerances)}
    r_cols = np.array([column[p.name] for p in resistors])
    nominal = np.array([p.value for p in resistors])
    source = index["n0_0"]
    base = system.matrix.toarray()
    base_rhs = system.rhs
    branch = system.size - 1  # the source's branch row (the only branch)
    a, b = ends[:, 0], ends[:, 1]
    watched = np.array([index[n] for n in watched_nets()])
    del source

    def run():
        deviation = table * fractions
        g = 1.0 / (nominal * (1.0 + deviation[:, r_cols]))
        dg = g - 1.0 / nominal
        matrices = np.broadcast_to(base, (samples, *base.shape)).copy()
        for ends_a, ends_b, sign in ((a, a, 1.0), (b, b, 1.0), (a, b, -1.0), (b, a, -1.0)):
            keep = (ends_a >= 0) & (ends_b >= 0)
            np.add.at(matrices, (slice(None), ends_a[keep], ends_b[keep]), sign * dg[:, keep])
        rhs = np.broadcast_to(base_rhs, (samples, base_rhs.size)).copy()
        rhs[:, branch] = base_rhs[branch] * (1.0 + deviation[:, column["VIN"]])
        x = np.linalg.solve(matrices, rhs[:, :, None])[:, :, 0]
        x_ext = np.concatenate([x, np.zeros((samples, 1))], axis=1)
        v = x_ext[:, a] - x_ext[:, b]
        power = 5e-3 - v * v * g
        volts = x[:, watched]
        window = np.minimum(volts - 0.2, 4.9 - volts)
        margins = np.concatenate([power, window], axis=1)
        return margins.min(axis=0), (margins < 0).mean(axis=0)
    return run


def _monte_carlo_only(design, limit_set, samples: int):
    """The Monte Carlo tally alone (no nominal solve, drivers, lints or waivers)."""
    from checker.analysis.montecarlo import monte_carlo
    from checker.analysis.run import targets_of
    from checker.solver import solve_states
    points = tuple(point for states in solve_states(design.netlists) for point in states.points)
    targets = targets_of(limit_set, design.name)
    return lambda: monte_carlo(design, points, targets, samples, 1, lambda message: None)


def bench_mesh(samples: int) -> None:
    design, limit_set = mesh_board()
    items = sum(len(c.items) for c in limit_set.limits)
    parts = len(toleranced(design.netlists[0]))
    numpy_run = ceiling(design, samples)
    tally = _monte_carlo_only(design, limit_set, samples)
    whole = lambda: analyse(limit_set, [design], TODAY, Analysis("monte-carlo", samples, 1))  # noqa: E731
    baseline, ours, analysed = best(numpy_run, tally, whole, repeats=5)
    print(f"linear mesh: {len(design.netlists[0].nets)} nets, {parts} toleranced parts, {items} limit items, "
          f"{samples} samples")
    print(f"  numpy stacked dense solve + vectorised margins (the ceiling): {samples / baseline:,.0f} samples/s")
    print(f"  nodegate monte_carlo(): {samples / ours:,.0f} samples/s = {baseline / ours:.2f}x the ceiling "
          "(goal >= 0.8x)")
    print(f"  nodegate analyse() in monte-carlo mode (nominal solve, drivers and lints included): "
          f"{samples / analysed:,.0f} samples/s = {baseline / analysed:.2f}x the ceiling")


def bench_example(samples: int) -> None:
    from checker.pipeline import load_designs, load_limit_files, run_check
    from checker.limits import compile_limits
    from checker.repo.config import load_config
    config = load_config(ROOT / "examples" / "weather_station" / "nodegate.yaml")
    nominal = dataclasses.replace(config, tolerances="nominal")
    sampled = dataclasses.replace(config, tolerances="monte-carlo", samples=samples, seed=1)
    designs = load_designs(config)
    limit_set = compile_limits(load_limit_files(config), designs)
    run_check(nominal, TODAY)  # imports and first calls outside the timing
    tallies = [_monte_carlo_only(design, limit_set, samples) for design in designs]
    check, mc, tally, analysed, plain = best(
        lambda: run_check(nominal, TODAY), lambda: run_check(sampled, TODAY), lambda: [t() for t in tallies],
        lambda: analyse(limit_set, designs, TODAY, Analysis("monte-carlo", samples, 1)),
        lambda: analyse(limit_set, designs, TODAY, Analysis()))
    states = sum(len(design.netlists) for design in designs)
    print(f"example board ({len(designs)} circuits, {states} cases), {samples} samples")
    print(f"  nominal check {check:.3f} s; monte-carlo check {mc:.3f} s = {mc / check:.2f}x the nominal check "
          "(goal <= 3x)")
    print(f"  monte_carlo() alone: {samples / tally:,.0f} samples/s (goal >= 1,000); "
          f"analyse() in monte-carlo mode {analysed:.3f} s = {analysed / plain:.2f}x nominal analyse() "
          f"({samples / analysed:,.0f} samples/s)")


def main(argv: list[str]) -> None:
    samples = int(argv[0]) if argv else 1000
    bench_mesh(samples)
    bench_example(samples)


if __name__ == "__main__":
    main(sys.argv[1:])
