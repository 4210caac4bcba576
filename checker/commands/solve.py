"""`nodegate solve FILE [--case NAME] [--at POINT] [--format table|json] [--equations] [--equations-out FILE]`:
print operating points, or the nodal equations they solve; a conditioning warning goes to stderr."""

from __future__ import annotations

import argparse
import os
import sys
from pathlib import Path
from typing import Sequence

from checker.analysis.points import outside_band, parse_point, point_label, resolve_point
from checker.analysis.run import located_at
from checker.analysis.tolerances import Tolerance, percent, perturbed
from checker.design import Design, Netlist, OperatingPoint
from checker.errors import DesignError, did_you_mean
from checker.language import load_design
from checker.repo.config import CONFIG_NAMES
from checker.report import render_solve_json, render_solve_table
from checker.report.solve import render_equations
from checker.report.writer import Planned, write_set
from checker.solver import CaseStates, solve_states
from checker.solver.assembly import assemble
from checker.solver.equations import Linearised, linearise, matrix_market
from checker.solver.selfcheck import conditioning_warnings

Moved = tuple[tuple[Tolerance, float], ...]
Point = tuple[tuple[str, float], ...]


def repository_root(circuit: Path) -> Path:
    """The folder of the nearest `nodegate.yaml` above the circuit, else the circuit's folder.

    `use` paths must stay inside the repository root; `solve` finds the same root
    that `check` would use, so a board file that uses a shared library solves alike.
    """
    try:
        folder = circuit.resolve().parent
    except (OSError, RuntimeError) as error:  # a symbolic link loop, a name too long
        raise DesignError(f"cannot read `{circuit}`: {getattr(error, 'strerror', None) or error}") from None
    for candidate in (folder, *folder.parents):
        if any((candidate / name).is_file() for name in CONFIG_NAMES):
            return candidate
    return folder


def _band_text(value: Tolerance, deviation: float) -> str:
    if value.fraction == 0.0:
        return f"{value.name} {percent(deviation)} moves a value that declares no tolerance"
    return f"{value.name} {percent(deviation)} is outside its tolerance of ±{value.fraction * 100:.3g} %"


def band_notes(moved: Sequence[tuple[str, Moved]]) -> list[str]:
    """A note per deviation beyond a declared tolerance, so an explored point is never mistaken
    for a reported one; it names its cases when not every solved case has it (a case may override `tol`)."""
    cases_of: dict[str, list[str]] = {}
    for case, pairs in moved:
        for value, deviation in pairs:
            if outside_band(value, deviation):
                cases_of.setdefault(_band_text(value, deviation), []).append(case)
    return [text if len(cases) == len(moved) else f"{text} in case{'s' if len(cases) > 1 else ''} {', '.join(cases)}"
            for text, cases in cases_of.items()]


def _selected(design: Design, case: str | None) -> tuple[Netlist, ...]:
    if case is None:
        return design.netlists
    netlists = tuple(n for n in design.netlists if n.case == case)
    if not netlists:
        raise DesignError(f"`{design.path}` has no case `{case}`",
                          notes=did_you_mean(case, design.cases) + (f"its cases: {', '.join(design.cases)}",))
    return netlists


def at_point(netlists: Sequence[Netlist], point: dict[str, float]) -> tuple[tuple[Netlist, ...], Point, list[str]]:
    """The netlists moved to `point`, the point by the names reports use, and notes on deviations
    beyond a declared tolerance. Names resolve alike in every case (a case cannot change a kind)."""
    moved = [(n.case, resolve_point(point, n)) for n in netlists]
    netlists = tuple(perturbed(n, {value.part: d for value, d in pairs}) for n, (_, pairs) in zip(netlists, moved))
    return netlists, tuple((value.name, d) for value, d in moved[0][1]), band_notes(moved)


def show(circuit: str, points: Sequence[OperatingPoint], fmt: str, at: Point | None, notes: Sequence[str]) -> None:
    """Print the operating points; with json the notes go to stderr so that stdout stays valid JSON."""
    if fmt == "json":
        for note in notes:
            print(f"note: {note}", file=sys.stderr)
        print(render_solve_json(circuit, points, at))
        return
    head = [f"at {point_label(at)}", *(f"note: {note}" for note in notes)] if at is not None else []
    print(render_solve_table(points, head))


def run(args: argparse.Namespace) -> int:
    point = parse_point(args.at) if args.at is not None else None
    design = load_design(args.file, root=repository_root(args.file))
    netlists = _selected(design, args.case)
    at, notes = None, []
    if point is not None:
        netlists, at, notes = at_point(netlists, point)
    with located_at(design):
        states = solve_states(netlists)
    points = [point for case in states for point in case.points]
    for note in state_notes(states):
        print(f"nodegate: note: {note}", file=sys.stderr)
    for warning in conditioning_warnings(points):
        print(f"nodegate: warning: {warning}", file=sys.stderr)
    if args.equations or args.equations_out is not None:
        show_equations(design, points, args.equations_out, at, notes)
        return 0
    show(design.name, points, args.format, at, notes)
    return 0


def state_notes(states: Sequence[CaseStates]) -> list[str]:
    """What the search for operating points found, for each case where it found more than one."""
    notes = []
    for case in states:
        if case.found > 1:
            shown = len(case.points)
            notes.append(f"case `{case.points[0].case}` has {case.found} operating points, {case.stable} of them stable"
                         + (f" (reported as states 1 to {shown})" if shown > 1 else "")
                         + (" (its `starts at` keeps the nearest)" if case.stable > shown else "")
                         + "".join(f"; rejected {reason}" for reason in case.rejected))
    return notes


def show_equations(design: Design, points: Sequence[OperatingPoint], out: Path | None, at: Point | None,
                   notes: Sequence[str]) -> None:
    """Each case's nodal equations; with `out`, the one selected case's as a Matrix Market file."""
    if out is not None and len(points) != 1:
        raise DesignError(f"--equations-out writes one case, and `{design.path}` has {len(points)}: "
                          f"choose one with --case", notes=(f"its cases: {', '.join(design.cases)}",))
    blocks = []
    for point in points:
        equations = equations_of(point)
        written = None
        if out is not None:
            title = f"nodegate: circuit {design.name}, case {point.case}"
            write_set([Planned(Path(os.path.abspath(out)).parent, Path(os.path.abspath(out)),
                               matrix_market(equations, title), _is_matrix_market)])
            written = str(out)
        blocks.append(render_equations(design.name, point, equations, written))
    head = [f"at {point_label(at)}", *(f"note: {note}" for note in notes)] if at is not None else []
    print("\n\n".join(["\n".join(head)] * bool(head) + blocks))


def equations_of(point: OperatingPoint) -> Linearised:
    """The equations the point solves: its netlist assembled again, at the solution vector it was read from."""
    system = assemble(point.netlist)
    return linearise(system, point.parts.solution.x)


def _is_matrix_market(head: bytes) -> bool:
    """An existing file is replaced only when it is a Matrix Market file (an earlier export)."""
    return head.startswith(b"%%MatrixMarket")
