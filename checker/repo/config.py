"""`nodegate.yaml`: which circuits, which limits, how to analyse, where the reports go.

Read with the located safe YAML loader; every unknown key or wrong type is a
ConfigError at its line and column with the nearest valid key. Circuit globs and
limit paths are relative to the configuration file and must stay inside its folder
(the repository root).
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field
from pathlib import Path

from checker.errors import ConfigError, Location, shown_path
from checker.limits.files import circuit_names
from checker.report.writer import EXTENSIONS, HEAD_BYTES, is_report
from checker.yamlsource import (
    LocatedDict, LocatedStr, check_keys, expect_list, expect_mapping, expect_text, load_yaml,
)

TOP_KEYS = ("circuits", "limits", "analysis", "report")
ANALYSIS_KEYS = ("tolerances", "samples", "seed", "vertex_values", "scheduler")
MAX_VERTEX_VALUES = 20  # worst-case: 1,048,576 vertices per case, the most a configuration may ask for
TOLERANCE_MODES = ("nominal", "worst-case", "monte-carlo")
CONFIG_NAMES = ("nodegate.yaml", "nodegate.yml")  # looked for in this order
REPORT_FORMAT = {"markdown": "md", "html": "html", "json": "json", "junit": "junit", "sarif": "sarif"}  # key -> format
MAX_CIRCUITS = 1000
MAX_SAMPLES = 1_000_000


@dataclass(frozen=True)
class LimitSource:
    """A limits file (`path`) or a built-in pack (`pack`), with where the configuration names it,
    and the circuits it is bound to (None: every circuit, docs/limits.md)."""

    path: Path | None = None
    pack: str | None = None
    location: Location | None = field(default=None, compare=False)
    circuits: tuple[str, ...] | None = field(default=None, compare=False)


@dataclass(frozen=True)
class Config:
    """A loaded configuration; all paths absolute."""

    path: Path
    root: Path
    circuits: tuple[Path, ...]
    limits: tuple[LimitSource, ...]
    tolerances: str = "nominal"
    samples: int = 2000
    seed: int = 1
    vertex_values: int | None = None  # None: the analysis's own default (docs/analysis.md)
    scheduler: str | None = None  # monte-carlo: a Dask distributed scheduler's address (docs/analysis.md)
    analysis_at: dict[str, Location] = field(default_factory=dict, compare=False)  # `analysis` key -> its value
    reports: dict[str, Path] = field(default_factory=dict)  # format (md, html, ...) -> path


def find_config(directory: Path, config: Path | None) -> Path:
    """The configuration file: `--config`, else the nearest nodegate.yaml (or .yml) in DIR or a
    folder above it, so a command run from inside a board's folder finds the repository's.

    The walk stops at the git top level (a folder holding `.git`) or the filesystem root:
    a configuration above the repository belongs to something else. A path the system
    refuses (a name too long, no permission) is a ConfigError naming it.
    """
    try:
        return _find_config(directory, config)
    except OSError as error:
        raise ConfigError(f"cannot use `{config or directory}`: {error.strerror or error}") from None


def _find_config(directory: Path, config: Path | None) -> Path:
    if config is not None:
        if config.is_dir():
            raise ConfigError(f"`--config {config}` is a folder; --config names the configuration file itself")
        if not config.is_file():
            raise ConfigError(f"configuration file `{config}` does not exist")
        return config
    if directory.is_file():
        hint = "give its folder, or name it with --config" if directory.suffix in (".yaml", ".yml") else \
            "`nodegate solve FILE` prints the operating point of one circuit file"
        raise ConfigError(f"`{directory}` is a file; `nodegate check` takes the repository's folder", notes=(hint,))
    if not directory.is_dir():
        raise ConfigError(f"folder `{directory}` does not exist")
    folders = _folders_upward(directory)
    for folder in folders:
        for name in CONFIG_NAMES:
            if (folder / name).is_file():
                return folder / name
    raise ConfigError(f"no nodegate.yaml in `{directory}`{_above(folders)}; "
                      f"run `nodegate init {directory}` to start one")


def _folders_upward(directory: Path) -> list[Path]:
    """DIR as given, then each folder above it, up to and including the first holding `.git`."""
    folders = [directory]
    for folder in Path(os.path.abspath(directory)).parents:
        if (folders[-1] / ".git").exists():
            break
        folders.append(folder)
    return folders


def _above(folders: list[Path]) -> str:
    """Where the walk went above DIR, in words for the error."""
    if len(folders) == 1:
        return " (a git top level, so no folder above it was searched)"
    top = folders[-1]
    why = "the git top level" if (top / ".git").exists() else "the filesystem root"
    return f" nor in any folder above it up to `{top}` ({why})"


def load_config(path: Path) -> Config:
    """Read and validate a configuration file."""
    path = path.resolve()
    root, shown = path.parent, shown_path(path)  # messages name the file as those of circuits and limits do
    data = load_yaml(Path(shown))
    start = Location(shown, 1, 1)
    if data is None:
        raise ConfigError("the configuration is empty; it needs at least `circuits:`", start)
    data = expect_mapping(data, "the configuration", start)
    check_keys(data, TOP_KEYS, "the configuration")
    if "circuits" not in data:
        raise ConfigError("the configuration has no `circuits:` list", data.location)
    analysis = _analysis(data.get("analysis"), data)
    return Config(
        path=path, root=root,
        circuits=_circuits(data["circuits"], root, data.value_location("circuits")),
        limits=_limits(data.get("limits"), root, data),
        reports=_reports(data.get("report"), root, data),
        **analysis,
    )


def _inside(root: Path, text: str, where: Location | None, what: str) -> Path:
    """`text` as a path relative to `root`, refused if it leaves the repository."""
    if "\0" in text:
        raise ConfigError(f"{what} contains a NUL character", where)
    if Path(text).is_absolute():
        raise ConfigError(f"{what} `{text}` must be relative to the configuration file", where)
    resolved = _resolved(root / text, where, what)
    if resolved != root and root not in resolved.parents:
        raise ConfigError(f"{what} `{text}` is outside the repository (the configuration's folder)", where)
    return resolved


def _circuits(value: object, root: Path, where: Location) -> tuple[Path, ...]:
    items = expect_list(value, "`circuits`", where)
    found: dict[Path, None] = {}
    for index, item in enumerate(items):
        pattern = expect_text(item, "a circuit path or glob", items.item_location(index))
        _inside(root, pattern, pattern.location, "circuit path")
        matches = _matches(root, str(pattern), pattern.location)
        if not matches:
            raise ConfigError(f"no circuit file matches `{pattern}`", pattern.location)
        for match in matches:
            resolved = _resolved(match, pattern.location, "circuit path")
            if resolved != root and root not in resolved.parents:
                raise ConfigError(f"circuit `{match}` is outside the repository", pattern.location)
            if not _is_file(resolved, pattern.location, "circuit file"):
                raise ConfigError(f"circuit file `{pattern}` does not exist", pattern.location)
            found[resolved] = None
    if not found:
        raise ConfigError("`circuits` lists no circuit", where)
    if len(found) > MAX_CIRCUITS:
        raise ConfigError(f"more than {MAX_CIRCUITS} circuits", where)
    return tuple(found)


def _resolved(path: Path, where: Location | None, what: str) -> Path:
    """`path` with its links followed; a link loop (which Python reports as RuntimeError or
    ELOOP) or a name the system refuses is a ConfigError at `where`."""
    try:
        return path.resolve()
    except RuntimeError:
        raise ConfigError(f"{what} `{path.name}` is a loop of symbolic links", where) from None
    except OSError as error:
        raise ConfigError(f"cannot follow {what} `{path.name}`: {error.strerror or error}", where) from None


def _is_file(path: Path, where: Location | None, what: str) -> bool:
    """Whether `path` is a file; a name too long or a folder without permission is a ConfigError at `where`."""
    try:
        return path.is_file()
    except OSError as error:
        raise ConfigError(f"cannot use {what} `{path.name}`: {error.strerror or error}", where) from None


def _is_glob(pattern: str) -> bool:
    return any(ch in pattern for ch in "*?[")


def _matches(root: Path, pattern: str, where: Location) -> list[Path]:
    """The files a circuit path or glob names, sorted."""
    if not _is_glob(pattern):
        return [root / pattern]
    try:
        return sorted(root.glob(pattern))
    except (ValueError, OSError) as error:
        raise ConfigError(f"cannot use the glob `{pattern}`: {error}", where) from None


def _limits(value: object, root: Path, data: LocatedDict) -> tuple[LimitSource, ...]:
    if value is None:
        return ()
    items = expect_list(value, "`limits`", data.value_location("limits"))
    sources = []
    for index, item in enumerate(items):
        where = items.item_location(index)
        if isinstance(item, LocatedDict):
            sources.append(_limits_entry(item, root, where))
            continue
        text = expect_text(item, "a limits file path, `path: FILE` or `pack: NAME`", where)
        sources.append(LimitSource(path=_limits_file(root, text), location=text.location))
    _listed_once(sources)
    return tuple(sources)


def _limits_entry(item: LocatedDict, root: Path, where: Location) -> LimitSource:
    """`- path: FILE` or `- pack: NAME`, either optionally bound with `circuits: [NAME, ...]`."""
    check_keys(item, ("path", "pack", "circuits"), "a limits entry")
    if ("path" in item) == ("pack" in item):
        raise ConfigError("a limits entry names either `path: FILE` or `pack: NAME`", where)
    circuits = circuit_names(item["circuits"], item.value_location("circuits"), ConfigError) \
        if "circuits" in item else None
    if "pack" in item:
        name = expect_text(item["pack"], "`pack`", item.value_location("pack"))
        return LimitSource(pack=str(name), location=name.location, circuits=circuits)
    text = expect_text(item["path"], "`path`", item.value_location("path"))
    return LimitSource(path=_limits_file(root, text), location=text.location, circuits=circuits)


def _limits_file(root: Path, text: LocatedStr) -> Path:
    """A limits file path inside the repository that names an existing file."""
    path = _inside(root, text, text.location, "limits file")
    if not _is_file(path, text.location, "limits file"):
        raise ConfigError(f"limits file `{text}` does not exist", text.location)
    return path


def _listed_once(sources: list[LimitSource]) -> None:
    """A limits file or pack named twice would define every limit id twice; say so where it happens."""
    seen: dict[tuple, Location | None] = {}
    for source in sources:
        key = (source.path, source.pack)
        if key in seen:
            what = f"pack `{source.pack}`" if source.pack else f"limits file `{source.path.name}`"
            raise ConfigError(f"{what} is listed twice in `limits`", source.location,
                              (f"first listed at {seen[key]}",))
        seen[key] = source.location


def _analysis(value: object, data: LocatedDict) -> dict:
    if value is None:
        return {}
    section = expect_mapping(value, "`analysis`", data.value_location("analysis"))
    check_keys(section, ANALYSIS_KEYS, "`analysis`")
    result: dict = {"analysis_at": {key: section.value_location(key) for key in section}}
    if "tolerances" in section:
        mode = expect_text(section["tolerances"], "`tolerances`", section.value_location("tolerances"))
        if mode not in TOLERANCE_MODES:
            raise ConfigError(f"`tolerances` must be one of {', '.join(TOLERANCE_MODES)}", mode.location)
        result["tolerances"] = str(mode)
    if "scheduler" in section:
        result["scheduler"] = str(expect_text(section["scheduler"], "`scheduler`", section.value_location("scheduler")))
    bounds = (("samples", 1, MAX_SAMPLES), ("seed", 0, 2**32 - 1), ("vertex_values", 0, MAX_VERTEX_VALUES))
    for key, low, high in bounds:
        if key in section:
            number = section[key]
            if isinstance(number, bool) or not isinstance(number, int) or not low <= number <= high:
                raise ConfigError(f"`{key}` must be a whole number from {low} to {high}",
                                  section.value_location(key))
            result[key] = number
    return result


def _reports(value: object, root: Path, data: LocatedDict) -> dict[str, Path]:
    if value is None:
        return {}
    section = expect_mapping(value, "`report`", data.value_location("report"))
    check_keys(section, REPORT_FORMAT, "`report`")
    reports: dict[str, Path] = {}
    for key in section:
        text = expect_text(section[key], f"`report.{key}`", section.value_location(key))
        path = _report_path(root, text)
        _not_taken(path, text, reports)
        _writable_report(path, root, text, REPORT_FORMAT[key])
        reports[REPORT_FORMAT[key]] = path
    return reports


def _report_path(root: Path, text: LocatedStr) -> Path:
    """`text` relative to `root`, normalised as written (links are not followed: the writer refuses them)."""
    if "\0" in text:
        raise ConfigError("report path contains a NUL character", text.location)
    if Path(text).is_absolute():
        raise ConfigError(f"report path `{text}` must be relative to the configuration file", text.location)
    path = Path(os.path.normpath(root / text))
    if path != root and root not in path.parents:
        raise ConfigError(f"report path `{text}` is outside the repository (the configuration's folder)",
                          text.location)
    return path


def _writable_report(path: Path, root: Path, text: LocatedStr, fmt: str) -> None:
    """Refuse report paths that would overwrite the repository's own files instead of a report.

    A configuration arrives in pull requests from anyone, so a report path must end in
    its format's extension, must not lie under `.git` nor go through a file or a
    symbolic link, and may name an existing file only when that file is a report of
    the same format that nodegate wrote before (its first bytes say so): a README,
    a setup file or an input is never replaced.
    """
    where = text.location
    if path == root or path.is_dir() and not path.is_symlink():
        raise ConfigError(f"report path `{text}` is a folder; name the report file", where)
    if ".git" in path.relative_to(root).parts:
        raise ConfigError(f"report path `{text}` is inside `.git`", where)
    if path.suffix.lower() != EXTENSIONS[fmt]:
        raise ConfigError(f"report path `{text}` must end in `{EXTENSIONS[fmt]}`", where,
                          (f"the {fmt} report is written only to a file of its own kind",))
    step = root
    for name in path.relative_to(root).parts:
        step = step / name
        if step.is_symlink():
            raise ConfigError(f"report path `{text}` goes through `{step.relative_to(root)}`, "
                              "which is a symbolic link", where)
        if step != path and step.exists() and not step.is_dir():
            raise ConfigError(f"report path `{text}` goes through `{step.name}`, which is a file", where)
    if path.exists() and not _earlier_report(path, fmt):
        raise ConfigError(f"report path `{text}` names an existing file that is not a nodegate {fmt} report",
                          where, ("nodegate replaces only reports it wrote itself",))


def _earlier_report(path: Path, fmt: str) -> bool:
    """Whether `path` is a regular file that starts as the `fmt` renderer writes."""
    if not path.is_file():
        return False
    try:
        with open(path, "rb") as handle:
            return is_report(fmt)(handle.read(HEAD_BYTES))
    except OSError:
        return False


def _not_taken(path: Path, text: LocatedStr, taken: dict[str, Path]) -> None:
    """Two formats written to one path would leave only the last."""
    for fmt, other in taken.items():
        if other == path:
            key = next(k for k, v in REPORT_FORMAT.items() if v == fmt)
            raise ConfigError(f"report path `{text}` is already the path of `report.{key}`", text.location)
