"""A safe YAML loader whose mappings, lists and strings remember where they came from.

Limit files and `nodegate.yaml` arrive in pull requests from anyone, so they are read
with `yaml.SafeLoader` only, bounded in size and nesting depth, with aliases refused
(an alias can repeat a node exponentially: the "billion laughs" document), at most
`MAX_NODES` values and `MAX_LINE` characters on a line. Every error, down to a byte
that is not UTF-8 or a control character, is a `NodegateError` subclass carrying
`path:line:column`, and strings keep the location of each of their characters so that
an error inside a `check` expression points at the offending token, whether the string
was written plain, quoted or as a `|`/`>` block. Locations share the file's text
rather than copy their line, so memory grows with the file, not with values × line.
"""

from __future__ import annotations

import bisect
import re
from pathlib import Path
from typing import Iterable

import yaml

from checker.errors import ConfigError, Location, NodegateError, did_you_mean

MAX_DEPTH = 32  # nesting levels of mappings and lists
MAX_NODES = 20_000  # scalars, mappings and lists in one document: room for about 2,000 limits
MAX_LINE = 10_000  # characters on one line; a `check` or `about` longer than this is not written by hand
# Lone surrogates: a YAML escape (`"\ud800"`) makes one, and no UTF-8 report can hold it.
_SURROGATE = re.compile("[\ud800-\udfff]")


class _Source:
    """The text of one file and the offsets where its lines start, for index -> Location."""

    def __init__(self, path: str, text: str):
        self.path = path
        self.text = text
        self._starts = [0] + [match.end() for match in re.finditer("\n", text)]

    def location(self, index: int) -> Location:
        """The 1-based line and column of character `index`; the line's text stays in the shared file text."""
        row = bisect.bisect_right(self._starts, index) - 1
        start = self._starts[row]
        return Location(self.path, row + 1, index - start + 1, None, self.text, start)

    def long_line(self) -> int | None:
        """The index of the first character past `MAX_LINE` on a line, or None when every line fits."""
        ends = self._starts[1:] + [len(self.text) + 1]
        return next((start + MAX_LINE for start, end in zip(self._starts, ends) if end - 1 - start > MAX_LINE), None)


class LocatedStr(str):
    """A string from a YAML file; `.location` is where its first character stands.

    `location_at(offset)` finds the character at `offset` of the string in the file,
    so that an error inside an expression can point at its token.
    """

    location: Location

    def __new__(cls, value: str, source: _Source | None = None, start: int = 0, end: int = 0, style: str | None = None):
        self = super().__new__(cls, value)
        self._source, self._span, self._style = source, (start, end), style
        self._offsets: list[int] | None = None
        self.location = self.location_at(0) if source is not None else Location("<text>", 1, 1)
        return self

    def location_at(self, offset: int) -> Location:
        """Where character `offset` of this string stands in its file (clamped to the string)."""
        if self._source is None:
            return self.location
        if self._offsets is None:
            self._offsets = _align(str(self), self._source.text, *self._span, self._style)
        if not self._offsets:
            return self._source.location(self._span[0])
        index = self._offsets[min(max(offset, 0), len(self._offsets) - 1)]
        if offset >= len(self._offsets):  # one past the end: the column after the last character
            index += 1
        return self._source.location(index)


# Characters a scalar's source may hold that its value does not: indentation, line
# breaks, quotes and escape backslashes.
_SKIPPABLE = set(" \t\r\n'\"\\")


def _align(value: str, text: str, start: int, end: int, style: str | None) -> list[int]:
    """The file index of every character of a scalar's value, found by walking both.

    Plain, quoted, literal and folded scalars copy their non-blank characters
    verbatim, so a greedy walk that may skip only blanks, quotes and backslashes maps
    every such character exactly; characters made by escapes map near their escape.
    """
    pos = start
    if style in ("|", ">"):
        pos = text.find("\n", start, end) + 1 or end  # skip the block header line
    elif style in ("'", '"'):
        pos = start + 1
    offsets = []
    for char in value:
        probe = pos
        while probe < end and text[probe] != char and text[probe] in _SKIPPABLE:
            probe += 1
        if probe < end and text[probe] == char:
            pos = probe
        offsets.append(min(pos, max(end - 1, start)))
        pos += 1
    return offsets


class LocatedDict(dict):
    """A YAML mapping; `.location` is where it starts, with the location of each key and value."""

    def __init__(self, location: Location):
        super().__init__()
        self.location = location
        self._keys: dict[object, Location] = {}
        self._values: dict[object, Location] = {}

    def key_location(self, key: object) -> Location:
        return self._keys.get(key, self.location)

    def value_location(self, key: object) -> Location:
        return self._values.get(key, self.location)


class LocatedList(list):
    """A YAML sequence; `.location` is where it starts, `item_location(i)` where item i starts."""

    def __init__(self, location: Location):
        super().__init__()
        self.location = location
        self._items: list[Location] = []

    def item_location(self, index: int) -> Location:
        return self._items[index] if 0 <= index < len(self._items) else self.location


class _Loader(yaml.SafeLoader):
    """SafeLoader that refuses aliases and bounds the nesting depth and the number of values while
    composing, so an oversized document stops at the value that passes the bound, before the rest is built."""

    def __init__(self, text: str, error: type[NodegateError], source: _Source):
        super().__init__(text)
        self._error, self._source, self._depth, self._count = error, source, 0, 0

    def compose_node(self, parent, index):  # noqa: ANN001 - PyYAML's signature
        if self.check_event(yaml.AliasEvent):
            mark = self.peek_event().start_mark
            raise self._error("YAML aliases (`*name`) are not allowed here; write the value out",
                              self._source.location(mark.index))
        self._depth += 1
        self._count += 1
        if self._depth > MAX_DEPTH:
            mark = self.peek_event().start_mark
            raise self._error(f"nesting deeper than {MAX_DEPTH} levels", self._source.location(mark.index))
        if self._count > MAX_NODES:
            mark = self.peek_event().start_mark
            raise self._error(f"more than {MAX_NODES} YAML values in one file", self._source.location(mark.index),
                              ("split the file, or write fewer, broader limits (`each:` covers every part of a kind)",))
        try:
            return super().compose_node(parent, index)
        finally:
            self._depth -= 1


_COLLECTION_TAGS = ("tag:yaml.org,2002:map", "tag:yaml.org,2002:seq")


class _Builder:
    """Turns composed YAML nodes into located Python values."""

    def __init__(self, loader: _Loader, source: _Source, error: type[NodegateError]):
        self.loader, self.source, self.error = loader, source, error

    def build(self, node: yaml.Node) -> object:
        if isinstance(node, yaml.CollectionNode) and node.tag not in _COLLECTION_TAGS:
            raise self.error(f"YAML tag `{node.tag}` is not allowed here", self.where(node))
        if isinstance(node, yaml.MappingNode):
            return self.mapping(node)
        if isinstance(node, yaml.SequenceNode):
            result = LocatedList(self.where(node))
            for item in node.value:
                result.append(self.build(item))
                result._items.append(self.where(item))
            return result
        return self.scalar(node)

    def where(self, node: yaml.Node) -> Location:
        return self.source.location(node.start_mark.index)

    def scalar(self, node: yaml.ScalarNode) -> object:
        try:
            value = self.loader.construct_object(node, deep=True)
        except yaml.YAMLError as exc:
            raise self.error(f"cannot read this value: {getattr(exc, 'problem', exc)}", self.where(node)) from None
        except (ValueError, OverflowError) as exc:  # a date like 2030-13-01 passes the resolver, not the calendar
            raise self.error(f"cannot read this value: {exc}", self.where(node)) from None
        if isinstance(value, str):
            return self.text(value, node)
        return value

    def text(self, value: str, node: yaml.ScalarNode) -> LocatedStr:
        """A located string; a lone surrogate (from an escape like `"\\ud800"`) is refused here, at
        its place, because no UTF-8 report or terminal could print it later."""
        located = LocatedStr(value, self.source, node.start_mark.index, node.end_mark.index, node.style)
        found = _SURROGATE.search(value)
        if found is not None:
            raise self.error(f"`\\u{ord(found.group()):04x}` is half of a UTF-16 surrogate pair, not a character",
                             located.location_at(found.start()), ("write the character itself",))
        return located

    def mapping(self, node: yaml.MappingNode) -> LocatedDict:
        result = LocatedDict(self.where(node))
        for key_node, value_node in node.value:
            if key_node.tag == "tag:yaml.org,2002:merge":
                raise self.error("YAML merge keys (`<<`) are not allowed here", self.where(key_node))
            key = self.build(key_node)
            if not isinstance(key, (str, int, float, bool)) or key is None:
                raise self.error("a key must be a plain word", self.where(key_node))
            if key in result:
                raise self.error(f"`{key}` is given twice in this mapping", self.where(key_node),
                                 (f"first given at {result.key_location(key)}",))
            result[key] = self.build(value_node)
            result._keys[key] = self.where(key_node)
            result._values[key] = self.where(value_node)
        return result


def load_yaml_text(text: str, path: str, error: type[NodegateError] = ConfigError) -> object:
    """Parse YAML `text` (named `path` in messages) into located values; None for an empty document."""
    source = _Source(path, text)
    too_long = source.long_line()
    if too_long is not None:
        raise error(f"a line longer than {MAX_LINE} characters", source.location(too_long),
                    ("break it up: YAML folds long text written as a `>` block",))
    loader = None
    try:
        loader = _Loader(text, error, source)  # the reader refuses control characters here
        node = loader.get_single_node()
    except yaml.reader.ReaderError as exc:
        raise error(f"the control character U+{exc.character:04X} is not allowed in YAML; remove it",
                    source.location(exc.position)) from None
    except yaml.MarkedYAMLError as exc:
        mark = exc.problem_mark or exc.context_mark
        location = source.location(mark.index) if mark is not None else Location(path, 1, 1)
        raise error(f"YAML syntax: {exc.problem or exc.context}", location) from None
    finally:
        if loader is not None:
            loader.dispose()
    return None if node is None else _Builder(loader, source, error).build(node)


def load_yaml(path: Path, max_bytes: int = 1_000_000, error: type[NodegateError] = ConfigError,
              named_at: Location | None = None) -> object:
    """Read a YAML file of at most `max_bytes` into located values (see `load_yaml_text`).

    A file that cannot be read (missing, a folder, no permission, a name too long, a
    link loop) is an error at `named_at`, where the file was named, if given.
    """
    name = str(path)
    try:
        data = _read_bytes(Path(path), max_bytes)
    except OSError as exc:
        raise error(f"cannot read `{name}`: {exc.strerror or exc}", named_at) from None
    if len(data) > max_bytes:
        raise error(f"file is larger than the {max_bytes} bytes allowed", Location(name, 1, 1))
    return load_yaml_text(_decoded(data, name, error), name, error)


def _read_bytes(path: Path, max_bytes: int) -> bytes:
    """At most `max_bytes` + 1 bytes of `path`: enough to tell that it is too large, without reading it all."""
    with open(path, "rb") as handle:
        return handle.read(max_bytes + 1)


def _decoded(data: bytes, name: str, error: type[NodegateError]) -> str:
    """UTF-8 text without a byte-order mark (columns count from the text); an error at the first bad byte."""
    try:
        return data.decode("utf-8").removeprefix("\ufeff")
    except UnicodeDecodeError as exc:
        start = data.rfind(b"\n", 0, exc.start) + 1
        column = len(data[start:exc.start].decode("utf-8", errors="replace").removeprefix("\ufeff")) + 1
        end = data.find(b"\n", exc.start)
        line = data[start:end if end >= 0 else len(data)].decode("utf-8", errors="replace")
        where = Location(name, data.count(b"\n", 0, exc.start) + 1, column, line.rstrip("\r"))
        raise error(f"the file is not UTF-8 text (byte 0x{data[exc.start]:02X})", where) from None


def location_of(value: object, fallback: Location | None) -> Location | None:
    """The location a loaded value remembers, or `fallback` (numbers, dates and booleans remember none)."""
    return getattr(value, "location", None) or fallback


def check_keys(mapping: LocatedDict, allowed: Iterable[str], what: str,
               error: type[NodegateError] = ConfigError) -> None:
    """Raise `error` at the first key of `mapping` not in `allowed`, naming the nearest valid key."""
    allowed = tuple(allowed)
    for key in mapping:
        if key not in allowed:
            raise error(f"unknown key `{key}` in {what}", mapping.key_location(key),
                        did_you_mean(str(key), allowed) + (f"valid keys: {', '.join(allowed)}",))


def expect_mapping(value: object, what: str, fallback: Location | None,
                   error: type[NodegateError] = ConfigError) -> LocatedDict:
    """`value` if it is a mapping, else `error` at its location."""
    if not isinstance(value, LocatedDict):
        raise error(f"{what} must be a mapping of `key: value` lines", location_of(value, fallback))
    return value


def expect_list(value: object, what: str, fallback: Location | None,
                error: type[NodegateError] = ConfigError) -> LocatedList:
    """`value` if it is a list, else `error` at its location."""
    if not isinstance(value, LocatedList):
        raise error(f"{what} must be a list (lines starting with `- `)", location_of(value, fallback))
    return value


def expect_text(value: object, what: str, fallback: Location | None,
                error: type[NodegateError] = ConfigError) -> LocatedStr:
    """`value` if it is a non-empty string, else `error` at its location."""
    if not isinstance(value, LocatedStr) or not value.strip():
        raise error(f"{what} must be text", location_of(value, fallback))
    return value
