"""`nodegate init [DIR]`: a starter configuration, example circuit, limits and CI workflow.

Writes nothing if any of the files already exists: a starter must never overwrite work.
"""

from __future__ import annotations

import argparse
from importlib import resources
from pathlib import Path

from checker.errors import ConfigError

STARTER_FILES = (
    "nodegate.yaml",
    "boards/bike_light/bike_light.circuit",
    "boards/bike_light/limits.yaml",
    ".github/workflows/nodegate.yml",
)


def run(args: argparse.Namespace) -> int:
    target: Path = args.directory
    if target.exists() and not target.is_dir():
        raise ConfigError(f"`{target}` is a file; `nodegate init` needs a folder")
    existing = [name for name in STARTER_FILES if (target / name).exists()]
    if existing:
        raise ConfigError(f"`nodegate init` never overwrites; already present in {target}: {', '.join(existing)}")
    starter = resources.files("checker") / "starter"
    written: list[Path] = []
    try:
        for name in STARTER_FILES:
            destination = target / name
            destination.parent.mkdir(parents=True, exist_ok=True)
            destination.write_text((starter / name).read_text(encoding="utf-8"), encoding="utf-8")
            written.append(destination)
    except OSError as error:
        for path in written:  # all or nothing: a half-written starter would confuse the next `init`
            path.unlink(missing_ok=True)
        raise ConfigError(f"cannot write the starter into `{target}`: {error.strerror or error}") from None
    for path in written:
        print(f"wrote {path}")
    print(f"next: nodegate check {target}")
    return 0
