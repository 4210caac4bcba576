"""The files of another git revision, for `nodegate check --base REF`.

The base revision is written to a temporary folder from git's object store, so the
working tree, the index and the checked-out branch of the repository are never
touched: we run `git archive` into a tar file and extract it ourselves with the
standard library's "data" filter (no absolute paths, no `..`, no links leaving the
folder, no device files). Git runs as a subprocess with a list of arguments and a
timeout; a ref that could be read as an option is refused before git sees it.

`git archive` honours the `export-ignore` and `export-subst` attributes of the
revision's `.gitattributes`: files marked so are left out or rewritten, as in any
archive of that revision.
"""

from __future__ import annotations

import contextlib
import os
import subprocess
import tarfile
import tempfile
from collections.abc import Iterator
from pathlib import Path

from checker.errors import ConfigError
from checker.report.writer import signals_held

GIT_TIMEOUT = 30.0  # s, for quick queries (rev-parse)
ARCHIVE_TIMEOUT = 300.0  # s, for writing the archive of a whole revision
MAX_REF_LENGTH = 256  # characters; longer text is not a ref anyone types
MAX_FILES = 200_000  # entries in one revision
MAX_BYTES = 4 * 1024**3  # bytes extracted from one revision


class _GitFailed(ConfigError):
    """Git ran and said no; callers turn this into a message about what they asked."""


def _git(args: list[str], cwd: Path, timeout: float = GIT_TIMEOUT) -> str:
    """Run `git ARGS` in `cwd` and return its standard output; any failure is a ConfigError."""
    try:
        done = subprocess.run(
            ["git", *args], cwd=cwd, capture_output=True, text=True,
            timeout=timeout, check=False, stdin=subprocess.DEVNULL,
        )
    except FileNotFoundError as error:
        raise ConfigError("`--base` needs git, and no `git` command was found on PATH") from error
    except subprocess.TimeoutExpired as error:
        raise ConfigError(f"git {args[0]} took longer than {timeout:g} s and was stopped") from error
    if done.returncode != 0:
        detail = done.stderr.strip().splitlines()
        raise _GitFailed(detail[-1] if detail else f"git {args[0]} failed")
    return done.stdout


def check_ref(ref: str) -> None:
    """Refuse text that git could take for an option or that cannot be a ref."""
    if not ref:
        raise ConfigError("`--base` needs a git revision, e.g. `origin/main`")
    if ref.startswith("-"):
        raise ConfigError(f"`--base {ref}`: a revision cannot start with `-`")
    if len(ref) > MAX_REF_LENGTH or any(ord(ch) < 32 or ch == "\x7f" for ch in ref):
        raise ConfigError("`--base`: that is not a git revision (too long or control characters)")


def repo_location(repo_root: Path) -> tuple[Path, str]:
    """The git top level above `repo_root` and the path from it to `repo_root` (`""` or `boards/x/`)."""
    if not Path(repo_root).is_dir():
        raise ConfigError(f"`{repo_root}` is not a folder")
    try:
        top = _git(["rev-parse", "--show-toplevel"], repo_root).rstrip("\n")
        prefix = _git(["rev-parse", "--show-prefix"], repo_root).rstrip("\n")
    except _GitFailed as error:
        raise ConfigError(f"`--base` needs a git repository, and `{repo_root}` is not inside one",
                          notes=(error.message,)) from error
    return Path(top), prefix


def resolve_commit(top: Path, ref: str) -> str:
    """The full commit id that `ref` names in the repository at `top`."""
    check_ref(ref)
    try:
        out = _git(["rev-parse", "--verify", "--quiet", "--end-of-options", f"{ref}^{{commit}}"], top)
    except _GitFailed as error:
        raise ConfigError(
            f"`--base {ref}`: no such commit in this repository",
            notes=("in a shallow clone, fetch it first: git fetch --no-tags --depth=1 origin "
                   "<branch or commit>",),
        ) from error
    return out.strip()


def _bounded_data_filter():
    """tarfile's "data" filter, plus a bound on the number of entries and bytes (MAX_FILES, MAX_BYTES)."""
    totals = {"files": 0, "bytes": 0}

    def keep(member: tarfile.TarInfo, path: str) -> tarfile.TarInfo | None:
        totals["files"] += 1
        totals["bytes"] += max(member.size, 0)
        if totals["files"] > MAX_FILES or totals["bytes"] > MAX_BYTES:
            raise ConfigError(f"the base revision is larger than nodegate will unpack "
                              f"({MAX_FILES} files, {MAX_BYTES // 1024**2} MiB)")
        if os.path.isabs(member.name):  # the "data" filter would strip the `/`; git never writes one
            raise tarfile.AbsolutePathError(member)
        return tarfile.data_filter(member, path)

    return keep


def extract_tar(archive: Path, dest: Path) -> None:
    """Unpack a tar file into `dest`, refusing any entry that would land outside it."""
    if not hasattr(tarfile, "data_filter"):  # added in 3.10.12 and 3.11.4 (Python docs, tarfile)
        raise ConfigError("`--base` needs Python 3.10.12, 3.11.4 or newer to unpack a revision safely")
    try:
        with tarfile.open(archive, mode="r:") as tar:
            tar.extractall(dest, filter=_bounded_data_filter())
    except tarfile.FilterError as error:
        raise ConfigError(f"refusing an unsafe entry in the archive of the base revision: {error}") from error
    except (tarfile.TarError, OSError) as error:
        raise ConfigError(f"cannot unpack the base revision: {error}") from error


def materialize_revision(repo_root: Path, ref: str, dest: Path) -> Path:
    """Write the files of revision `ref` into `dest`; return the folder matching `repo_root` there.

    `repo_root` may be a subfolder of the git top level (a hardware project inside a
    larger repository): the whole revision is written, so relative paths leaving the
    project still resolve, and `dest/<path of repo_root>` is returned. That folder does
    not exist when the project is newer than `ref`; the caller then has no base to
    compare with.
    """
    check_ref(ref)
    top, prefix = repo_location(Path(repo_root))
    commit = resolve_commit(top, ref)
    dest = Path(dest)
    dest.mkdir(parents=True, exist_ok=True)
    name = None
    try:
        with signals_held():  # a stop between creating and naming the file would leave it behind
            handle, name = tempfile.mkstemp(prefix="nodegate-base-", suffix=".tar")
            os.close(handle)
        try:
            _git(["archive", "--format=tar", f"--output={name}", commit], top, ARCHIVE_TIMEOUT)
        except _GitFailed as error:
            raise ConfigError(f"`--base {ref}`: git could not write revision {commit[:12]}",
                              notes=(error.message,)) from error
        extract_tar(Path(name), dest)
    finally:
        if name is not None:
            os.unlink(name)
    return dest / prefix if prefix else dest


@contextlib.contextmanager
def revision_checkout(repo_root: Path, ref: str) -> Iterator[Path]:
    """Yield the folder matching `repo_root` in a temporary copy of revision `ref`; remove it afterwards.

    The copy is a whole revision, so it is removed on every exit, a SIGTERM or SIGINT
    included (`checker.report.writer.stoppable` turns them into exceptions); creating
    and removing it run with those signals held, so neither can be cut in half.
    """
    tree = None
    try:
        with signals_held():
            tree = tempfile.TemporaryDirectory(prefix="nodegate-base-")
        yield materialize_revision(repo_root, ref, Path(tree.name))
    finally:
        if tree is not None:
            with signals_held():
                tree.cleanup()
