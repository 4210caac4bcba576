"""`nodegate solve FILE [--case NAME] [--format table|json]`: print operating points."""

from __future__ import annotations

import argparse
from pathlib import Path

from checker.analysis.run import located_at
from checker.errors import DesignError, did_you_mean
from checker.language import load_design
from checker.repo.config import CONFIG_NAMES
from checker.report import render_solve_json, render_solve_table
from checker.solver import solve_cases


def repository_root(circuit: Path) -> Path:
    """The folder of the nearest `nodegate.yaml` above the circuit, else the circuit's folder.

    `use` paths must stay inside the repository root; `solve` finds the same root
    that `check` would use, so a board file that uses a shared library solves alike.
    """
    folder = circuit.resolve().parent
    for candidate in (folder, *folder.parents):
        if any((candidate / name).is_file() for name in CONFIG_NAMES):
            return candidate
    return folder


def run(args: argparse.Namespace) -> int:
    design = load_design(args.file, root=repository_root(args.file))
    netlists = design.netlists
    if args.case is not None:
        netlists = tuple(n for n in netlists if n.case == args.case)
        if not netlists:
            raise DesignError(f"`{design.path}` has no case `{args.case}`",
                              notes=did_you_mean(args.case, design.cases) + (f"its cases: {', '.join(design.cases)}",))
    with located_at(design):
        points = solve_cases(netlists)
    if args.format == "json":
        print(render_solve_json(design.name, points))
    else:
        print(render_solve_table(points))
    return 0
