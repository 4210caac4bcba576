"""Writing a git revision to a temporary folder without touching the repository."""

from __future__ import annotations

import io
import shutil
import subprocess
import tarfile
from pathlib import Path

import pytest

from checker.errors import ConfigError
from checker.repo import git as repo_git
from checker.repo.git import extract_tar, materialize_revision, revision_checkout

pytestmark = pytest.mark.skipif(shutil.which("git") is None, reason="git is not on PATH")


def run(repo: Path, *args: str) -> str:
    """Git with a fixed identity and no signing, whatever the user's global configuration says."""
    command = ["git", "-c", "user.name=Greenhouse Logger", "-c", "user.email=logger@example.invalid",
               "-c", "commit.gpgsign=false", *args]
    return subprocess.run(command, cwd=repo, check=True, capture_output=True, text=True).stdout


@pytest.fixture
def repo(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> Path:
    """Two commits: the first has the old divider, the second changes it and adds a file."""
    monkeypatch.setenv("GIT_CEILING_DIRECTORIES", str(tmp_path))
    root = tmp_path / "greenhouse"
    (root / "boards" / "logger").mkdir(parents=True)
    run(root, "init", "-q")
    (root / "nodegate.yaml").write_text("circuits: [boards/logger/logger.circuit]\n")
    (root / "boards" / "logger" / "logger.circuit").write_text("old divider\n")
    (root / "boards" / "logger" / "limits.yaml").write_text("limits: []\n")
    run(root, "add", "-A")
    run(root, "commit", "-q", "-m", "first")
    (root / "boards" / "logger" / "logger.circuit").write_text("new divider\n")
    (root / "boards" / "logger" / "extra.circuit").write_text("added later\n")
    run(root, "add", "-A")
    run(root, "commit", "-q", "-m", "second")
    return root


def repository_state(root: Path) -> tuple[str, str, str, bytes]:
    return (run(root, "status", "--porcelain", "--untracked-files=all"), run(root, "ls-files", "-s"),
            run(root, "rev-parse", "HEAD"), (root / ".git" / "index").read_bytes())


def test_previous_revision_files_appear(repo: Path, tmp_path: Path) -> None:
    out = materialize_revision(repo, "HEAD~1", tmp_path / "base")
    assert out == tmp_path / "base"
    assert (out / "boards" / "logger" / "logger.circuit").read_text() == "old divider\n"
    assert (out / "nodegate.yaml").is_file()
    assert not (out / "boards" / "logger" / "extra.circuit").exists()


def test_working_tree_and_index_untouched(repo: Path, tmp_path: Path) -> None:
    # A dirty tree: a staged edit, an unstaged edit and an untracked file.
    (repo / "nodegate.yaml").write_text("staged edit\n")
    run(repo, "add", "nodegate.yaml")
    (repo / "boards" / "logger" / "logger.circuit").write_text("unstaged edit\n")
    (repo / "notes.txt").write_text("untracked\n")
    before = repository_state(repo)
    materialize_revision(repo, "HEAD~1", tmp_path / "base")
    assert repository_state(repo) == before
    assert (repo / "boards" / "logger" / "logger.circuit").read_text() == "unstaged edit\n"


def test_subfolder_root_maps_into_the_copy(repo: Path, tmp_path: Path) -> None:
    out = materialize_revision(repo / "boards" / "logger", "HEAD~1", tmp_path / "base")
    assert out == tmp_path / "base" / "boards" / "logger"
    assert (out / "logger.circuit").read_text() == "old divider\n"
    assert (tmp_path / "base" / "nodegate.yaml").is_file()  # the whole revision is there


def test_branch_tag_and_commit_id_all_resolve(repo: Path, tmp_path: Path) -> None:
    first = run(repo, "rev-parse", "HEAD~1").strip()
    run(repo, "tag", "-a", "v1", "-m", "board rev A", first)
    for index, ref in enumerate(["v1", first, first[:10]]):
        out = materialize_revision(repo, ref, tmp_path / f"base{index}")
        assert (out / "boards" / "logger" / "logger.circuit").read_text() == "old divider\n"


def test_context_manager_cleans_up(repo: Path) -> None:
    with revision_checkout(repo, "HEAD") as folder:
        assert (folder / "boards" / "logger" / "extra.circuit").read_text() == "added later\n"
        kept = folder
    assert not kept.exists()


def test_missing_ref_is_a_config_error(repo: Path, tmp_path: Path) -> None:
    with pytest.raises(ConfigError, match="no such commit"):
        materialize_revision(repo, "no-such-branch", tmp_path / "base")


def test_ref_naming_a_file_is_not_a_commit(repo: Path, tmp_path: Path) -> None:
    with pytest.raises(ConfigError, match="no such commit"):
        materialize_revision(repo, "HEAD:nodegate.yaml", tmp_path / "base")


@pytest.mark.parametrize("ref", ["-h", "--output=stolen.tar", "--remote=elsewhere", ""])
def test_option_like_or_empty_ref_is_refused(repo: Path, tmp_path: Path, ref: str) -> None:
    with pytest.raises(ConfigError):
        materialize_revision(repo, ref, tmp_path / "base")
    assert not (repo / "stolen.tar").exists()
    assert not (tmp_path / "base").exists()  # refused before anything was written


def test_control_characters_in_ref_are_refused(repo: Path, tmp_path: Path) -> None:
    with pytest.raises(ConfigError):
        materialize_revision(repo, "HEAD\n--output=x", tmp_path / "base")


def test_not_a_repository_is_a_config_error(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setenv("GIT_CEILING_DIRECTORIES", str(tmp_path))
    plain = tmp_path / "plain"
    plain.mkdir()
    with pytest.raises(ConfigError, match="not inside one"):
        materialize_revision(plain, "HEAD", tmp_path / "base")


def test_missing_git_is_a_config_error(repo: Path, tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setenv("PATH", str(tmp_path / "empty"))
    with pytest.raises(ConfigError, match="no `git` command"):
        materialize_revision(repo, "HEAD", tmp_path / "base")


def test_symlink_inside_the_revision_is_kept(repo: Path, tmp_path: Path) -> None:
    (repo / "shared.circuit").symlink_to("boards/logger/logger.circuit")
    run(repo, "add", "shared.circuit")
    run(repo, "commit", "-q", "-m", "link")
    out = materialize_revision(repo, "HEAD", tmp_path / "base")
    assert (out / "shared.circuit").read_text() == "new divider\n"


def tar_with(tmp_path: Path, member: tarfile.TarInfo, data: bytes = b"") -> Path:
    path = tmp_path / "crafted.tar"
    with tarfile.open(path, "w") as tar:
        member.size = len(data)
        tar.addfile(member, io.BytesIO(data) if data else None)
    return path


def symlink(name: str, target: str) -> tarfile.TarInfo:
    member = tarfile.TarInfo(name)
    member.type, member.linkname = tarfile.SYMTYPE, target
    return member


@pytest.mark.parametrize("member", [
    tarfile.TarInfo("../escaped.txt"),
    tarfile.TarInfo("/tmp/absolute.txt"),
    tarfile.TarInfo("a/../../escaped.txt"),
    symlink("link", "../../outside"),
    symlink("link", "/etc"),
], ids=["dotdot", "absolute", "nested-dotdot", "relative-link-out", "absolute-link"])
def test_unsafe_archive_entries_are_refused(tmp_path: Path, member: tarfile.TarInfo) -> None:
    archive = tar_with(tmp_path, member, b"x" if member.isfile() else b"")
    dest = tmp_path / "dest"
    dest.mkdir()
    with pytest.raises(ConfigError, match="unsafe"):
        extract_tar(archive, dest)
    assert not (tmp_path / "escaped.txt").exists()


def test_archive_bounds(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(repo_git, "MAX_BYTES", 4)
    archive = tar_with(tmp_path, tarfile.TarInfo("big.circuit"), b"12345")
    with pytest.raises(ConfigError, match="larger than"):
        extract_tar(archive, tmp_path / "dest")


def test_corrupt_archive_is_a_config_error(tmp_path: Path) -> None:
    archive = tmp_path / "broken.tar"
    archive.write_bytes(b"not a tar file at all" * 40)
    with pytest.raises(ConfigError, match="cannot unpack"):
        extract_tar(archive, tmp_path / "dest")
