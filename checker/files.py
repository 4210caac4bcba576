"""Writing files so that a reader sees the old content or the new, never half of it.

Used for reports and for `nodegate fmt`: a temporary file in the same folder,
flushed to disk, then `os.replace`. An existing file keeps its permissions (a
new one gets 0644), and a symbolic link stays a link: its target is replaced.
"""

from __future__ import annotations

import os
import tempfile
from pathlib import Path

from checker.errors import NodegateError

NEW_FILE_MODE = 0o644


def write_atomic(path: Path, text: str) -> None:
    """Write UTF-8 `text` to `path`, creating its folders; NodegateError when that is impossible."""
    path = Path(path).resolve()
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        mode = path.stat().st_mode & 0o7777 if path.exists() else NEW_FILE_MODE
        handle = tempfile.NamedTemporaryFile("w", encoding="utf-8", newline="", dir=path.parent,
                                             prefix=f".{path.name}.", suffix=".tmp", delete=False)
    except OSError as error:
        raise NodegateError(f"cannot write `{path}`: {error.strerror or error}") from None
    try:
        with handle:
            handle.write(text)
            handle.flush()
            os.fsync(handle.fileno())
        os.chmod(handle.name, mode)
        os.replace(handle.name, path)
    except OSError as error:
        Path(handle.name).unlink(missing_ok=True)
        raise NodegateError(f"cannot write `{path}`: {error.strerror or error}") from None
