"""A safe YAML loader whose mappings, lists and strings remember where they came from.

Limit files and `nodegate.yaml` arrive in pull requests from anyone, so they are read
with `yaml.SafeLoader` only, bounded in size and nesting depth, with aliases refused
(an alias can repeat a node exponentially: the "billion laughs" document). Every
error is a `NodegateError` subclass carrying `path:line:column`, and strings keep the
location of each of their characters so that an error inside a `check` expression
points at the offending token, whether the string was written plain, quoted or as a
`|`/`>` block.
"""

from __future__ import annotations

import bisect
from pathlib import Path
from typing import Iterable

import yaml

from checker.errors import ConfigError, Location, NodegateError, did_you_mean

MAX_DEPTH = 32  # nesting levels of mappings and lists
MAX_NODES = 100_000  # scalars, mappings and lists in one document


class _Source:
    """The text of one file and the offsets where its lines start, for index -> Location."""

    def __init__(self, path: str, text: str):
        self.path = path
        self.text = text
        self._starts = [0] + [i + 1 for i, ch in enumerate(text) if ch == "\n"]

    def location(self, index: int) -> Location:
        """The 1-based line and column of character `index`, with the line's text."""
        row = bisect.bisect_right(self._starts, index) - 1
        start = self._starts[row]
        end = self.text.find("\n", start)
        line = self.text[start:] if end < 0 else self.text[start:end]
        return Location(self.path, row + 1, index - start + 1, line.rstrip("\r"))


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
    """SafeLoader that refuses aliases and bounds the nesting depth while composing."""

    def __init__(self, text: str, error: type[NodegateError], source: _Source):
        super().__init__(text)
        self._error, self._source, self._depth = error, source, 0

    def compose_node(self, parent, index):  # noqa: ANN001 - PyYAML's signature
        if self.check_event(yaml.AliasEvent):
            mark = self.peek_event().start_mark
            raise self._error("YAML aliases (`*name`) are not allowed here; write the value out",
                              self._source.location(mark.index))
        self._depth += 1
        if self._depth > MAX_DEPTH:
            mark = self.peek_event().start_mark
            raise self._error(f"nesting deeper than {MAX_DEPTH} levels", self._source.location(mark.index))
        try:
            return super().compose_node(parent, index)
        finally:
            self._depth -= 1


_COLLECTION_TAGS = ("tag:yaml.org,2002:map", "tag:yaml.org,2002:seq")


class _Builder:
    """Turns composed YAML nodes into located Python values, counting nodes."""

    def __init__(self, loader: _Loader, source: _Source, error: type[NodegateError]):
        self.loader, self.source, self.error, self.count = loader, source, error, 0

    def build(self, node: yaml.Node) -> object:
        self.count += 1
        if self.count > MAX_NODES:
            raise self.error(f"more than {MAX_NODES} YAML values", self.where(node))
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
            return LocatedStr(value, self.source, node.start_mark.index, node.end_mark.index, node.style)
        return value

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
    loader = _Loader(text, error, source)
    try:
        node = loader.get_single_node()
    except yaml.MarkedYAMLError as exc:
        mark = exc.problem_mark or exc.context_mark
        location = source.location(mark.index) if mark is not None else Location(path, 1, 1)
        raise error(f"YAML syntax: {exc.problem or exc.context}", location) from None
    except yaml.YAMLError as exc:  # reader errors: control characters and the like
        raise error(f"YAML: {exc}", Location(path, 1, 1)) from None
    finally:
        loader.dispose()
    return None if node is None else _Builder(loader, source, error).build(node)


def load_yaml(path: Path, max_bytes: int = 1_000_000, error: type[NodegateError] = ConfigError) -> object:
    """Read a YAML file of at most `max_bytes` into located values (see `load_yaml_text`)."""
    name = str(path)
    try:
        size = Path(path).stat().st_size
        if size > max_bytes:
            raise error(f"file is {size} bytes, more than the {max_bytes} allowed", Location(name, 1, 1))
        text = Path(path).read_bytes().decode("utf-8").removeprefix("\ufeff")  # columns count from the text
    except OSError as exc:
        raise error(f"cannot read `{name}`: {exc.strerror or exc}", None) from None
    except UnicodeDecodeError as exc:
        raise error(f"file is not UTF-8 text (byte {exc.start})", Location(name, 1, 1)) from None
    return load_yaml_text(text, name, error)


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
