"""`nodegate init [DIR]`: a starter configuration, example circuit, limits and CI workflow.

Writes nothing if anything already stands at one of the starter paths, a dangling
symbolic link included: a starter must never overwrite work, nor write through a link.
The files are written as one set by the safe writer (`checker.report.writer.write_set`),
anchored at DIR: folders inside DIR that are links are refused too.

The one exception to "never overwrites" is `.gitignore`, so the reports `check` writes
stay out of commits: a missing one is created, and an existing one that lacks the
report folder gets that one line appended, nothing else changed (the writer replaces
it only if it still starts as it did when read). One that already names the folder is
left alone.
"""

from __future__ import annotations

import argparse
import os
import stat
from importlib import resources
from pathlib import Path

from checker.errors import ConfigError
from checker.report.writer import HEAD_BYTES, Planned, stoppable, write_set

STARTER_FILES = (
    "nodegate.yaml",
    "boards/bike_light/bike_light.circuit",
    "boards/bike_light/limits.yaml",
    ".github/workflows/nodegate.yml",
)
REPORT_FOLDER = "build/nodegate"  # where the starter nodegate.yaml puts the reports
IGNORE_ENTRY = f"/{REPORT_FOLDER}/"
# Lines of a .gitignore that already keep the report folder out (anchored or not, slash or not).
IGNORE_SPELLINGS = {IGNORE_ENTRY, IGNORE_ENTRY.rstrip("/"), IGNORE_ENTRY.lstrip("/"), REPORT_FOLDER}
MAX_GITIGNORE_BYTES = 1_000_000  # a larger .gitignore is refused: the entry is then added by hand


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
    planned = [Planned(anchor, anchor / name, (starter / name).read_text(encoding="utf-8"))
               for name in STARTER_FILES]
    ignore = _gitignore(anchor)
    write_set(planned + ([ignore] if ignore else []))
    for name in STARTER_FILES:
        print(f"wrote {target / name}")
    if ignore:
        print(f"added {IGNORE_ENTRY} to {target / '.gitignore'}")
    print(f"next: nodegate check {target}")
    return 0


def _gitignore(anchor: Path) -> Planned | None:
    """The .gitignore with the report folder added, or None when it already names it.

    An existing file is read without following a link, and replaced only if it still
    begins with what was read, so the append never loses a line written meanwhile.
    """
    old = _read_gitignore(anchor / ".gitignore")
    if old is None:
        return Planned(anchor, anchor / ".gitignore", IGNORE_ENTRY + "\n")
    try:
        text = old.decode("utf-8")
    except UnicodeDecodeError:
        raise ConfigError(f"`{anchor / '.gitignore'}` is not UTF-8 text; add `{IGNORE_ENTRY}` to it yourself") from None
    if any(line.strip() in IGNORE_SPELLINGS for line in text.splitlines()):
        return None
    separator = "" if not text or text.endswith("\n") else "\n"
    return Planned(anchor, anchor / ".gitignore", text + separator + IGNORE_ENTRY + "\n",
                   replaces=lambda head: head == old[:HEAD_BYTES])


def _read_gitignore(path: Path) -> bytes | None:
    """The bytes of an existing regular .gitignore; None when there is none.

    A link, a folder or an oversized file is refused here, before anything is written.
    """
    try:
        fd = os.open(path, os.O_RDONLY | os.O_NOFOLLOW | os.O_NONBLOCK)
    except FileNotFoundError:
        return None
    except OSError as error:
        raise ConfigError(f"cannot add the report folder to `{path}`: {error.strerror or error}") from None
    with os.fdopen(fd, "rb") as handle:
        info = os.fstat(fd)
        if not stat.S_ISREG(info.st_mode) or info.st_size > MAX_GITIGNORE_BYTES:
            raise ConfigError(f"`{path}` is not a regular text file of at most {MAX_GITIGNORE_BYTES} bytes; "
                              f"add `{IGNORE_ENTRY}` to it yourself")
        return handle.read(MAX_GITIGNORE_BYTES + 1)
