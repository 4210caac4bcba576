"""Limits at scale: a check of 10 cases x 1,000 resistors x 20 `each: resistor` limits
(200,000 outcomes), printed as ratios against a baseline measured in the same run.

Run from the repository root: `python benchmarks/limits.py [--keep DIR]`. The figures:
compiling the limits, evaluating them on the solved cases, and writing the JSON, HTML and
Markdown reports, each against the solve of the same circuit (the baseline, measured in the
same run); the report sizes in bytes. Nothing is asserted; docs/limits.md ("Performance")
records the table. Timings are the best of REPEATS runs.
"""

from __future__ import annotations

import datetime
import sys
from pathlib import Path
from typing import Iterator

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from checker.analysis import analyse  # noqa: E402
from checker.findings import Analysis  # noqa: E402
from checker.language import parse_design  # noqa: E402
from checker.limits import compile_limits, load_limit_text  # noqa: E402
from checker.solver import solve_states  # noqa: E402
from benchmarks.run import _seconds  # noqa: E402

Figure = tuple[str, float, str]
REPEATS = 3
RESISTORS = 1000
CASES = 10
TODAY = datetime.date(2030, 1, 1)

# Twenty limits over every resistor: ratings, windows, temperatures, `and`/`or`/`not`, `where`,
# functions; a few fail on some parts in some cases (the supply rises case by case) and many sit
# near their bound, so the reports have failing, near and comfortable items.
LIMITS = [
    ("power", "power(part) <= part.rating"),
    ("power-derated", "power(part) <= part.rating * max(0, min(1, (155 degC - ambient) / (155 degC - 70 degC)))"),
    ("voltage", "abs(voltage(part)) <= part.vmax"),
    ("voltage-window", "voltage(part) in 0 V .. part.vmax"),
    ("current", "current(part) <= 2 mA"),
    ("current-abs", "abs(current(part)) < 1.9 mA"),
    ("hot", "ambient + power(part) * 200 K/W <= 85 degC"),
    ("hot-and-volts", "ambient <= 70 degC and voltage(part) <= 4 V"),
    ("power-or-current", "power(part) <= 3 mW or current(part) <= 1 mA"),
    ("not-over", "not (voltage(part) > part.vmax * 0.9)"),
    ("square", "current(part) ^ 2 * part.value <= part.rating"),
    ("sqrt", "sqrt(power(part) / part.value) <= 2 mA"),
    ("min-max", "max(voltage(part), 0 V) - min(voltage(part), 0 V) <= part.vmax"),
    ("preferred", "part.value in preferred(part.value, part.tol) * 0.95 .. preferred(part.value, part.tol) * 1.05"),
    ("declared", "part.value <= declared(part.value) * 1.01"),
    ("tol", "part.tol <= 2%"),
    ("ohm-law", "voltage(part) / part.value <= 2 mA"),
    ("temperature-rise", "power(part) * 200 K/W <= 30 K"),
    ("high-value", "voltage(part) >= 0.05 V", "part.value >= 1 kohm"),
    ("supply", "voltage(vin) - voltage(part) >= 0 V"),
]


def circuit_text(resistors: int = RESISTORS, cases: int = CASES) -> str:
    """A supply feeding resistors/2 dividers of different ratios, with `cases` supply voltages and ambients."""
    lines = ['circuit wide "Limits at scale"', "ground gnd", "source VIN from vin to gnd : 5 V"]
    for k in range(resistors // 2):
        top, bottom = 1.0 + (k % 47) * 0.1, 1.0 + (k % 31) * 0.15
        lines.append(f"resistor R{2 * k} from vin to m{k} : {top:.2f} kohm, tol = 1%, rating = 10 mW, vmax = 4 V")
        lines.append(f"resistor R{2 * k + 1} from m{k} to gnd : {bottom:.2f} kohm, tol = 1%, rating = 10 mW, vmax = 4 V")
    for case in range(cases):
        lines.append(f"case c{case} : VIN = {4.0 + 0.12 * case:.2f} V, ambient = {20 + 6 * case} degC")
    return "\n".join(lines) + "\n"


def limits_text() -> str:
    lines = ["limits:"]
    for entry in LIMITS:
        name, check = entry[:2]
        lines += [f"  - id: {name}", "    each: resistor", f"    check: {check}"]
        if len(entry) > 2:
            lines.append(f"    where: {entry[2]}")
    return "\n".join(lines) + "\n"


def bench_limits(keep: Path | None = None) -> Iterator[Figure]:
    from checker.report.html import render_html
    from checker.report.json_report import render_json
    from checker.report.markdown import render_markdown
    design = parse_design(circuit_text(), "wide.circuit")
    files = [load_limit_text(limits_text(), "limits.yaml")]
    solve = _seconds(lambda: solve_states(design.netlists), REPEATS)
    yield f"baseline: solve {len(design.netlists)} cases of {len(design.parts)} parts", solve, "s"
    compiled = _seconds(lambda: compile_limits(files, [design]), REPEATS)
    yield "compile the limits", compiled, "s"
    yield "  compile / solve", compiled / solve, "x"
    limit_set = compile_limits(files, [design])
    checked = _seconds(lambda: analyse(limit_set, [design], TODAY, Analysis()), REPEATS)
    findings = analyse(limit_set, [design], TODAY, Analysis())
    outcomes = sum(len(f.outcomes) for f in findings.findings)
    yield "outcomes", outcomes, ""
    yield "solve and evaluate (analyse)", checked, "s"
    yield "  analyse / solve", checked / solve, "x"
    yield "  evaluation per 1,000 outcomes", 1e6 * (checked - solve) / outcomes, "ms"
    total = solve + compiled + checked
    for name, render in (("json", render_json), ("html", render_html), ("markdown", render_markdown)):
        seconds = _seconds(lambda: render(findings), 1)
        text = render(findings)
        if keep is not None:
            (keep / f"report.{'md' if name == 'markdown' else name}").write_text(text, encoding="utf-8")
        total += seconds
        yield f"{name} report", seconds, "s"
        yield f"  {name} / solve", seconds / solve, "x"
        yield f"  {name} size", len(text.encode("utf-8")) / 1e6, "MB"
    yield "check: compile, analyse and every report", total, "s"
    yield "  check / solve", total / solve, "x"


def main(argv: list[str]) -> None:
    keep = Path(argv[argv.index("--keep") + 1]) if "--keep" in argv else None
    for label, value, unit in bench_limits(keep):
        print(f"{label}: {value:.3g} {unit}".rstrip(), flush=True)


if __name__ == "__main__":
    main(sys.argv[1:])
