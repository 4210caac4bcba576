"""Shared helpers for the analysis tests: circuits from text, limits from text, one analysis run."""

from __future__ import annotations

import datetime

from checker.analysis import analyse
from checker.findings import Analysis, Findings
from checker.language import parse_design
from checker.limits import compile_limits, load_limit_text

TODAY = datetime.date(2030, 1, 1)


def divider_text(vin: float = 5.0, r1: float = 10e3, r2: float = 10e3, tol_r: float = 0.01,
                 tol_v: float | None = None, cases: str = "") -> str:
    """A weather-station battery divider (our own scenario): VIN -> R1 -> mid -> R2 -> gnd."""
    vtol = f", tol = {tol_v * 100:g}%" if tol_v else ""
    return (f'circuit station "Weather station battery sense"\nground gnd\n'
            f"source VIN from vin to gnd : {vin:g} V{vtol}\n"
            f"resistor R1 from vin to mid : {r1:g} ohm, tol = {tol_r * 100:g}%\n"
            f"resistor R2 from mid to gnd : {r2:g} ohm, tol = {tol_r * 100:g}%\n" + cases)


def limits_text(*checks: str) -> str:
    """A limits file with one limit per check, ids lim-0, lim-1, ..."""
    lines = ["limits:"]
    for index, check in enumerate(checks):
        lines += [f"  - id: lim-{index}", f"    about: check {index}", f"    check: {check}"]
    return "\n".join(lines) + "\n"


def run(circuit: str, checks: tuple[str, ...], analysis: Analysis, progress=None) -> Findings:
    design = parse_design(circuit, "station.circuit")
    limit_set = compile_limits([load_limit_text(limits_text(*checks), "limits.yaml")], [design])
    return analyse(limit_set, [design], TODAY, analysis, progress)
