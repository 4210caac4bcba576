"""Limit files and built-in packs: YAML in, `Limit` and `Waiver` records out (docs/limits.md, "Files").

Only the shape is checked here (keys, types, ids, dates, `circuits` lists); expressions
are parsed and their names, and the circuit names of bindings, resolved later against the
circuits by `checker.limits.engine`. A file listed in `nodegate.yaml` with `circuits:` is
bound to them: its limits and waivers carry that binding, which their own `circuits:` may
only narrow (docs/limits.md, "Binding limits to circuits").
"""

from __future__ import annotations

import datetime
import importlib.util
import re
from dataclasses import dataclass
from pathlib import Path
from typing import Iterable

from checker.errors import CONTROL_CHARACTER, LimitError, Location, NodegateError, did_you_mean
from checker.findings import Limit, Waiver
from checker.limits.vocabulary import KINDS
from checker.yamlsource import (LocatedDict, LocatedStr, check_keys, expect_list, expect_mapping,
                                expect_text, load_yaml, load_yaml_text, location_of)

LIMIT_KEYS = ("id", "about", "check", "each", "where", "cases", "severity", "circuits")
WAIVER_KEYS = ("limit", "part", "case", "circuits", "reason", "until")
SEVERITIES = ("error", "warning")
MAX_BYTES = 1_000_000
MAX_TEXT = {"about": 500, "reason": 2000}  # characters of the free text shown in every report

_KEBAB = re.compile(r"[a-z0-9]+(-[a-z0-9]+)*")
_WORD = re.compile(r"[A-Za-z_][A-Za-z0-9_]*")
_PACK_NAME = re.compile(r"[a-z0-9][a-z0-9_-]*")


@dataclass(frozen=True)
class LimitFile:
    """The limits and waivers of one file (or pack), in the order written, and the circuits
    its `nodegate.yaml` entry binds it to (None: unbound)."""

    path: str
    limits: tuple[Limit, ...]
    waivers: tuple[Waiver, ...]
    circuits: tuple[str, ...] | None = None


def load_limit_file(path: Path | str, named_at: Location | None = None,
                    circuits: tuple[str, ...] | None = None) -> LimitFile:
    """Read a limits file, bound to `circuits` when given; LimitError at the offending key or value
    for anything malformed, or at `named_at` (where the configuration lists the file) when it cannot
    be read at all."""
    data = load_yaml(Path(path), MAX_BYTES, LimitError, named_at)
    return _read(data, str(path), str(path), circuits)


def load_limit_text(text: str, path: str, source: str | None = None) -> LimitFile:
    """As `load_limit_file`, from text already in memory (named `path` in messages)."""
    return _read(load_yaml_text(text, path, LimitError), path, source or path)


def rules_folder() -> Path:
    """Where the built-in packs live: package data `checker.rules` once installed, else the repository's rules/.

    The installed folder has no `__init__.py` (a namespace package), so it is found
    through its module spec rather than `importlib.resources.files`.
    """
    try:
        spec = importlib.util.find_spec("checker.rules")
    except ModuleNotFoundError:
        spec = None
    if spec is not None and spec.submodule_search_locations:
        return Path(next(iter(spec.submodule_search_locations)))
    return Path(__file__).parents[2] / "rules"


def available_packs() -> tuple[str, ...]:
    return tuple(sorted(path.stem for path in rules_folder().glob("*.yaml")))


def load_pack(name: str, location: Location | None = None, circuits: tuple[str, ...] | None = None) -> LimitFile:
    """A built-in pack by name (`derating` -> rules/derating.yaml), bound to `circuits` when given;
    `location` is where the name was written."""
    packs = available_packs()
    if not _PACK_NAME.fullmatch(name) or name not in packs:
        raise LimitError(f"no built-in limit pack `{name}`", location,
                         did_you_mean(name, packs) + (f"available packs: {', '.join(packs) or 'none'}",))
    path = rules_folder() / f"{name}.yaml"
    data = load_yaml(path, MAX_BYTES, LimitError)
    return _read(data, str(path), f"pack:{name}", circuits)


def _read(data: object, path: str, source: str, circuits: tuple[str, ...] | None = None) -> LimitFile:
    start = Location(path, 1, 1)
    if data is None:
        return LimitFile(path, (), (), circuits)
    top = expect_mapping(data, "a limits file", start, LimitError)
    check_keys(top, ("limits", "waivers"), "a limits file", LimitError)
    limits = tuple(_limit(item, source, circuits) for item in _entries(top, "limits"))
    unique_ids(limits)
    waivers = tuple(_waiver(item, circuits) for item in _entries(top, "waivers"))
    return LimitFile(path, limits, waivers, circuits)


def _entries(top: LocatedDict, key: str) -> list[LocatedDict]:
    if key not in top or top[key] is None:
        return []
    entries = expect_list(top[key], f"`{key}`", top.value_location(key), LimitError)
    return [expect_mapping(item, f"each entry of `{key}`", entries.item_location(i), LimitError)
            for i, item in enumerate(entries)]


def _text(entry: LocatedDict, key: str, what: str, required: bool = True):
    if key not in entry:
        if required:
            raise LimitError(f"{what} needs `{key}`", entry.location)
        return None
    return expect_text(entry[key], f"`{key}`", entry.value_location(key), LimitError)


def _limit(entry: LocatedDict, source: str, binding: tuple[str, ...] | None) -> Limit:
    check_keys(entry, LIMIT_KEYS, "a limit", LimitError)
    ident = _text(entry, "id", "a limit")
    if not _KEBAB.fullmatch(ident):
        raise LimitError(f"limit id `{ident}` must be kebab-case: lower-case words joined by `-`", ident.location)
    about = _text(entry, "about", f"limit `{ident}`", False)  # optional: reports then show the check
    if about is not None:
        about = _plain(about, "about")
        if "\n" in about.strip():
            raise LimitError("`about` is one line, shown in reports", about.location)
    each, where = _text(entry, "each", "", False), _text(entry, "where", "", False)
    if each is not None:
        _check_each(each)
    if where is not None and each is None:
        raise LimitError("`where` chooses among the parts of `each`; add `each: KIND`", entry.key_location("where"))
    return Limit(id=str(ident), about=str(about or "").strip(), check=_text(entry, "check", f"limit `{ident}`"),
                 severity=_severity(entry), each=each, where=where, cases=_cases(entry),
                 source=source, location=entry.key_location("id"), circuits=_bound(entry, binding))


def _plain(text: LocatedStr, key: str) -> LocatedStr:
    """Free text shown in reports and CI logs: control characters (terminal escapes, bidirectional
    overrides) would make it print or read differently from what the file says, so they are refused."""
    found = CONTROL_CHARACTER.search(text)
    if found is not None:
        raise LimitError(f"`{key}` holds the control character U+{ord(found.group()):04X}; write plain text",
                         text.location_at(found.start()))
    if len(text) > MAX_TEXT[key]:
        raise LimitError(f"`{key}` is longer than {MAX_TEXT[key]} characters; keep it to the point",
                         text.location_at(MAX_TEXT[key]))
    return text


def _check_each(each: str) -> None:
    if each.startswith("tag:"):
        if not _WORD.fullmatch(each[4:]):
            raise LimitError(f"`{each}` is not `tag:WORD`", each.location)
    elif each not in KINDS:
        raise LimitError(f"unknown part kind `{each}`", each.location,
                         did_you_mean(each, KINDS) + (f"kinds: {', '.join(KINDS)}; or `tag:WORD`",))


def _severity(entry: LocatedDict) -> str:
    severity = _text(entry, "severity", "", False)
    if severity is None:
        return "error"
    if severity not in SEVERITIES:
        raise LimitError(f"unknown severity `{severity}`", severity.location,
                         did_you_mean(severity, SEVERITIES) + ("severity is `error` or `warning`",))
    return str(severity)


def _cases(entry: LocatedDict) -> tuple[str, ...] | None:
    if "cases" not in entry:
        return None
    items = expect_list(entry["cases"], "`cases`", entry.value_location("cases"), LimitError)
    if not items:
        raise LimitError("`cases` lists at least one case; leave it out for every case", items.location)
    return _once_each(tuple(expect_text(item, "a case name", items.item_location(i), LimitError)
                            for i, item in enumerate(items)), "case")


def _once_each(names: tuple, what: str, error: type[NodegateError] = LimitError) -> tuple:
    """The names of `cases:` or `circuits:`, each listed once: a repeated name is a slip (another
    one was meant), which would otherwise pass unnoticed."""
    for index, name in enumerate(names):
        if name in names[:index]:
            raise error(f"{what} `{name}` is listed twice in `{what}s`", name.location)
    return names


def circuit_names(value: object, where: Location | None,
                  error: type[NodegateError] = LimitError) -> tuple[LocatedStr, ...]:
    """A `circuits:` list (in a limits file, or on a limits entry of `nodegate.yaml`): circuit names
    from their `circuit NAME` line, each once; whether they exist is checked against the circuits."""
    items = expect_list(value, "`circuits`", where, error)
    if not items:
        raise error("`circuits` lists at least one circuit; leave it out to apply to every circuit",
                    items.location)
    return _once_each(tuple(expect_text(item, "a circuit name", items.item_location(i), error)
                            for i, item in enumerate(items)), "circuit", error)


def _bound(entry: LocatedDict, binding: tuple[str, ...] | None) -> tuple[str, ...] | None:
    """The circuits a limit or waiver is bound to: its own `circuits:`, which may only narrow its
    file's binding (a name outside it would be a limit the configuration keeps off that circuit)."""
    if "circuits" not in entry:
        return binding
    own = circuit_names(entry["circuits"], entry.value_location("circuits"))
    for name in own:
        if binding is not None and name not in binding:
            raise LimitError(f"circuit `{name}` is outside its file's binding "
                             f"(`circuits: [{', '.join(binding)}]`)", name.location,
                             did_you_mean(name, binding)
                             + (f"the configuration binds this file at {location_of(binding[0], None)}",))
    return own


def unique_ids(limits: Iterable[Limit]) -> list[Limit]:
    """The limits in order; an id used twice (in one file, or across the files and packs of a run)
    is an error at the second, since findings, waivers and baselines name limits by id."""
    seen: dict[str, Limit] = {}
    for limit in limits:
        if limit.id in seen:
            first = seen[limit.id]
            raise LimitError(f"limit id `{limit.id}` is used twice", limit.location,
                             (f"first used in {first.source} at {first.location}",))
        seen[limit.id] = limit
    return list(seen.values())


def _waiver(entry: LocatedDict, binding: tuple[str, ...] | None) -> Waiver:
    check_keys(entry, WAIVER_KEYS, "a waiver", LimitError)
    limit = _text(entry, "limit", "a waiver")
    reason = _plain(_text(entry, "reason", f"the waiver of `{limit}`"), "reason")
    return Waiver(limit=limit, reason=str(reason).strip(), until=_date(entry),
                  part=_text(entry, "part", "", False), case=_text(entry, "case", "", False),
                  location=entry.location, circuits=_bound(entry, binding))


def _date(entry: LocatedDict) -> datetime.date:
    if "until" not in entry:
        raise LimitError("a waiver needs `until`, the date it ends (YYYY-MM-DD)", entry.location)
    value, where = entry["until"], entry.value_location("until")
    if isinstance(value, datetime.datetime):
        return value.date()
    if isinstance(value, datetime.date):
        return value
    if isinstance(value, str):
        try:
            return datetime.date.fromisoformat(value.strip())
        except ValueError:
            pass
    raise LimitError("`until` must be a date written YYYY-MM-DD", location_of(value, where))

