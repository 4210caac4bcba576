"""`nodegate init [DIR]`: a starter configuration, example circuit, limits and CI workflow.

Writes nothing if anything already stands at one of the starter paths, a dangling
symbolic link included: a starter must never overwrite work, nor write through a link.
The files are written as one set by the safe writer (`checker.report.writer.write_set`),
anchored at DIR: folders inside DIR that are links are refused too.
"""

from __future__ import annotations

import argparse
import os
from importlib import resources
from pathlib import Path

from checker.errors import ConfigError
from checker.report.writer import Planned, stoppable, write_set

STARTER_FILES = (
    "nodegate.yaml",
    "boards/bike_light/bike_light.circuit",
    "boards/bike_light/limits.yaml",
    ".github/workflows/nodegate.yml",
)


def run(args: argparse.Namespace) -> int:
    return stoppable(lambda: _init(args))


def _init(args: argparse.Namespace) -> int:
    target: Path = args.directory
    if target.exists() and not target.is_dir():
        raise ConfigError(f"`{target}` is a file; `nodegate init` needs a folder")
    existing = [name for name in STARTER_FILES if os.path.lexists(target / name)]
    if existing:
        raise ConfigError(f"`nodegate init` never overwrites; already present in {target}: {', '.join(existing)}")
    starter = resources.files("checker") / "starter"
    anchor = Path(os.path.abspath(target))
    write_set([Planned(anchor, anchor / name, (starter / name).read_text(encoding="utf-8"))
               for name in STARTER_FILES])
    for name in STARTER_FILES:
        print(f"wrote {target / name}")
    print(f"next: nodegate check {target}")
    return 0
