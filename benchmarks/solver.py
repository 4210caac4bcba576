"""The solver's figures (issue "Fast at every scale", item 2), each a ratio to a baseline measured
in the same run; nothing is asserted.

Run from the repository root: `python benchmarks/solver.py [NAME ...]` (`--list` prints the names;
`grid-1m` is the 1,000,000-net grid, left out unless named). Every figure is the best of REPEATS
runs, and times are CPU seconds of this process (`time.process_time`): on the shared 2-core
machine wall-clock times swing by 2-4x with other work, while one thread's CPU time does not.
BLAS is held to one thread for the whole run (threadpoolctl), as the solver holds it for large
systems, so the CPU time of the baselines is their whole cost too.

Figures:
- grid: `solve()` of a side x side resistor grid, from its parsed netlist, over scipy's default
  `splu(A).solve(b)` of the same matrix; and the factorisation alone, the solver's ordering over
  scipy's default (COLAMD), once with the ordering searched and once reused.
- cases: 100 cases of a 100 x 100 grid that only change the source, over one case.
- led-panel: 10,000 strings (a resistor and an LED each, on one 5 V rail), `solve()` over a plain
  numpy Newton-Raphson on the same equations (the same laws, junction limiting and first guess,
  one sparse LU per iteration).
- direct-solvers: the optional direct solvers that are installed, factor + solve of the grid
  matrix, over scipy's default `splu` and over the solver's own factorisation.
"""

from __future__ import annotations

import contextlib
import sys
import time
from pathlib import Path
from typing import Callable, Iterator

import numpy as np
import scipy.sparse as sp
from scipy.sparse.linalg import splu

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
sys.path.insert(0, str(Path(__file__).resolve().parent))

from run import grid_matrix, grid_netlist, source_cases  # noqa: E402

from checker.design import Netlist, Part  # noqa: E402
from checker.solver import solve, solve_cases  # noqa: E402

Figure = tuple[str, float, str]
REPEATS = 3


def _cpu(actions: dict[str, Callable[[], object]], repeats: int = REPEATS) -> dict[str, float]:
    """CPU seconds of each action, the best of `repeats`, the actions taken in turn each round."""
    best = {name: float("inf") for name in actions}
    for _ in range(repeats):
        for name, action in actions.items():
            start = time.process_time()
            action()
            best[name] = min(best[name], time.process_time() - start)
    return best


def bench_grid(side: int = 500, repeats: int = REPEATS) -> Iterator[Figure]:
    from checker.solver import linear
    netlist = grid_netlist(side)
    matrix, rhs = grid_matrix(side)
    actions = {"solve": lambda: solve(netlist), "splu": lambda: splu(matrix).solve(rhs),
               "splu factor": lambda: splu(matrix), "ordered factor": lambda: linear.Factor(matrix, netlist)}
    if hasattr(linear, "Orderings"):  # not in the solver as it was before the ordering work
        orderings = linear.Orderings()
        linear.Factor(matrix, netlist, orderings)  # the ordering, kept for "reused" below
        actions["reused factor"] = lambda: linear.Factor(matrix, netlist, orderings)
    times = _cpu(actions, repeats)
    default, ours = splu(matrix), splu(matrix, permc_spec="MMD_AT_PLUS_A")
    yield f"{side}x{side} grid ({matrix.shape[0]:,} unknowns): scipy splu factor+solve", times["splu"], "s"
    yield "  solve() from the netlist over splu factor+solve", times["solve"] / times["splu"], "x"
    yield "  the solver's factorisation over splu's (COLAMD)", times["ordered factor"] / times["splu factor"], "x"
    if "reused factor" in times:
        yield "  the same with the ordering reused over COLAMD", times["reused factor"] / times["splu factor"], "x"
    yield "  fill (nonzeros of L and U), minimum degree over COLAMD", \
        (ours.L.nnz + ours.U.nnz) / (default.L.nnz + default.U.nnz), "x"


def bench_grid_1m() -> Iterator[Figure]:
    yield from bench_grid(1000, 1)


def bench_cases(side: int = 100, count: int = 100) -> Iterator[Figure]:
    netlists = source_cases(side, count)
    solve_cases(netlists[:1])
    times = _cpu({"one": lambda: solve_cases(netlists[:1]), "all": lambda: solve_cases(netlists)})
    yield f"{count} source-only cases of a {side}x{side} grid: one case", times["one"], "s"
    yield f"  {count} cases over one case", times["all"] / times["one"], "x"
    yield "  per extra case", 1e3 * (times["all"] - times["one"]) / (count - 1), "ms"


R_STRING = 150.0  # Ω in series with each LED
V_RAIL = 5.0


def led_panel(strings: int) -> Netlist:
    """A panel of our own: `strings` strings of a 150 Ω resistor and an LED, all on one 5 V rail."""
    parts = [Part("V1", "source", (("from", "rail"), ("to", "gnd")), V_RAIL, "V")]
    for k in range(strings):
        parts.append(Part(f"R{k}", "resistor", (("from", "rail"), ("to", f"a{k}")), R_STRING, "ohm"))
        parts.append(Part(f"D{k}", "led", (("from", f"a{k}"), ("to", "gnd"))))
    return Netlist("panel", "default", 298.15, "gnd", tuple(parts))


def numpy_newton(strings: int) -> np.ndarray:
    """The panel's modified nodal equations solved by a plain Newton-Raphson written with numpy:
    unknowns the rail, each string's middle net and the source's current; LEDs by Shockley's law
    with the solver's defaults (2.0 V at 10 mA, ideality 2, 1 pS shunt), the same first guess
    (each LED's tangent at 10 mA), junction limiting and step test."""
    from checker.devices import junction
    nvt = 2.0 * junction.thermal_voltage(298.15)
    log_is = float(junction.log_isat_from_point(np.array(2.0), np.array(10e-3), nvt, np.array(0.0)))
    isat, g_r = np.exp(log_is), 1.0 / R_STRING
    n = strings + 2  # rail, the strings' nets, the source's current
    mid = np.arange(1, strings + 1)
    rows = np.concatenate([[0, 0, n - 1], mid, mid, np.zeros(strings, int), mid])
    cols = np.concatenate([[0, n - 1, 0], mid, np.zeros(strings, int), mid, mid])

    def system(v_mid: np.ndarray, g_led: np.ndarray) -> sp.csc_matrix:
        values = np.concatenate([[strings * g_r, 1.0, 1.0], g_r + g_led, np.full(strings, -g_r),
                                 np.full(strings, -g_r), np.zeros(strings)])
        return sp.csc_matrix((values, (rows, cols)), shape=(n, n))

    # first guess: each LED replaced by its tangent at 10 mA
    v0 = nvt * np.log1p(10e-3 / isat)
    g0 = np.full(strings, 1.0 / (nvt / (10e-3 + isat)) + junction.SHUNT)
    b = np.zeros(n)
    b[mid] = -(10e-3 - g0 * v0)
    b[n - 1] = V_RAIL
    x = splu(system(np.zeros(strings), g0)).solve(b)
    critical = nvt * (np.log(nvt / np.sqrt(2.0)) - log_is)
    for _ in range(100):
        v = x[mid]
        exponent = np.exp(log_is + v / nvt)
        i_led, g_led = exponent - isat + junction.SHUNT * v, exponent / nvt + junction.SHUNT
        residual = np.zeros(n)
        residual[0] = g_r * (strings * x[0] - v.sum()) + x[n - 1]
        residual[mid] = g_r * (v - x[0]) + i_led
        residual[n - 1] = x[0] - V_RAIL
        target = x + splu(system(v, g_led)).solve(-residual)
        base = np.maximum(v, critical)
        v_new = target[mid]
        limited = v_new > base + 2.0 * nvt
        v_lim = np.where(limited, base + nvt * np.log1p(np.where(limited, v_new - base, 0.0) / nvt), v_new)
        step = v_new - v
        moved = np.abs(step) > 0
        fraction = float(np.min(np.clip((v_lim[moved] - v[moved]) / step[moved], 0.0, 1.0), initial=1.0))
        x_new = x + fraction * (target - x)
        if np.all(np.abs(x_new - x) <= 1e-9 + 1e-9 * np.abs(x_new)):
            return x_new
        x = x_new
    raise RuntimeError("the numpy Newton did not converge")


def bench_led_panel(strings: int = 10_000) -> Iterator[Figure]:
    netlist = led_panel(strings)
    point = solve(netlist)
    reference = numpy_newton(strings)
    times = _cpu({"solve": lambda: solve(netlist), "numpy": lambda: numpy_newton(strings)})
    agree = max(abs(point.nets[f"a{k}"] - reference[k + 1]) for k in range(strings))
    yield f"LED panel of {strings:,} strings: plain numpy Newton", times["numpy"], "s"
    yield f"  solve() over the numpy Newton ({point.iterations} iterations)", times["solve"] / times["numpy"], "x"
    yield "  largest difference of a string's net voltage", agree, "V"


def _direct_solvers(matrix: sp.csc_matrix, rhs: np.ndarray) -> dict[str, Callable[[], np.ndarray]]:
    """The optional direct solvers that import, each a factor + solve of `matrix`."""
    found: dict[str, Callable[[], np.ndarray]] = {}
    with contextlib.suppress(ImportError):
        import kvxopt
        import kvxopt.klu
        import kvxopt.umfpack

        def through(module) -> Callable[[], np.ndarray]:
            def run() -> np.ndarray:
                coo = matrix.tocoo()
                a = kvxopt.spmatrix(coo.data, coo.row.astype(int), coo.col.astype(int), coo.shape)
                b = kvxopt.matrix(rhs)
                module.linsolve(a, b)
                return np.array(b).ravel()
            return run
        found["kvxopt KLU"], found["kvxopt UMFPACK"] = through(kvxopt.klu), through(kvxopt.umfpack)
    with contextlib.suppress(ImportError, OSError):
        import pypardiso
        found["pypardiso (MKL)"] = lambda: pypardiso.spsolve(matrix.tocsr(), rhs)
    return found


def bench_direct_solvers(side: int = 300) -> Iterator[Figure]:
    from checker.solver.linear import Factor
    matrix, rhs = grid_matrix(side)
    netlist = grid_netlist(side)
    others = _direct_solvers(matrix, rhs)
    if not others:
        yield "no optional direct solver is installed (kvxopt, pypardiso)", 0, ""
        return
    reference = splu(matrix).solve(rhs)
    times = _cpu({"splu": lambda: splu(matrix).solve(rhs), "ours": lambda: Factor(matrix, netlist).solve(rhs),
                  **others}, 2)
    yield f"{side}x{side} grid, factor + solve: scipy splu (COLAMD)", times["splu"], "s"
    yield "  the solver's Factor over splu", times["ours"] / times["splu"], "x"
    for name in others:
        error = float(np.max(np.abs(others[name]() - reference)) / np.max(np.abs(reference)))
        yield f"  {name} over splu (relative difference {error:.1e})", times[name] / times["splu"], "x"
        yield f"  {name} over the solver's Factor", times[name] / times["ours"], "x"


BENCHMARKS: dict[str, Callable[[], Iterator[Figure]]] = {
    "grid": bench_grid,
    "grid-1m": bench_grid_1m,
    "cases": bench_cases,
    "led-panel": bench_led_panel,
    "direct-solvers": bench_direct_solvers,
}
BY_DEFAULT = ("grid", "cases", "led-panel", "direct-solvers")


def main(names: list[str]) -> None:
    if names == ["--list"]:
        print("\n".join(BENCHMARKS))
        return
    chosen = [name for name in BENCHMARKS if (name in names if names else name in BY_DEFAULT)]
    if not chosen:
        sys.exit(f"no benchmark named {' '.join(names)}; --list prints the names")
    with _one_blas_thread():
        for name in chosen:
            for label, value, unit in BENCHMARKS[name]():
                print(f"{label}: {value:.3g} {unit}".rstrip(), flush=True)


@contextlib.contextmanager
def _one_blas_thread() -> Iterator[None]:
    try:
        from threadpoolctl import threadpool_limits
    except ImportError:
        yield
        return
    with threadpool_limits(limits=1, user_api="blas"):
        yield


if __name__ == "__main__":
    main(sys.argv[1:])
