"""Front-end figures: reading circuits, memory per line, start-up; each a ratio to a baseline run alongside.

Run from the repository root: `python benchmarks/frontend.py [NAME ...] [--tree PATH] [--side N]`.
Timings on a shared machine are noisy, so every figure is printed as a ratio to a baseline
measured in the same run (best of REPEATS), as in issue 13's table:

- `rate`: parse + elaborate of a 20,000-line resistor grid, in lines per second and as a
  multiple of lark's lexer alone over the same text (the issue's goal, 50,000 lines/s where
  the lexer does 23,000, is a ratio of 2.2), and of the grammar-only path (quick lines off).
- `memory`: peak memory of `load_design` per line, above the process that imported it.
- `solve`: `nodegate solve --format json` of a side x side grid (default 500: 250,000 nets,
  499,000 lines) against scipy's `splu` factor + solve of the same matrix, the share of the
  front end in it, and the peak memory per line of the whole command.
- `startup`: `nodegate check` of a one-resistor repository and of examples/weather_station,
  each against a process importing numpy, scipy, lark, yaml and jinja2.

`--tree PATH` measures another checkout (say the revision before a change, made with
`git worktree add`), so that before and after come from the same machine and hour.
"""

from __future__ import annotations

import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path
from typing import Iterator

sys.path.insert(0, str(Path(__file__).resolve().parent))
from run import _seconds  # noqa: E402

ROOT = Path(__file__).resolve().parents[1]
REPEATS = 3
EXAMPLE = ROOT / "examples" / "weather_station"
IMPORTS = "import numpy, scipy, lark, yaml, jinja2"
Figure = tuple[str, float, str]


def grid_text(side: int) -> str:
    """A side x side mesh of 100 ohm resistors, one per line, driven corner to corner by 1 V."""
    net = lambda row, col: f"g{row * side + col}"  # noqa: E731
    lines = ["circuit grid", "ground g0"]
    lines += [f"resistor RH{r}_{c} from {net(r, c)} to {net(r, c + 1)} : 100 ohm"
              for r in range(side) for c in range(side - 1)]
    lines += [f"resistor RV{r}_{c} from {net(r, c)} to {net(r + 1, c)} : 100 ohm"
              for r in range(side - 1) for c in range(side)]
    lines.append(f"source V1 from {net(side - 1, side - 1)} to g0 : 1 V")
    return "\n".join(lines) + "\n"


def _python(tree: Path, code: str, *args: str, extra: dict | None = None) -> subprocess.CompletedProcess:
    env = {**os.environ, "PYTHONPATH": str(tree), **(extra or {})}
    return subprocess.run([sys.executable, "-c", code, *args], env=env, capture_output=True, text=True, cwd=tree)


def _timed(tree: Path, code: str, *args: str, repeats: int = REPEATS) -> tuple[float, int]:
    """Best wall-clock seconds of a fresh interpreter running `code`, and its own peak RSS in bytes."""
    best, peak = float("inf"), 0
    with tempfile.TemporaryDirectory() as folder:
        record = Path(folder) / "peak"
        probe = ("import atexit, os, resource\natexit.register(lambda: open(os.environ['NODEGATE_PEAK'], 'w')"
                 ".write(str(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss)))\n")
        for _ in range(repeats):
            start = time.perf_counter()
            done = _python(tree, probe + code, *args, extra={"NODEGATE_PEAK": str(record)})
            best = min(best, time.perf_counter() - start)
            if done.returncode not in (0, 1):
                said = done.stderr.strip().splitlines() or ["failed"]
                raise RuntimeError(next((line for line in said if "error" in line), said[-1]))
            peak = max(peak, int(record.read_text()) * 1024)
    return best, peak


def bench_rate(tree: Path, side: int = 101) -> Iterator[Figure]:
    code = f"""
import sys, time
sys.path.insert(0, {str(tree)!r})
from unittest import mock
from checker.language import parse_design
from checker.language.parser import _PARSER
text = open(sys.argv[1]).read()
lines = text.count("\\n")
def best(action):
    times = []
    for _ in range({REPEATS}):
        start = time.perf_counter(); action(); times.append(time.perf_counter() - start)
    return min(times)
ours = best(lambda: parse_design(text))
lexer = best(lambda: list(_PARSER.lex(text)))
try:
    from checker.language import quick
    with mock.patch.object(quick, "split", lambda text, budget=None: (text, [], len(text))):
        grammar = best(lambda: parse_design(text))
except ImportError:
    grammar = ours
print(lines, lines / ours, lines / lexer, lines / grammar)
"""
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "grid.circuit"
        path.write_text(grid_text(side), encoding="utf-8")
        done = _python(tree, code, str(path))
    if done.returncode:
        raise RuntimeError(done.stderr.strip().splitlines()[-1])
    lines, ours, lexer, grammar = (float(x) for x in done.stdout.split())
    yield f"parse + elaborate, {lines:,.0f}-line grid", ours, "lines/s"
    yield "lark's lexer alone over the same text", lexer, "lines/s"
    yield "parse + elaborate as a multiple of the lexer's rate (goal 2.2: 50,000 vs 23,000)", ours / lexer, "x"
    yield "parse + elaborate as a multiple of the grammar-only path", ours / grammar, "x"


def bench_memory(tree: Path, side: int = 316) -> Iterator[Figure]:
    code = f"""
import sys, resource, time
sys.path.insert(0, {str(tree)!r})
from checker.language import load_design
base = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
start = time.perf_counter()
design = load_design(sys.argv[1])
seconds = time.perf_counter() - start
print(len(design.parts), (resource.getrusage(resource.RUSAGE_SELF).ru_maxrss - base) * 1024, seconds)
"""
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "grid.circuit"
        text = grid_text(side)
        path.write_text(text, encoding="utf-8")
        done = _python(tree, code, str(path))
    if done.returncode:
        yield f"load_design of a {side * side:,}-net grid: {done.stderr.strip().splitlines()[-1]}", float("nan"), ""
        return
    parts, peak, seconds = done.stdout.split()
    lines = text.count("\n")
    yield f"load_design of a {side * side:,}-net grid ({lines:,} lines)", float(seconds), "s"
    yield "  peak memory above the imports, per line", float(peak) / lines, "bytes"


def bench_solve(tree: Path, side: int = 500) -> Iterator[Figure]:
    import numpy as np
    import scipy.sparse as sp
    from scipy.sparse.linalg import splu

    ids = np.arange(side * side).reshape(side, side)
    a = np.concatenate([ids[:, :-1].ravel(), ids[:-1, :].ravel()])
    b = np.concatenate([ids[:, 1:].ravel(), ids[1:, :].ravel()])
    g = np.full(a.size, 0.01)
    n = side * side
    rows = np.concatenate([a, b, a, b, [n - 1, n]])
    cols = np.concatenate([a, b, b, a, [n, n - 1]])
    values = np.concatenate([g, g, -g, -g, [1.0, 1.0]])
    keep = np.arange(1, n + 1)
    matrix = sp.csc_matrix((values, (rows, cols)), shape=(n + 1, n + 1))[keep][:, keep].tocsc()
    rhs = np.zeros(n)
    rhs[-1] = 1.0
    direct = _seconds(lambda: splu(matrix).solve(rhs), REPEATS)
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "grid.circuit"
        text = grid_text(side)
        path.write_text(text, encoding="utf-8")
        lines = text.count("\n")
        command = "import sys; from checker.cli import main_exit; sys.argv[0] = 'nodegate'; main_exit()"
        _, small = _timed(tree, "import checker.commands.solve, checker.language")
        try:
            whole, peak = _timed(tree, command + "\n", "solve", str(path), "--format", "json", repeats=1)
        except RuntimeError as error:
            yield f"solve --format json of a {n:,}-net grid: {error}", float("nan"), ""
            return
        front, _ = _timed(tree, f"import sys; sys.path.insert(0, {str(tree)!r})\n"
                                "from checker.language import load_design; load_design(sys.argv[1])", str(path),
                          repeats=1)
    yield f"solve --format json of a {n:,}-net grid ({lines:,} lines)", whole, "s"
    yield "scipy splu factor + solve of the same matrix", direct, "s"
    yield "  end to end as a multiple of splu", whole / direct, "x"
    yield "  share of the front end (start-up + load_design)", front / whole, ""
    yield "  peak memory per line above the imports", (peak - small) / lines, "bytes"


def bench_startup(tree: Path) -> Iterator[Figure]:
    baseline, _ = _timed(tree, IMPORTS, repeats=5)
    with tempfile.TemporaryDirectory() as folder:
        repo = Path(folder)
        (repo / "one.circuit").write_text("circuit one\nground gnd\nsource V1 from a to gnd : 1 V\n"
                                          "resistor R1 from a to gnd : 1 kohm\n", encoding="utf-8")
        (repo / "nodegate.yaml").write_text("circuits:\n  - one.circuit\nreport:\n  json: build/report.json\n",
                                            encoding="utf-8")
        command = "import sys; from checker.cli import main_exit; sys.argv[0] = 'nodegate'; main_exit()"
        one, _ = _timed(tree, command, "check", str(repo), repeats=5)
        example_repo = Path(folder) / "example"
        subprocess.run(["cp", "-r", str(EXAMPLE), str(example_repo)], check=True)
        example, _ = _timed(tree, command, "check", str(example_repo), repeats=5)
    yield f"importing numpy, scipy, lark, yaml and jinja2 ({IMPORTS})", baseline, "s"
    yield "check of a one-resistor repository", one, "s"
    yield "  as a multiple of the imports", one / baseline, "x"
    yield "check of examples/weather_station (worst-case analysis included)", example, "s"
    yield "  as a multiple of the imports (goal 1.4)", example / baseline, "x"


BENCHMARKS = {"rate": bench_rate, "memory": bench_memory, "solve": bench_solve, "startup": bench_startup}


def main(argv: list[str]) -> None:
    tree, side, names = ROOT, None, []
    while argv:
        word = argv.pop(0)
        if word == "--tree":
            tree = Path(argv.pop(0)).resolve()
        elif word == "--side":
            side = int(argv.pop(0))
        elif word == "--list":
            print("\n".join(BENCHMARKS))
            return
        else:
            names.append(word)
    chosen = [name for name in BENCHMARKS if not names or any(wanted in name for wanted in names)]
    print(f"tree: {tree}")
    for name in chosen:
        action = BENCHMARKS[name]
        figures = action(tree, side) if side is not None and name == "solve" else action(tree)
        for label, value, unit in figures:
            print(f"{label}: {value:,.3g} {unit}".rstrip(), flush=True)


if __name__ == "__main__":
    main(sys.argv[1:])
