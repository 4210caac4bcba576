"""One check run: configuration -> designs -> limits compiled -> cases solved -> Findings.

Every input error surfaces before any solving: all circuits are elaborated and
every limit is compiled against them first, so a typo in a limit file costs no
solver time. Solving and evaluating follow the configuration's tolerance analysis
(`checker.analysis`). Prints nothing; progress goes through the optional callback.
"""

from __future__ import annotations

import datetime
from typing import Callable

from checker.design import Design
from checker.errors import DesignError, shown_path
from checker.analysis import analyse
from checker.findings import Analysis, Findings
from checker.language import load_design
from checker.limits import LimitFile, compile_limits, load_limit_file, load_pack
from checker.repo.config import Config

Progress = Callable[[str], None]


def load_designs(config: Config) -> list[Design]:
    """Elaborate every circuit; circuit names must be unique across the repository."""
    designs: list[Design] = []
    for path in config.circuits:
        design = load_design(shown_path(path), root=config.root)
        twin = next((d for d in designs if d.name == design.name), None)
        if twin is not None:
            raise DesignError(f"circuit name `{design.name}` is used twice (also in `{twin.path}`); "
                              "circuit names identify findings, so they must be unique", design.location)
        designs.append(design)
    return designs


def load_limit_files(config: Config) -> list[LimitFile]:
    return [load_pack(source.pack, source.location) if source.pack else load_limit_file(shown_path(source.path))
            for source in config.limits]


def analysis_of(config: Config) -> Analysis:
    """The configured tolerance analysis; samples and seed only matter for Monte Carlo."""
    if config.tolerances == "monte-carlo":
        return Analysis(config.tolerances, config.samples, config.seed)
    if config.tolerances == "worst-case":
        return Analysis(config.tolerances, vertex_values=config.vertex_values)
    return Analysis(config.tolerances)


def run_check(config: Config, today: datetime.date, progress: Progress | None = None) -> Findings:
    """Solve every circuit in every case and evaluate every limit of `config` under its tolerance analysis."""
    designs = load_designs(config)
    limit_set = compile_limits(load_limit_files(config), designs)
    return analyse(limit_set, designs, today, analysis_of(config), progress)
