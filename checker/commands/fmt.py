"""`nodegate fmt FILE... [--check]`: rewrite circuit files in the canonical layout.

Every file is read and formatted before any is written, so one file that does not
parse stops the run (exit 2 through `cli.main`) with nothing changed. Each rewrite
is atomic and keeps the file's permissions (`checker.files.write_atomic`).
"""

from __future__ import annotations

import argparse
from pathlib import Path

from checker.errors import DesignError
from checker.files import write_atomic
from checker.language.files import read_source
from checker.language.format import format_circuit


def run(args: argparse.Namespace) -> int:
    """0 when nothing changed (or was changed); 1 with `--check` when a file would change."""
    changed = []
    for path in dict.fromkeys(args.files):  # each file once, in the order given
        formatted = format_circuit(read_source(path, str(path), None).text, str(path))
        if _on_disk(path) != formatted.encode("utf-8"):
            changed.append((path, formatted))
    for path, formatted in changed:
        if args.check:
            print(f"would reformat {path}")
        else:
            write_atomic(path, formatted)
            print(f"formatted {path}")
    return 1 if args.check and changed else 0


def _on_disk(path: Path) -> bytes:
    """The file's bytes as stored (a byte-order mark or `\\r\\n` line ends count as changes)."""
    try:
        return path.read_bytes()
    except OSError as error:
        raise DesignError(f"cannot read `{path}`: {error.strerror or error}") from None

