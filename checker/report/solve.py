"""What `nodegate solve` prints: a terminal table or JSON (the `solve --format json` shape in README.md).

Sign convention (docs/language.md): a two-terminal part's voltage is `from` minus `to`,
its current flows `from` -> `to`, power = voltage x current (absorbed > 0); a
multi-terminal part shows the current into each pin and the power it absorbs.
"""

from __future__ import annotations

import json
import math
from typing import Any, Sequence

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


def _part_rows(point: OperatingPoint) -> list[list[str]]:
    rows = [["part", "voltage", "current", "power"]]
    for name, result in point.parts.items():
        if result.voltage is not None:
            current = result.current if result.current is not None else math.nan
            rows.append([name, format_value(result.voltage, "V", DIGITS), format_value(current, "A", DIGITS),
                         format_value(result.power, "W", DIGITS)])
        else:
            rows.append([name, DASH, DASH, format_value(result.power, "W", DIGITS)])
            rows += [[f"  into {pin}", "", format_value(i, "A", DIGITS), ""] for pin, i in result.pins.items()]
    return rows


def _case_block(point: OperatingPoint) -> list[str]:
    plural = "" if point.iterations == 1 else "s"
    head = (f"case {point.case}: ambient {format_temperature(point.ambient)}, "
            f"{point.strategy}, {point.iterations} iteration{plural}")
    nets = [["net", "voltage"]] + [[net, format_value(v, "V", DIGITS)] for net, v in point.nets.items()]
    return [head, ""] + align(nets, {1}) + [""] + align(_part_rows(point), {1, 2, 3})


def render_solve_table(points: Sequence[OperatingPoint], head: Sequence[str] = ()) -> str:
    """One block per case: its heading, a table of net voltages, a table of parts; no final newline.

    `head` lines come first (`solve --at`: the point and its notes), so a copied table
    never passes for the nominal one.
    """
    blocks = "\n\n".join("\n".join(_case_block(p)) for p in points)
    return "\n".join(head) + "\n\n" + blocks if head else blocks
