"""Hostile pull requests against nodegate's writes (issue 9, items 1 and 2).

A pull request can commit symbolic links, choose report paths in nodegate.yaml and
be cancelled mid-run. Every case here must end in exit 2 (or 128 + the signal) with
no traceback, leave every file outside the report folder as it was, and leave no
staging folder or base-revision tree behind.
"""

from __future__ import annotations

import errno
import os
import shutil
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

import checker.report.writer as writer
from checker.cli import main

pytestmark = pytest.mark.skipif(os.name != "posix", reason="symbolic links and signals as on POSIX")

PROJECT = Path(__file__).resolve().parents[2]
# A torch's battery sense divider, invented for these tests.
CIRCUIT = """\
circuit torch "Torch"
ground gnd
source   VBAT from vbat to gnd : 3.7 V
resistor R1   from vbat to adc : 68 kohm, rating = 63 mW
resistor R2   from adc to gnd  : 32 kohm, rating = 63 mW
"""
FAILING = CIRCUIT.replace("32 kohm", "68 kohm")  # 1.85 V at the ADC: every report changes
LIMITS = """\
limits:
  - id: adc-range
    about: Battery sense stays inside the ADC range
    check: voltage(adc) <= 1.8 V
"""
CONFIG = "circuits: [torch.circuit]\nlimits: [limits.yaml]\n"
EVERY_FORMAT = "md,html,json,junit,sarif"
STAGING = writer.STAGING_PREFIX


def hardware(tmp_path: Path, config: str = CONFIG) -> Path:
    """A small hardware repository in tmp_path/repo, beside an `outside` folder it must never touch."""
    root = tmp_path / "repo"
    root.mkdir()
    (root / "torch.circuit").write_text(CIRCUIT, encoding="utf-8")
    (root / "limits.yaml").write_text(LIMITS, encoding="utf-8")
    (root / "nodegate.yaml").write_text(config, encoding="utf-8")
    (root / "README.md").write_text("# Torch\n", encoding="utf-8")
    (tmp_path / "outside").mkdir()
    (tmp_path / "outside" / "victim.txt").write_text("precious\n", encoding="utf-8")
    return root


def snapshot(folder: Path, skip: Path | None = None) -> dict[str, object]:
    """Every entry under `folder` (links as links) with its content, except those under `skip`."""
    found: dict[str, object] = {}
    for path in sorted(folder.rglob("*")):
        if skip is not None and (path == skip or skip in path.parents):
            continue
        if path.is_symlink():
            found[str(path)] = ("link", os.readlink(path))
        elif path.is_file():
            found[str(path)] = path.read_bytes()
        else:
            found[str(path)] = "folder"
    return found


def neighbours(tmp_path: Path) -> list[str]:
    return sorted(os.listdir(tmp_path.parent))


def leftovers(folder: Path) -> list[Path]:
    """Staging folders or temporary files of any run under `folder`."""
    return [p for p in folder.rglob("*") if p.name.startswith(STAGING) or p.name.endswith(".tmp")]


def run(capsys, *argv: str) -> tuple[int, str]:
    code = main(list(argv))
    return code, capsys.readouterr().err


def refused(code: int, err: str, word: str) -> None:
    assert code == 2, err
    assert word in err
    assert "Traceback" not in err and "internal error" not in err


def test_committed_report_link_pointing_outside_is_refused(tmp_path, capsys, monkeypatch):
    # The shipped action's own command line, with a report committed as a link.
    root = hardware(tmp_path)
    reports = root / "build" / "nodegate"
    reports.mkdir(parents=True)
    (reports / "report.sarif").symlink_to(tmp_path / "outside" / "victim.txt")
    before, around = snapshot(tmp_path), neighbours(tmp_path)
    monkeypatch.chdir(root)
    code, err = run(capsys, "check", ".", "--format", "md,html,json,sarif", "--out", "build/nodegate")
    refused(code, err, "symbolic link")
    assert snapshot(tmp_path) == before  # not even the other reports: the set is written whole or not at all
    assert neighbours(tmp_path) == around


def test_dangling_report_link_is_refused(tmp_path, capsys, monkeypatch):
    root = hardware(tmp_path)
    (root / "build" / "nodegate").mkdir(parents=True)
    (root / "build" / "nodegate" / "report.md").symlink_to(tmp_path / "outside" / "planted.md")
    before = snapshot(tmp_path)
    monkeypatch.chdir(root)
    refused(*run(capsys, "check", ".", "--out", "build/nodegate"), "symbolic link")
    assert snapshot(tmp_path) == before


@pytest.mark.parametrize("by_config", [False, True], ids=["out-option", "report-paths"])
def test_build_folder_linked_outside_is_refused(tmp_path, capsys, monkeypatch, by_config):
    config = CONFIG + ("report:\n  markdown: build/nodegate/report.md\n" if by_config else "")
    root = hardware(tmp_path, config)
    (tmp_path / "outside" / "build").mkdir()
    (root / "build").symlink_to(tmp_path / "outside" / "build")
    before, around = snapshot(tmp_path), neighbours(tmp_path)
    monkeypatch.chdir(root)
    argv = ["check", "."] + ([] if by_config else ["--out", "build/nodegate"])
    code, err = run(capsys, *argv)
    refused(code, err, "symbolic link")
    if by_config:
        assert "nodegate.yaml:4:13: error: report path" in err  # located at the path in the configuration
    assert snapshot(tmp_path) == before
    assert neighbours(tmp_path) == around


@pytest.mark.parametrize("key, path, word", [
    ("markdown", "README.md", "not a nodegate md report"),
    ("markdown", "../x.md", "outside the repository"),
    ("markdown", "docs/../../x.md", "outside the repository"),
    ("html", "report.md", "must end in `.html`"),
    ("junit", "setup.py", "must end in `.xml`"),
    ("sarif", "report.sarif.json", "must end in `.sarif`"),
])
def test_report_paths_that_are_not_reports_are_refused(tmp_path, capsys, key, path, word):
    root = hardware(tmp_path, CONFIG + f"report:\n  {key}: '{path}'\n")
    (root / "setup.py").write_text("print('setup')\n", encoding="utf-8")
    before, around = snapshot(tmp_path), neighbours(tmp_path)
    code, err = run(capsys, "check", str(root))
    refused(code, err, word)
    assert f"nodegate.yaml:4:{6 + len(key)}: error: report path" in err  # at the quoted path
    assert snapshot(tmp_path) == before
    assert neighbours(tmp_path) == around


def test_a_previous_report_is_replaced_and_the_set_is_complete(tmp_path, capsys):
    root = hardware(tmp_path)
    out = root / "build" / "nodegate"
    assert run(capsys, "check", str(root), "--format", EVERY_FORMAT, "--out", str(out))[0] == 0
    first = snapshot(out)
    (root / "torch.circuit").write_text(FAILING, encoding="utf-8")
    assert run(capsys, "check", str(root), "--format", EVERY_FORMAT, "--out", str(out))[0] == 1
    second = snapshot(out)
    assert sorted(second) == sorted(first) and all(second[name] != first[name] for name in first)
    assert leftovers(tmp_path) == []


def test_a_file_planted_at_a_report_name_is_not_overwritten(tmp_path, capsys):
    root = hardware(tmp_path)
    out = root / "build" / "nodegate"
    out.mkdir(parents=True)
    (out / "report.json").write_text('{"mine": true}\n', encoding="utf-8")
    before = snapshot(tmp_path)
    refused(*run(capsys, "check", str(root), "--out", str(out)), "was not written by nodegate")
    assert snapshot(tmp_path) == before


@pytest.mark.parametrize("planted, word", [("nodegate.yaml", "never overwrites"), ("boards", "symbolic link")])
def test_init_refuses_a_dangling_link_where_it_would_write(tmp_path, capsys, planted, word):
    target = tmp_path / "new"
    target.mkdir()
    (tmp_path / "outside").mkdir()
    (target / planted).symlink_to(tmp_path / "outside" / "planted")
    before, around = snapshot(tmp_path), neighbours(tmp_path)
    refused(*run(capsys, "init", str(target)), word)
    assert snapshot(tmp_path) == before
    assert neighbours(tmp_path) == around


def test_init_refuses_a_folder_link_to_elsewhere(tmp_path, capsys):
    target = tmp_path / "new"
    target.mkdir()
    (tmp_path / "outside" / "github").mkdir(parents=True)
    (target / ".github").symlink_to(tmp_path / "outside" / "github")
    before = snapshot(tmp_path)
    refused(*run(capsys, "init", str(target)), "symbolic link")
    assert snapshot(tmp_path) == before


def test_fmt_refuses_a_link_leaving_its_folder(tmp_path, capsys):
    root = hardware(tmp_path)
    elsewhere = tmp_path / "outside" / "other.circuit"
    elsewhere.write_text(CIRCUIT.replace("  ", "      "), encoding="utf-8")
    (root / "linked.circuit").symlink_to(elsewhere)
    before = snapshot(tmp_path)
    refused(*run(capsys, "fmt", str(root / "linked.circuit")), "outside its folder")
    assert snapshot(tmp_path) == before


def failing_third_write(monkeypatch, fail):
    """Make the writer's third staged file hit `fail` (a disk-full error or a signal)."""
    calls = []
    original = writer._write_new

    def third(folder, name, text, mode):
        calls.append(name)
        if len(calls) == 3:
            fail()
        original(folder, name, text, mode)

    monkeypatch.setattr(writer, "_write_new", third)


def test_a_failed_write_leaves_the_previous_set_complete(tmp_path, capsys, monkeypatch):
    root = hardware(tmp_path)
    out = root / "build" / "nodegate"
    assert run(capsys, "check", str(root), "--format", EVERY_FORMAT, "--out", str(out))[0] == 0
    (root / "torch.circuit").write_text(FAILING, encoding="utf-8")
    before, around = snapshot(tmp_path), neighbours(tmp_path)

    def disk_full():
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))

    failing_third_write(monkeypatch, disk_full)
    refused(*run(capsys, "check", str(root), "--format", EVERY_FORMAT, "--out", str(out)), "No space left")
    assert snapshot(tmp_path) == before  # the old five reports, byte for byte, and nothing else
    assert neighbours(tmp_path) == around


def test_sigterm_while_writing_finishes_the_set_then_stops(tmp_path, capsys, monkeypatch):
    root = hardware(tmp_path)
    out = root / "build" / "nodegate"
    assert run(capsys, "check", str(root), "--format", EVERY_FORMAT, "--out", str(out))[0] == 0
    old = snapshot(out)
    (root / "torch.circuit").write_text(FAILING, encoding="utf-8")
    failing_third_write(monkeypatch, lambda: os.kill(os.getpid(), signal.SIGTERM))
    code, err = run(capsys, "check", str(root), "--format", EVERY_FORMAT, "--out", str(out))
    assert code == 128 + signal.SIGTERM, err
    assert "stopped by SIGTERM" in err and "Traceback" not in err
    new = snapshot(out)
    assert sorted(new) == sorted(old) and all(new[name] != old[name] for name in old)  # all new, none old
    assert leftovers(tmp_path) == []
    assert signal.getsignal(signal.SIGTERM) == signal.SIG_DFL  # the run's handler is gone


def git(root: Path, *args: str) -> None:
    subprocess.run(["git", "-c", "user.name=Torch Maker", "-c", "user.email=torch@example.invalid",
                    "-c", "commit.gpgsign=false", *args], cwd=root, check=True, capture_output=True)


def slow_repository(tmp_path: Path) -> Path:
    """The bundled weather station (worst-case analysis, seconds of work) as a git repository."""
    root = tmp_path / "repo"
    shutil.copytree(PROJECT / "examples" / "weather_station", root)
    (tmp_path / "outside").mkdir()
    return root


def start_check(tmp_path: Path, root: Path, *argv: str) -> tuple[subprocess.Popen, Path]:
    """`nodegate check` as CI runs it, with its own temporary folder so leftovers are ours alone."""
    scratch = tmp_path / "scratch"
    scratch.mkdir()
    env = {**os.environ, "TMPDIR": str(scratch), "PYTHONPATH": str(PROJECT)}
    process = subprocess.Popen([sys.executable, "-m", "checker", "check", ".", *argv], cwd=root, env=env,
                               stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    return process, scratch


def wait_for(condition, process: subprocess.Popen, seconds: float) -> None:
    deadline = time.monotonic() + seconds
    while not condition() and process.poll() is None and time.monotonic() < deadline:
        time.sleep(0.05)


def stop(process: subprocess.Popen) -> tuple[int, str]:
    process.send_signal(signal.SIGTERM)
    _, err = process.communicate(timeout=120)
    return process.returncode, err


def test_sigterm_during_a_run_leaves_no_temporary_files(tmp_path):
    root = slow_repository(tmp_path)
    process, scratch = start_check(tmp_path, root)
    time.sleep(1.0)
    assert process.poll() is None, "the example finished before it could be stopped"
    before = snapshot(tmp_path, skip=scratch)
    code, err = stop(process)
    assert code in (128 + signal.SIGTERM, -signal.SIGTERM), err  # -15: stopped before the handler was in place
    assert "Traceback" not in err
    assert leftovers(tmp_path) == [] and list(scratch.iterdir()) == []
    assert snapshot(tmp_path, skip=scratch) == before


@pytest.mark.skipif(shutil.which("git") is None, reason="git is not on PATH")
def test_sigterm_during_a_base_run_removes_the_base_tree(tmp_path):
    root = slow_repository(tmp_path)
    git(root, "init", "-q")
    git(root, "add", ".")
    git(root, "commit", "-q", "-m", "weather station")
    process, scratch = start_check(tmp_path, root, "--base", "HEAD")
    wait_for(lambda: any(p.name.startswith("nodegate-base-") for p in scratch.iterdir()), process, 120)
    assert process.poll() is None, "the run ended before the base revision was unpacked"
    code, err = stop(process)
    assert code == 128 + signal.SIGTERM, err
    assert "Traceback" not in err
    assert list(scratch.iterdir()) == []
    assert leftovers(tmp_path) == []
