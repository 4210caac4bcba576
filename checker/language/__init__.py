"""The circuit language: `.circuit` text to a `checker.design.Design`.

Parsing (`parser`, grammar in `circuit.lark`; `quick` reads one-line parts without it,
exactly as it would), statements (`syntax`), `use` and file bounds (`files`),
expressions with units (`expressions`), parts checked against the kind table
(`parts`), blocks (`elaborate`) and cases (`cases`).
Every input problem is a `checker.errors.NodegateError` with a Location.
"""

from __future__ import annotations

import contextlib
import gc
from pathlib import Path

from checker.design import Design
from checker.language.elaborate import elaborate
from checker.language.files import Loader, read_source, text_source
from checker.language.source import Source

__all__ = ["load_design", "parse_design"]


def load_design(path: str | Path, root: str | Path | None = None) -> Design:
    """Read and elaborate a top-level `.circuit` file.

    `use` paths are relative to the including file and must resolve inside `root`
    (default: the folder of `path`).
    """
    path = Path(path)
    source = read_source(path, str(path), None)
    return _design(source, path, root)


def parse_design(text: str, path: str = "<text>", root: str | Path | None = None) -> Design:
    """Elaborate circuit text held in memory; `path` is shown in messages and anchors `use`."""
    return _design(text_source(text, path), _existing(path), root)


def _existing(path: str) -> Path | None:
    """The file `path` names, if any: text from memory may still stand for a file on disk."""
    try:
        return Path(path) if Path(path).is_file() else None
    except (OSError, ValueError):
        return None


def _design(source: Source, real: Path | None, root: str | Path | None) -> Design:
    if root is None:
        root = Path(source.path).parent
    with _collector_paused():
        return elaborate(Loader(Path(root)).top(source, real), source)


@contextlib.contextmanager
def _collector_paused():
    """Reading a file makes a few small objects per line, none in a reference cycle; CPython's
    cycle collector would walk all of them again at each of its full passes, which took a third
    of the time of a large file. Reference counting still frees everything as before."""
    if not gc.isenabled():
        yield
        return
    gc.disable()
    try:
        yield
    finally:
        gc.enable()
