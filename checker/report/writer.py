"""Every file nodegate writes (reports, `fmt` rewrites, `init` starters) goes through `write_set`.

nodegate runs on pull requests from strangers, who can commit symbolic links and
choose report paths. So the one writer:

- walks from a trusted anchor folder (the repository root, or an `--out` folder
  outside it) down to each target with `O_NOFOLLOW` at every step, and refuses a
  symbolic link at the target or at any folder in between;
- stages the whole set in one fresh dot-named folder per target folder
  (`.nodegate-new-XXXXXXXX`, `O_CREAT|O_EXCL|O_NOFOLLOW` files inside), then renames each
  file into place, so every file is complete and a failure before the moves leaves
  the previous set untouched;
- replaces an existing file only when its owner says so (`Planned.replaces`): reports
  only replace earlier reports of the same format, `fmt` replaces the file it read,
  `init` never replaces anything, not even a dangling link;
- removes its staging folders on every exit; SIGTERM and SIGINT arriving while files
  are being written are held until the set is in place (`stoppable`).

On POSIX each rename is atomic; the set as a whole is not (there is no rename of
several files at once), but the moves are a handful of renames done with signals
held, after the new set is complete on disk. Only SIGKILL or a power cut between two
renames can leave a mix of old and new reports, and only SIGKILL can leave a staging
folder behind (its dot name keeps it out of the CI artifact).
"""

from __future__ import annotations

import contextlib
import os
import re
import secrets
import signal
import stat
import sys
import threading
from collections.abc import Callable, Iterator, Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path

from checker.errors import NodegateError
from checker.findings import Findings
from checker.report.html import render_html
from checker.report.json_report import render_json
from checker.report.junit import render_junit
from checker.report.markdown import FULL_REPORT_HINT, JOB_SUMMARY_LIMIT, render_markdown
from checker.report.sarif import render_sarif
from checker.verdict import Verdict

FORMATS = ("md", "html", "json", "junit", "sarif")
EXTENSIONS = {"md": ".md", "html": ".html", "json": ".json", "junit": ".xml", "sarif": ".sarif"}
NEW_FILE_MODE = 0o644
STAGING_PREFIX = ".nodegate-new-"
HEAD_BYTES = 1024  # how much of an existing report is read to recognise it
# What each renderer writes first: an existing file at a report path is replaced only
# when its first HEAD_BYTES match, so a report path can never overwrite a README, a
# setup file or anything else the repository holds.
SIGNATURES = {
    "md": re.compile(rb"\A\*\*nodegate: "),
    "html": re.compile(rb"\A<!DOCTYPE html>\s*<html[^>]*>.*?<title>nodegate report", re.DOTALL),
    "json": re.compile(rb'\A\{\s*"schema": "nodegate-findings/'),
    "junit": re.compile(rb'\A<\?xml[^>]*\?>\s*<testsuites name="nodegate"'),
    "sarif": re.compile(rb'\A\{\s*"\$schema": "[^"]*sarif[^"]*",.*?"driver": \{\s*"name": "nodegate"', re.DOTALL),
}
_FOLDER_FLAGS = os.O_RDONLY | os.O_DIRECTORY | os.O_NOFOLLOW
_NEW_FILE_FLAGS = os.O_WRONLY | os.O_CREAT | os.O_EXCL | os.O_NOFOLLOW
STOP_SIGNALS = (signal.SIGTERM, signal.SIGINT)


@dataclass(frozen=True)
class Planned:
    """One file to write.

    `anchor` is the folder trusted as it is (links above it are the caller's choice);
    nothing between it and `path` may be a link. `replaces` decides from the first
    bytes of an existing regular file whether it may be replaced; None: the path must
    be free.
    """

    anchor: Path
    path: Path
    text: str
    replaces: Callable[[bytes], bool] | None = None


class RunStopped(BaseException):
    """SIGTERM or SIGINT stopped the run.

    A BaseException, like KeyboardInterrupt, so that no `except Exception` on the way
    (the base revision's check swallows input errors) can mistake it for a failure to
    carry on from; `finally` blocks still run and remove temporary files.
    """

    def __init__(self, signum: int):
        super().__init__(signum)
        self.signum = signum


class _Held:
    """Signals that arrived while files were being written, delivered when it is done; and
    whether a stop is already on its way (a second signal then changes nothing)."""

    depth = 0
    pending: int | None = None
    stopping = False


def _on_stop_signal(signum: int, frame) -> None:
    if _Held.stopping:
        return
    if _Held.depth:
        _Held.pending = _Held.pending or signum
        return
    _Held.stopping = True
    raise RunStopped(signum)


@contextlib.contextmanager
def signals_held() -> Iterator[None]:
    """Hold SIGTERM and SIGINT (as handled by `stoppable`) until the block is done: writes
    and clean-ups then run to their end, and the stop follows right after."""
    _Held.depth += 1
    try:
        yield
    finally:
        _Held.depth -= 1
        if not _Held.depth and _Held.pending and not _Held.stopping:
            signum, _Held.pending, _Held.stopping = _Held.pending, None, True
            raise RunStopped(signum)


def stoppable(run: Callable[[], int]) -> int:
    """Call `run` with SIGTERM and SIGINT turned into `RunStopped`; return its code, or 128 + the signal.

    The previous handlers are restored afterwards. Outside the main thread (where
    Python cannot install handlers) `run` is simply called.
    """
    if threading.current_thread() is not threading.main_thread():
        return run()
    previous = {}
    try:
        for signum in STOP_SIGNALS:
            previous[signum] = signal.signal(signum, _on_stop_signal)
        return run()
    except RunStopped as stop:
        print(f"nodegate: stopped by {signal.Signals(stop.signum).name}; temporary files were removed",
              file=sys.stderr)
        return 128 + stop.signum
    finally:
        for signum, handler in previous.items():
            signal.signal(signum, signal.SIG_DFL if handler is None else handler)
        _Held.pending, _Held.stopping = None, False


def _refusal(path: Path, reason: str) -> NodegateError:
    return NodegateError(f"refusing to write `{path}`: {reason}",
                         notes=("nodegate never writes through a symbolic link or over a file it did not write",))


def _below_anchor(anchor: Path, path: Path) -> tuple[str, ...]:
    """The names leading from `anchor` to `path`, both absolute and without `..`; refused if outside."""
    try:
        parts = Path(os.path.normpath(path)).relative_to(os.path.normpath(anchor)).parts
    except ValueError:
        raise _refusal(path, f"it is not inside `{anchor}`") from None
    if not parts:
        raise _refusal(path, "it is a folder")
    return parts


def _open_anchor(anchor: Path) -> int:
    """The anchor folder, created when missing: it is the trusted starting point."""
    try:
        os.makedirs(anchor, exist_ok=True)
        return os.open(anchor, os.O_RDONLY | os.O_DIRECTORY)
    except OSError as error:
        raise NodegateError(f"cannot write into `{anchor}`: {error.strerror or error}") from None


def _open_folder(parent: int, name: str, shown: Path, create: bool) -> int | None:
    """The folder `name` inside `parent`, created when missing if `create` (else None); a link or a file is refused."""
    for attempt in (1, 2):
        try:
            return os.open(name, _FOLDER_FLAGS, dir_fd=parent)
        except FileNotFoundError:
            if not create:
                return None
            if attempt == 2:
                break
            with contextlib.suppress(FileExistsError):
                os.mkdir(name, 0o777, dir_fd=parent)
        except OSError as error:
            raise _entry_error(parent, name, shown, error) from None
    raise NodegateError(f"cannot create the folder `{shown}`")


def _entry_error(parent: int, name: str, shown: Path, error: OSError) -> NodegateError:
    """Say why `name` could not be used as a folder: a link, a file, or the system's reason."""
    try:
        mode = os.stat(name, dir_fd=parent, follow_symlinks=False).st_mode
    except OSError:
        mode = None
    if mode is not None and stat.S_ISLNK(mode):
        return _refusal(shown, f"`{shown}` is a symbolic link")
    if mode is not None and not stat.S_ISDIR(mode):
        return _refusal(shown, f"`{shown}` is a file, not a folder")
    return NodegateError(f"cannot write into `{shown}`: {error.strerror or error}")


def _open_target_folder(anchor_fd: int, anchor: Path, names: Sequence[str], create: bool) -> int | None:
    """Walk from the anchor to the target's folder, one `O_NOFOLLOW` step at a time; None when
    a folder is missing and `create` is false."""
    fd: int | None = os.dup(anchor_fd)
    shown = anchor
    try:
        for name in names:
            shown = shown / name
            child = _open_folder(fd, name, shown, create)
            os.close(fd)
            fd = child
            if fd is None:
                return None
    except BaseException:
        os.close(fd)
        raise
    return fd


def _existing_mode(folder: int, item: Planned) -> int | None:
    """The permissions to keep for the file at `item.path`, None when the path is free.

    Raises when what stands there may not be replaced (a link, a folder, a file the
    owner of `item` does not recognise, anything at all for a never-overwrite write).
    """
    name = item.path.name
    try:
        info = os.stat(name, dir_fd=folder, follow_symlinks=False)
    except FileNotFoundError:
        return None
    if stat.S_ISLNK(info.st_mode):
        raise _refusal(item.path, "it is a symbolic link")
    if item.replaces is None:
        raise _refusal(item.path, "something is already there, and this command never overwrites")
    if not stat.S_ISREG(info.st_mode):
        raise _refusal(item.path, "it is not a regular file")
    if not item.replaces(_head(folder, name)):
        raise _refusal(item.path, "the file there was not written by nodegate")
    return info.st_mode & 0o7777


def _head(folder: int, name: str) -> bytes:
    """The first HEAD_BYTES of a regular file, opened without following a link."""
    fd = os.open(name, os.O_RDONLY | os.O_NOFOLLOW | os.O_NONBLOCK, dir_fd=folder)
    try:
        return os.read(fd, HEAD_BYTES)
    finally:
        os.close(fd)


def _write_new(folder: int, name: str, text: str, mode: int) -> None:
    """Create `name` in `folder` (never an existing entry, never through a link) and write `text` to disk."""
    fd = os.open(name, _NEW_FILE_FLAGS, NEW_FILE_MODE, dir_fd=folder)
    try:
        data = text.encode("utf-8")
        while data:
            data = data[os.write(fd, data):]
        os.fchmod(fd, mode)
        os.fsync(fd)
    finally:
        os.close(fd)


@dataclass
class _Stage:
    """A target folder, its staging folder inside it, and the files staged there."""

    folder: int
    name: str
    fd: int
    items: list[Planned]


def _open_stage(folder: int) -> _Stage:
    name = STAGING_PREFIX + secrets.token_hex(4)
    os.mkdir(name, 0o700, dir_fd=folder)
    return _Stage(folder, name, os.open(name, _FOLDER_FLAGS, dir_fd=folder), [])


def _remove_stage(stage: _Stage) -> None:
    """Delete the staging folder and whatever is still in it (the files not moved out)."""
    for name in os.listdir(stage.fd):
        with contextlib.suppress(FileNotFoundError):
            os.unlink(name, dir_fd=stage.fd)
    os.close(stage.fd)
    os.rmdir(stage.name, dir_fd=stage.folder)


def _move_in(stage: _Stage) -> None:
    """Rename each staged file over its target; a path that must be free is linked, which fails if taken."""
    for item in stage.items:
        name = item.path.name
        if item.replaces is None:
            os.link(name, name, src_dir_fd=stage.fd, dst_dir_fd=stage.folder, follow_symlinks=False)
        else:
            os.replace(name, name, src_dir_fd=stage.fd, dst_dir_fd=stage.folder)


def _check_all(planned: Sequence[Planned], anchors: dict[Path, int]) -> None:
    """Refuse every link, file-as-folder and forbidden overwrite before anything is created."""
    for item in planned:
        if item.anchor not in anchors:
            anchors[item.anchor] = _open_anchor(item.anchor)
        folder = _open_target_folder(anchors[item.anchor], item.anchor, _below_anchor(item.anchor, item.path)[:-1],
                                     create=False)
        if folder is not None:
            try:
                _existing_mode(folder, item)
            finally:
                os.close(folder)


def _stage_all(planned: Sequence[Planned], stages: dict[Path, _Stage], anchors: dict[Path, int]) -> None:
    """Open (or create) every target folder from its anchor and write the staged copies, checking
    again what stands at each target now that the folders are held open."""
    for item in planned:
        folder_path = Path(os.path.normpath(item.path)).parent
        if folder_path not in stages:
            names = _below_anchor(item.anchor, item.path)[:-1]
            folder = _open_target_folder(anchors[item.anchor], item.anchor, names, create=True)
            try:
                stages[folder_path] = _open_stage(folder)
            except BaseException:
                os.close(folder)
                raise
        stage = stages[folder_path]
        mode = _existing_mode(stage.folder, item)
        _write_new(stage.fd, item.path.name, item.text, NEW_FILE_MODE if mode is None else mode)
        stage.items.append(item)


def write_set(planned: Sequence[Planned]) -> None:
    """Write every planned file, or none: staged in full first, then moved in (module docstring).

    Any refusal or system error is a NodegateError (exit 2) and leaves every target as it was.
    """
    stages: dict[Path, _Stage] = {}
    anchors: dict[Path, int] = {}
    with signals_held():
        try:
            _check_all(planned, anchors)
            _stage_all(planned, stages, anchors)
            for stage in stages.values():
                _move_in(stage)
        except OSError as error:
            where = f" `{error.filename}`" if isinstance(error.filename, str) else ""
            raise NodegateError(f"cannot write{where}: {error.strerror or error}") from None
        finally:
            _close_all(stages, anchors)


def _close_all(stages: Mapping[Path, _Stage], anchors: Mapping[Path, int]) -> None:
    """Remove every staging folder and close every folder opened, whatever happened before."""
    for stage in stages.values():
        with contextlib.suppress(OSError):
            _remove_stage(stage)
        os.close(stage.folder)
    for fd in anchors.values():
        os.close(fd)


def _anchor_of(folder: Path, root: Path) -> Path:
    """Where the walk without links starts for a target in `folder`.

    The shallowest ancestor of `folder`, as written, that is the repository `root`
    (compared after resolving, so `/tmp` and `/private/tmp` agree); a folder outside
    the repository (an `--out` chosen by whoever runs the check) is its own anchor.
    """
    folder = Path(os.path.abspath(folder))
    real_root = os.path.realpath(root)
    for candidate in reversed((folder, *folder.parents)):
        if os.path.realpath(candidate) == real_root:
            return candidate
    return folder


def is_report(fmt: str) -> Callable[[bytes], bool]:
    """Whether the first bytes of an existing file are those the `fmt` renderer writes."""
    return lambda head: SIGNATURES[fmt].match(head) is not None


def _full_report_hint(targets: Mapping[str, Path]) -> str:
    """Where the truncated Markdown sends its readers: the HTML or JSON file, when written."""
    for name in ("html", "json"):
        if name in targets:
            return f"in {Path(targets[name]).as_posix()}"
    return FULL_REPORT_HINT


def _renderers(findings: Findings, targets: Mapping[str, Path], root: Path,
               verdict: Verdict | None) -> dict[str, Callable[[], str]]:
    hint = _full_report_hint(targets)
    return {
        "md": lambda: render_markdown(findings, JOB_SUMMARY_LIMIT, full_report=hint, verdict=verdict),
        "html": lambda: render_html(findings, verdict),
        "json": lambda: render_json(findings, verdict),
        "junit": lambda: render_junit(findings, verdict),
        "sarif": lambda: render_sarif(findings, root, verdict),
    }


def write_reports(findings: Findings, targets: Mapping[str, Path], root: Path,
                  verdict: Verdict | None = None) -> None:
    """Render every format named in `targets` (md, html, json, junit, sarif), then write them as one set.

    `root` is the repository: the anchor of every target inside it and what SARIF
    paths are relative to. The Markdown is cut to the CI job-summary limit
    (JOB_SUMMARY_LIMIT bytes). Every report states `verdict` (without one, that of the
    default policy), so none can disagree with the exit code.
    """
    unknown = sorted(set(targets) - set(FORMATS))
    if unknown:
        raise NodegateError(f"unknown report format `{unknown[0]}`; choose from {', '.join(FORMATS)}")
    renderers = _renderers(findings, targets, root, verdict)
    texts = {name: renderers[name]() for name in targets}
    paths = {name: Path(os.path.abspath(path)) for name, path in targets.items()}
    write_set([Planned(_anchor_of(path.parent, root), path, texts[name], is_report(name))
               for name, path in paths.items()])
