"""Lark parsers built once per grammar and machine, then loaded from a private cache.

Building the LALR tables of a grammar takes a tenth of a second or more at every start; lark can
save a built parser and load it again (`cache=`). Its default place is the shared temporary
folder under a predictable name, and the file is a pickle, so anyone able to write there could
run code in the checker. The cache here is a folder of the user's own, `$NODEGATE_CACHE`, else
`$XDG_CACHE_HOME/nodegate`, else `~/.cache/nodegate`: it is used only when it is the user's, not
writable by group or others, and each file is written under a temporary name then renamed, so no
reader sees half a file. When the folder cannot be made or is not safe, the grammar is simply
built, as before: the cache only ever saves time.
"""

from __future__ import annotations

import contextlib
import hashlib
import os
import stat
import sys
from pathlib import Path

import lark


def cached_lark(grammar: str, name: str, **options) -> lark.Lark:
    """`lark.Lark(grammar, **options)`, loaded from the cache when a safe one holds it (`name` names the file)."""
    folder = cache_folder()
    if folder is None:
        return lark.Lark(grammar, **options)
    hashed = {key: value for key, value in options.items() if key != "postlex"}
    key = hashlib.sha256(f"{grammar}{sorted(hashed.items())}{lark.__version__}{sys.version_info[:2]}"
                         .encode("utf-8", errors="surrogatepass")).hexdigest()[:24]
    path = folder / f"{name}-{key}.lark"
    if _ours(path):  # lark checks the grammar's hash inside and rebuilds when the file is stale or damaged
        return lark.Lark(grammar, cache=str(path), **options)
    temporary = folder / f".{path.name}.{os.getpid()}.tmp"
    with contextlib.suppress(OSError):
        temporary.unlink()
    parser = lark.Lark(grammar, cache=str(temporary), **options)  # built, then written (or not: lark carries on)
    try:
        os.replace(temporary, path)
    except OSError:
        with contextlib.suppress(OSError):
            temporary.unlink()
    return parser


def cache_folder() -> Path | None:
    """The private cache folder, made if need be; None when there is no safe one."""
    given = os.environ.get("NODEGATE_CACHE")
    if given:
        folder = Path(given)
    else:
        base = os.environ.get("XDG_CACHE_HOME") or os.path.join(os.path.expanduser("~"), ".cache")
        folder = Path(base) / "nodegate"
    try:
        folder.mkdir(mode=0o700, parents=True, exist_ok=True)
        found = folder.stat()
    except (OSError, ValueError):
        return None
    if not stat.S_ISDIR(found.st_mode) or found.st_mode & 0o022 or not _owner(found) \
            or not os.access(folder, os.W_OK | os.X_OK):
        return None
    return folder


def _owner(found: os.stat_result) -> bool:
    return not hasattr(os, "getuid") or found.st_uid == os.getuid()


def _ours(path: Path) -> bool:
    """A regular file of this user's that others cannot write."""
    try:
        found = path.lstat()
    except OSError:
        return False
    return stat.S_ISREG(found.st_mode) and not found.st_mode & 0o022 and _owner(found)
