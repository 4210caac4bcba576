"""Limits: limit files and packs, the check expression language, margins, waivers, Findings.

Public entry points (see docs/limits.md):
- `load_limit_file(path)`, `load_pack(name)` -> LimitFile
- `compile_limits(files, designs)` -> LimitSet: every rule error, before solving
- `evaluate(limit_set, operating_points, today)` -> (findings, waiver notes)
- `evaluate_limits(files, designs, operating_points, today)`, `check_findings(...)` -> Findings
"""

from checker.limits.compiler import CaseValues
from checker.limits.engine import (CompiledItem, CompiledLimit, LimitSet, check_findings, compile_limit,
                                   compile_limits, evaluate, evaluate_limits)
from checker.limits.files import LimitFile, available_packs, load_limit_file, load_limit_text, load_pack

__all__ = [
    "CaseValues", "CompiledItem", "CompiledLimit", "LimitFile", "LimitSet", "available_packs",
    "check_findings", "compile_limit", "compile_limits", "evaluate", "evaluate_limits",
    "load_limit_file", "load_limit_text", "load_pack",
]
