"""One check run: configuration -> designs -> limits compiled -> cases solved -> Findings.

Every input error surfaces before any solving: all circuits are elaborated and
every limit is compiled against them first, so a typo in a limit file costs no
solver time. Solving and evaluating follow the configuration's tolerance analysis
(`checker.analysis`). A run whose estimated work is beyond what a CI job can finish
(`MAX_BOARDS`, `MAX_VERTICES`) stops before solving, saying how to lower it. Prints
nothing; progress goes through the optional callback.
"""

from __future__ import annotations

import datetime
from typing import Callable

from checker.design import Design
from checker.errors import ConfigError, DesignError, shown_path
from checker.analysis import analyse
from checker.analysis.tolerances import toleranced
from checker.analysis.worstcase import DEFAULT_VERTEX_VALUES
from checker.findings import Analysis, Findings
from checker.language import load_design
from checker.limits import LimitFile, compile_limits, load_limit_file, load_pack
from checker.remedies.search import with_remedies
from checker.repo.config import Config

Progress = Callable[[str], None]
# The most work a run may ask for, so a pull request cannot hold a CI runner for hours.
# Both are about 100 times what the bundled example asks for (worst-case: 5 cases of
# 10 toleranced values, 5,120 vertices; Monte Carlo at the default 2,000 samples: 10,000 boards).
MAX_BOARDS = 1_000_000  # Monte Carlo: samples x cases, summed over the circuits
MAX_VERTICES = 4_194_304  # worst-case: 2^min(toleranced values, vertex_values) per case, summed


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
    """Every limits file and pack of `config`, each carrying the circuits its entry binds it to."""
    return [load_pack(source.pack, source.location, source.circuits) if source.pack
            else load_limit_file(shown_path(source.path), source.location, source.circuits)
            for source in config.limits]


def analysis_of(config: Config) -> Analysis:
    """The configured tolerance analysis; samples and seed only matter for Monte Carlo."""
    if config.tolerances == "monte-carlo":
        return Analysis(config.tolerances, config.samples, config.seed, scheduler=config.scheduler)
    if config.tolerances == "worst-case":
        return Analysis(config.tolerances, vertex_values=config.vertex_values)
    return Analysis(config.tolerances)


def check_work(config: Config, designs: list[Design]) -> None:
    """ConfigError, before any solving, when the analysis would solve more points than the caps allow."""
    cases = sum(len(design.netlists) for design in designs)
    if config.tolerances == "monte-carlo":
        boards = config.samples * cases
        if boards > MAX_BOARDS:
            raise ConfigError(
                f"Monte Carlo would solve {boards:,} boards ({config.samples:,} samples x {cases} cases "
                f"in {len(designs)} circuit{'s' if len(designs) > 1 else ''}), "
                f"more than the {MAX_BOARDS:,} a check may take",
                config.analysis_at.get("samples") or config.analysis_at.get("tolerances"),
                (f"lower `samples` to at most {MAX_BOARDS // cases:,}, or check fewer circuits",))
    if config.tolerances == "worst-case":
        most = DEFAULT_VERTEX_VALUES if config.vertex_values is None else config.vertex_values
        vertices = sum(1 << min(len(toleranced(netlist)), most) for design in designs for netlist in design.netlists)
        if vertices > MAX_VERTICES:
            raise ConfigError(
                f"worst-case analysis would solve {vertices:,} vertices (2^min(toleranced values, "
                f"vertex_values = {most}) in each of {cases} cases), more than the {MAX_VERTICES:,} a check may take",
                config.analysis_at.get("vertex_values") or config.analysis_at.get("tolerances"),
                ("lower `vertex_values`: cases with more toleranced values are searched from corners instead",))


def run_check(config: Config, today: datetime.date, progress: Progress | None = None,
              remedies: bool = True) -> Findings:
    """Solve every circuit in every case and evaluate every limit of `config` under its tolerance analysis;
    with `remedies`, then search each failing and warning limit's remedies within the default budget
    (`checker.remedies.search`, docs/remedies.md)."""
    designs = load_designs(config)
    files = load_limit_files(config)
    limit_set = compile_limits(files, designs)
    check_work(config, designs)
    findings = analyse(limit_set, designs, today, analysis_of(config), progress)
    if not remedies:
        return findings
    return with_remedies(findings, files, designs, today, analysis_of(config), progress)
