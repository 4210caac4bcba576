"""Reading circuit files and following `use`, with every size and path bounded.

Files arrive in pull requests from anyone: a `use` path must stay inside the
root folder after symlinks are resolved, files are at most `MAX_FILE_BYTES`, at most
`MAX_FILES` files and `MAX_TOTAL_BYTES` are read, and a `use` cycle is an error naming the chain.
"""

from __future__ import annotations

import os
from pathlib import Path

from checker.errors import CircuitSyntaxError, DesignError, Location, NodegateError
from checker.language import quick
from checker.language.source import Source
from checker.language.syntax import Block, Let, Statement, Use

MAX_FILE_BYTES = 128 * 1024 * 1024  # a grid of a million nets is 110 MB (docs/language.md, "Limits of size")
MAX_FILES = 256
MAX_TOTAL_BYTES = 256 * 1024 * 1024  # every file read for one circuit together


def read_source(path: Path, shown: str, location: Location | None) -> Source:
    """The text of a file as a Source; DesignError (at `location`, the `use` if any) when unreadable."""
    try:
        if path.is_dir():
            raise DesignError(f"cannot find a file at `{shown}`: that is a folder", location)
        if not path.is_file():
            raise DesignError(f"cannot find the file `{shown}`", location)
        with open(path, "rb") as handle:
            data = handle.read(MAX_FILE_BYTES + 1)
    except OSError as error:
        raise DesignError(f"cannot read `{shown}`: {error.strerror or error}", location) from None
    if len(data) > MAX_FILE_BYTES:  # at the `use` that names it, else at the file itself
        raise DesignError(_too_large(shown, MAX_FILE_BYTES), location or Location(shown, 1, 1, _first_line(data)))
    return Source(shown, decode(data, shown))


def text_source(text: str, shown: str, limit: int | None = None) -> Source:
    """Text held in memory, bounded (by `limit` bytes, else MAX_FILE_BYTES) and normalised exactly as a
    file read from disk would be."""
    limit = MAX_FILE_BYTES if limit is None else limit
    if len(text) > limit or len(text.encode("utf-8", errors="surrogatepass")) > limit:
        raise DesignError(_too_large(shown, limit), Location(shown, 1, 1, text[:200].split("\n", 1)[0]))
    return Source(shown, _normalised(text))


def _first_line(data: bytes) -> str:
    """The start of the first line, for the error's echo (the file itself is not read again)."""
    return data[:200].split(b"\n", 1)[0].decode("utf-8", errors="replace")


def _too_large(shown: str, limit: int) -> str:
    return f"`{shown}` is larger than {limit // (1024 * 1024)} MiB"


def _normalised(text: str) -> str:
    """Without a byte-order mark, and with `\\n` line ends: columns count from the text as shown."""
    return text.removeprefix("\ufeff").replace("\r\n", "\n")


def decode(data: bytes, shown: str) -> str:
    """UTF-8 text with line ends normalised; a CircuitSyntaxError at the first bad byte."""
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as error:
        start = data.rfind(b"\n", 0, error.start) + 1
        end = data.find(b"\n", error.start)
        line = data[start:end if end >= 0 else len(data)].decode("utf-8", errors="replace")
        column = len(data[start:error.start].decode("utf-8", errors="replace")) + 1
        location = Location(shown, data.count(b"\n", 0, error.start) + 1, column, line)
        raise CircuitSyntaxError(f"the file is not UTF-8 text (byte 0x{data[error.start]:02X})", location) from None
    return _normalised(text)


class Loader:
    """Parses a top-level file and splices in the `let` and `block` statements of the files it uses.

    A file used twice (by two libraries, say) is read once; its second `use` adds nothing.
    """

    def __init__(self, root: Path):
        self.root = root.resolve()
        self.seen: set[Path] = set()
        self.size = 0  # characters read so far
        self.grammar = 0  # characters of them read by the grammar (checker.language.quick)

    def top(self, source: Source, real: Path | None) -> list[Statement]:
        chain = (real.resolve(),) if real is not None else ()
        self.size = len(source.text)
        self.seen.update(chain)
        return self.statements(source, chain, library=False)

    def statements(self, source: Source, chain: tuple[Path, ...], library: bool) -> list[Statement]:
        found: list[Statement] = []
        found_here, size = quick.read(source, quick.MAX_GRAMMAR_BYTES - self.grammar)
        self.grammar += size
        for statement in found_here:
            if isinstance(statement, Use):
                found.extend(self.use(statement, source, chain))
            elif library and not isinstance(statement, (Let, Block)):
                raise DesignError("a library file holds only `let`, `block` and `use` statements",
                                  statement.location)
            else:
                found.append(statement)
        return found

    def use(self, statement: Use, source: Source, chain: tuple[Path, ...]) -> list[Statement]:
        target = Path(source.path).parent / statement.path
        shown = os.path.normpath(target)
        resolved = self.resolve(target, statement)
        if resolved in chain:
            names = [p.name for p in chain[chain.index(resolved):]] + [resolved.name]
            raise DesignError(f"`use` cycle: {' -> '.join(names)}", statement.location)
        if resolved in self.seen:
            return []
        self.seen.add(resolved)
        if len(self.seen) > MAX_FILES:
            raise DesignError(f"more than {MAX_FILES} files are used", statement.location)
        library = read_source(resolved, shown, statement.location)
        self.size += len(library.text)
        if self.size > MAX_TOTAL_BYTES:
            raise DesignError(f"the files used come to more than {MAX_TOTAL_BYTES // (1024 * 1024)} MiB",
                              statement.location)
        try:
            return self.statements(library, chain + (resolved,), library=True)
        except NodegateError as error:  # say which `use` brought the file in
            raise type(error)(error.message, error.location,
                              (*error.notes, f"in the file used at {statement.location}")) from None

    def resolve(self, target: Path, statement: Use) -> Path:
        try:
            resolved = target.resolve()
        except (OSError, RuntimeError, ValueError):  # ValueError: a NUL byte in the path
            raise DesignError(f"cannot resolve `{statement.path}`", statement.location) from None
        if not resolved.is_relative_to(self.root):
            raise DesignError(f"`{statement.path}` is outside the root folder `{self.root}`",
                              statement.location, ("`use` paths stay inside the repository",))
        return resolved
