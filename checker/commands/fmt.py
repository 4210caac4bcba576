"""`nodegate fmt FILE... [--check]`: rewrite circuit files in the canonical layout.

Every file is read and formatted before any is written, so one file that does not
parse stops the run (exit 2 through `cli.main`) with nothing changed. The rewrites go
through the one safe writer as one set (`checker.report.writer.write_set`): each file
is replaced whole and keeps its permissions.

A FILE named on the command line that is a symbolic link is rewritten where it
points, but only when that file lies inside the folder holding the link: a link that
leaves it is refused, so a committed link cannot make `fmt` rewrite a file elsewhere.
"""

from __future__ import annotations

import argparse
import os
from pathlib import Path

from checker.errors import DesignError
from checker.language.files import read_source
from checker.language.format import format_circuit
from checker.report.writer import Planned, stoppable, write_set


def run(args: argparse.Namespace) -> int:
    """0 when nothing changed (or was changed); 1 with `--check` when a file would change."""
    return stoppable(lambda: _format(args))


def _check_summary(untidy: int, total: int) -> str:
    """The last line of `fmt --check`: how many files would change, and what to run."""
    if not untidy:
        return f"nodegate fmt: all {total} file(s) in canonical layout"
    return f"nodegate fmt: {untidy} of {total} file(s) not in canonical layout; `nodegate fmt FILE` rewrites them"


def _format(args: argparse.Namespace) -> int:
    changed = []
    for path in dict.fromkeys(args.files):  # each file once, in the order given
        formatted = format_circuit(read_source(path, str(path), None).text, str(path))
        if _on_disk(path) != formatted.encode("utf-8"):
            changed.append((path, formatted))
    if args.check:
        for path, _ in changed:
            print(f"not in canonical layout: {path}")
        print(_check_summary(len(changed), len(dict.fromkeys(args.files))))
        return 1 if changed else 0
    write_set([_planned(path, formatted) for path, formatted in changed])
    for path, _ in changed:
        print(f"formatted {path}")
    return 0


def _planned(path: Path, formatted: str) -> Planned:
    """The rewrite of `path`: anchored at its folder, aimed at the file a link there points to."""
    folder = Path(os.path.realpath(Path(path).absolute().parent))
    target = Path(os.path.realpath(path))
    if folder not in target.parents:
        raise DesignError(f"`{path}` is a symbolic link to `{target}`, outside its folder; "
                          "nodegate fmt does not rewrite it")
    return Planned(folder, target, formatted, replaces=lambda head: True)


def _on_disk(path: Path) -> bytes:
    """The file's bytes as stored (a byte-order mark or `\\r\\n` line ends count as changes)."""
    try:
        return path.read_bytes()
    except OSError as error:
        raise DesignError(f"cannot read `{path}`: {error.strerror or error}") from None
