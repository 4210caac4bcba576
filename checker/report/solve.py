"""What `nodegate solve` prints: a terminal table or JSON (the `solve --format json` shape in README.md).

Sign convention (docs/language.md): a two-terminal part's voltage is `from` minus `to`,
its current flows `from` -> `to`, power = voltage x current (absorbed > 0); a
multi-terminal part shows the current into each pin and the power it absorbs.
"""

from __future__ import annotations

import json
import math
from typing import Any, Sequence

import numpy as np

from checker.design import OperatingPoint, PartResult
from checker.units import ZERO_CELSIUS, format_temperature, format_value

DASH = "—"
DIGITS = 4  # significant figures in the table: a reader compares nets and parts to a few parts in a thousand
Point = Sequence[tuple[str, float]]  # (value name, deviation as a fraction), as `solve --at` moved them


def finite_or_none(value: float) -> float | None:
    """JSON has no NaN or infinity: such values become null."""
    return value if math.isfinite(value) else None


def part_json(result: PartResult) -> dict[str, Any]:
    """`voltage`, `current`, `power` for two-terminal parts; `pins` and `power` otherwise (SI)."""
    if result.voltage is not None:
        return {"voltage": finite_or_none(result.voltage),
                "current": finite_or_none(result.current if result.current is not None else math.nan),
                "power": finite_or_none(result.power)}
    return {"pins": {pin: finite_or_none(i) for pin, i in result.pins.items()},
            "power": finite_or_none(result.power)}


def case_json(point: OperatingPoint) -> dict[str, Any]:
    """One case of `solve --format json`; ambient in °C, rounded to drop float noise of the K -> °C shift."""
    return {
        "case": point.case,
        "ambient_degC": round(point.ambient - ZERO_CELSIUS, 9),
        "converged": True,  # an OperatingPoint exists only for a circuit that has a solution
        "iterations": point.iterations,
        "state": point.state or None,
        "self_check": point.self_check.as_json() if point.self_check is not None else None,
        "nets": {net: finite_or_none(v) for net, v in point.nets.items()},
        "parts": {name: part_json(result) for name, result in point.parts.items()},
    }


def render_solve_json(circuit_name: str, points: Sequence[OperatingPoint], at: Point | None = None) -> str:
    """`{"circuit": NAME, "cases": [...]}` as the README shows it, indented; no final newline (for print).

    With `at` (`solve --at`), each case also has `"at": {NAME: deviation}` (fractions), right after `case`.
    """
    cases = [case_json(p) if at is None else {"case": p.case, "at": dict(at), **case_json(p)} for p in points]
    document = {"circuit": circuit_name, "cases": cases}
    return json.dumps(document, indent=2, ensure_ascii=False, allow_nan=False)


def align(rows: list[list[str]], right: set[int]) -> list[str]:
    """Rows of cells as lines with aligned columns; columns in `right` are right-aligned."""
    widths = [max(len(row[i]) for row in rows) for i in range(len(rows[0]))]
    lines = []
    for row in rows:
        cells = [cell.rjust(w) if i in right else cell.ljust(w) for i, (cell, w) in enumerate(zip(row, widths))]
        lines.append("  " + "  ".join(cells).rstrip())
    return lines


def flows(point: OperatingPoint, name: str, current: float) -> str:
    """`(flows sense → vbat)` for a two-terminal part whose current runs against its declared
    direction (`from` → `to`), so that a reader never reasons about the sign; else empty."""
    if not current < 0.0 or format_value(current, "A", DIGITS) == format_value(0.0, "A", DIGITS):
        return ""
    part = point.netlist.part(name)
    return f"(flows {part.net('to')} → {part.net('from')})"


def _part_rows(point: OperatingPoint) -> list[list[str]]:
    rows = [["part", "voltage", "current", "power", ""]]
    for name, result in point.parts.items():
        if result.voltage is not None:
            current = result.current if result.current is not None else math.nan
            rows.append([name, format_value(result.voltage, "V", DIGITS), format_value(current, "A", DIGITS),
                         format_value(result.power, "W", DIGITS), flows(point, name, current)])
        else:
            rows.append([name, DASH, DASH, format_value(result.power, "W", DIGITS), ""])
            rows += [[f"  into {pin}", "", format_value(i, "A", DIGITS), "", ""] for pin, i in result.pins.items()]
    return rows


def self_check_line(point: OperatingPoint) -> str:
    """`checked: KCL within 6.59e-17 A at every net (worst rail), powers sum to 5.55e-17 W, 1.1 digits lost`."""
    found = point.self_check
    if found is None:
        return ""
    digits = "" if found.digits_lost is None else f", {found.digits_lost:.1f} of 16 digits lost to conditioning"
    return (f"checked: every net balances within {found.kcl:.3g} A (worst at {found.kcl_net}), "
            f"the parts' powers add up to {found.power:.3g} W{digits}")


def _case_block(point: OperatingPoint) -> list[str]:
    plural = "" if point.iterations == 1 else "s"
    state = f" (state {point.state})" if point.state else ""
    head = (f"case {point.case}{state}: ambient {format_temperature(point.ambient)}, "
            f"{point.strategy}, {point.iterations} iteration{plural}")
    nets = [["net", "voltage"]] + [[net, format_value(v, "V", DIGITS)] for net, v in point.nets.items()]
    checked = self_check_line(point)
    return ([head] + ([checked] if checked else []) + [""] + align(nets, {1}) + [""]
            + align(_part_rows(point), {1, 2, 3}))


def render_solve_table(points: Sequence[OperatingPoint], head: Sequence[str] = ()) -> str:
    """One block per case: its heading, a table of net voltages, a table of parts; no final newline.

    `head` lines come first (`solve --at`: the point and its notes), so a copied table
    never passes for the nominal one.
    """
    blocks = "\n\n".join("\n".join(_case_block(p)) for p in points)
    return "\n".join(head) + "\n\n" + blocks if head else blocks


INLINE_NETS = 30  # nets up to which `solve --equations` prints the equations; beyond, --equations-out


def _coefficient_unit(row_is_net: bool, column_is_net: bool) -> str:
    """S for a net's current per volt, Ω for a branch's volts per ampere, "" for the ±1 incidences and gains."""
    if row_is_net == column_is_net:
        return "S" if row_is_net else "Ω"
    return ""


def _term(value: float, unit: str, label: str, first: bool) -> str:
    """`− 1.000 mS·v(b)`; the first term of a row without `+` and without a space after `−`."""
    magnitude = abs(value)
    if unit:
        coefficient = format_value(magnitude, unit, DIGITS) + "·"
    else:
        coefficient = "" if magnitude == 1.0 else f"{magnitude:.{DIGITS}g}·"
    if first:
        return ("−" if value < 0 else "") + coefficient + label
    return ("− " if value < 0 else "+ ") + coefficient + label


def equation_lines(equations) -> list[str]:
    """One line per row of `checker.solver.equations.Linearised`: `net a:  2.000 mS·v(a) − 1.000 mS·v(b) = 0 A`."""
    matrix = equations.matrix.tocsr()
    n = equations.n_nodes
    width = max((len(row) for row in equations.rows), default=0) + 1
    lines = []
    for k, name in enumerate(equations.rows):
        start, end = matrix.indptr[k], matrix.indptr[k + 1]
        columns, values = matrix.indices[start:end], matrix.data[start:end]
        order = np.argsort(columns, kind="stable")
        terms = [_term(float(values[j]), _coefficient_unit(k < n, int(columns[j]) < n),
                       equations.unknowns[int(columns[j])].label, position == 0)
                 for position, j in enumerate(order) if values[j] != 0.0]
        right = format_value(float(equations.rhs[k]) + 0.0, "A" if k < n else "V", DIGITS)
        lines.append(f"  {(name + ':').ljust(width)}  {' '.join(terms) or '0'} = {right}")
    return lines


def render_equations(circuit: str, point: OperatingPoint, equations, out: str | None = None) -> str:
    """`solve --equations` for one case: what the unknowns are, the rows (up to INLINE_NETS nets),
    the inspection statement, the solution and its self-check; no final newline."""
    n, size = equations.n_nodes, len(equations.unknowns)
    how = ("linearised at the solution (each nonlinear part replaced by its tangent there)"
           if equations.linearised else "as solved")
    lines = [f"nodal equations of circuit {circuit}, case {point.case}{f' (state {point.state})' if point.state else ''}, "
             f"{how}: {n} net{'s' if n != 1 else ''} and {size - n} branch current{'s' if size - n != 1 else ''}",
             "  rows: Kirchhoff's current law at each net (currents leaving through its parts = currents injected), "
             "then each voltage-defined part's own equation",
             "  unknowns: " + "; ".join(f"{u.label} {u.about}" for u in equations.unknowns[n:]) if size > n
             else "  unknowns: the net voltages v(NET)"]
    if n <= INLINE_NETS:
        lines += [""] + equation_lines(equations)
        values = "  ".join(f"{u.label} = {format_value(float(v) + 0.0, u.unit, DIGITS)}"
                           for u, v in zip(equations.unknowns, equations.x))
        lines += ["", f"solution: {values}"]
    else:
        lines += ["", f"{n} nets: too many to print here (at most {INLINE_NETS}); "
                      f"`--equations-out FILE` writes them in Matrix Market form"]
    lines += ["", equations.inspection.statement()]
    checked = self_check_line(point)
    if checked:
        lines.append(checked)
    if out:
        lines.append(f"written: {out} (Matrix Market: [matrix | right-hand side], rows and columns named in its comments)")
    return "\n".join(lines)


def worst_self_check(points: Sequence[OperatingPoint]) -> dict[str, Any] | None:
    """The worst of each self-check figure over a circuit's cases (the check's JSON report, per circuit):
    the largest net imbalance (A), the largest |sum of part powers| (W) and the most digits lost."""
    found = [p.self_check.as_json() for p in points if p.self_check is not None]
    if not found:
        return None
    lost = [f["digits_lost"] for f in found if f["digits_lost"] is not None]
    return {"kcl": max(f["kcl"] for f in found), "power": max(f["power"] for f in found),
            "digits_lost": max(lost) if lost else None}
