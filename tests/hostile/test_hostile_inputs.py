"""Hostile pull requests, issue 9 items 3 and 4: every decode and file system error is an input
error (exit 2, located where a place exists), and memory and time stay bounded.

Each test writes a small hardware repository (a bike light's battery sense divider, invented
for these tests) and runs `checker.cli.main` on it as the CI action would; two run nodegate as
a subprocess. None times anything: the deadline is tested by a solve that would never end.
"""

from __future__ import annotations

import errno
import os
import re
import subprocess
import sys
import textwrap
import time
import tracemalloc
from pathlib import Path

import pytest

import checker.yamlsource
from checker.cli import main
from checker.limits import load_limit_file
from checker.errors import LimitError
from checker.pipeline import MAX_BOARDS, MAX_VERTICES
from checker.yamlsource import MAX_LINE, MAX_NODES
from hostile_repo import CIRCUIT, LIMITS

CONFIG = """\
circuits:
  - '*.circuit'
limits:
  - limits.yaml
"""
LONG = "n" * 300  # longer than any file name the system allows (255 bytes)
LOCATED = re.compile(r"^(\S+):(\d+):(\d+): error: ", re.MULTILINE)


@pytest.fixture
def repo(tmp_path, monkeypatch):
    """A repository in `tmp_path`, which is also the working folder (messages show relative paths)."""
    monkeypatch.chdir(tmp_path)
    write(tmp_path, "bike.circuit", CIRCUIT)
    write(tmp_path, "limits.yaml", LIMITS)
    write(tmp_path, "nodegate.yaml", CONFIG)
    return tmp_path


def write(folder: Path, name: str, text: str | bytes) -> Path:
    path = folder / name
    if isinstance(text, str):
        text = textwrap.dedent(text).encode("utf-8")
    path.write_bytes(text)
    return path


def run(capsys, *argv: str) -> tuple[int, str]:
    """Exit code and standard error of one command; never a traceback or an internal error."""
    code = main(list(argv))
    err = capsys.readouterr().err
    assert "Traceback" not in err and "internal error" not in err, err
    return code, err


def check(capsys, *extra: str) -> tuple[int, str]:
    return run(capsys, "check", ".", "--format", "json", "--out", "out", *extra)


def located(err: str) -> tuple[str, int, int]:
    """The `path:line:col` of the first error line."""
    found = LOCATED.search(err)
    assert found, err
    return found.group(1), int(found.group(2)), int(found.group(3))


# --- control characters, surrogates and bytes that are not UTF-8 -----------------------------

@pytest.mark.parametrize("char", ["\x00", "\x07", "\x1b", "\x0c", "\uffff"], ids=["NUL", "BEL", "ESC", "FF", "FFFF"])
@pytest.mark.parametrize("file", ["nodegate.yaml", "limits.yaml"])
def test_hostile_control_character_is_located(repo, capsys, char, file):
    text = (repo / file).read_text(encoding="utf-8")
    write(repo, file, text + f"# a comm{char}ent\n")
    code, err = check(capsys)
    assert code == 2
    assert located(err) == (file, text.count("\n") + 1, 9)
    assert f"U+{ord(char):04X}" in err


def test_hostile_lone_surrogate_in_about_is_located(repo, capsys):
    write(repo, "limits.yaml", LIMITS.replace("about: Battery sense stays", 'about: "Battery \\ud800 sense" #'))
    code, err = check(capsys)
    assert code == 2
    assert located(err) == ("limits.yaml", 3, 21)
    assert "surrogate" in err


@pytest.mark.parametrize("file", ["nodegate.yaml", "limits.yaml"])
def test_hostile_byte_not_utf8_is_located_at_its_line_and_column(repo, capsys, file):
    data = (repo / file).read_bytes()
    write(repo, file, data + b"# caf\xe9\n")
    code, err = check(capsys)
    assert code == 2
    assert located(err) == (file, data.count(b"\n") + 1, 6)
    assert "0xE9" in err


# --- paths the system refuses: too long, loops, permissions, a full disk ------------------------

@pytest.mark.parametrize("argv", [
    ("check", ".", "--out", LONG),
    ("check", ".", "--config", LONG + ".yaml"),
    ("check", LONG),
    ("solve", LONG + ".circuit"),
], ids=["out", "config", "dir", "solve"])
def test_hostile_name_too_long_on_the_command_line(repo, capsys, argv):
    code, err = run(capsys, *argv)
    assert code == 2
    assert "too long" in err


@pytest.mark.parametrize("entry, line", [("circuits", 2), ("limits", 4)])
def test_hostile_name_too_long_in_the_configuration_is_located(repo, capsys, entry, line):
    suffix = ".circuit" if entry == "circuits" else ".yaml"
    config = CONFIG.replace(f"{entry}:\n", f"{entry}:\n  - {LONG}{suffix}\n")
    write(repo, "nodegate.yaml", config)
    code, err = check(capsys)
    assert code == 2
    assert located(err) == ("nodegate.yaml", line, 5)
    assert "too long" in err


def test_hostile_symlink_loop_matched_by_the_glob_is_located(repo, capsys):
    os.symlink("loop.circuit", repo / "loop.circuit")
    code, err = check(capsys)
    assert code == 2
    assert located(err) == ("nodegate.yaml", 2, 6)  # inside the quote
    assert "loop" in err


def test_hostile_solve_of_a_symlink_loop_is_an_input_error(tmp_path, capsys):
    os.symlink("loop.circuit", tmp_path / "loop.circuit")
    assert main(["solve", str(tmp_path / "loop.circuit")]) == 2
    err = capsys.readouterr().err
    assert "cannot read" in err and "Traceback" not in err


def test_hostile_unreadable_limits_file_is_located_where_the_configuration_names_it(repo, capsys, monkeypatch):
    read = checker.yamlsource._read_bytes

    def refuse(path, max_bytes):
        if path.name == "limits.yaml":
            raise PermissionError(errno.EACCES, "Permission denied", str(path))
        return read(path, max_bytes)
    monkeypatch.setattr(checker.yamlsource, "_read_bytes", refuse)
    code, err = check(capsys)
    assert code == 2
    assert located(err) == ("nodegate.yaml", 4, 5)
    assert "Permission denied" in err


@pytest.mark.skipif(os.geteuid() == 0, reason="root reads any file")
def test_hostile_unreadable_file_on_disk(repo, capsys):
    (repo / "limits.yaml").chmod(0)
    code, err = check(capsys)
    assert code == 2 and "Permission denied" in err


def test_hostile_full_disk_is_an_input_error(repo, capsys, monkeypatch):
    def full(*args, **kwargs):
        raise OSError(errno.ENOSPC, "No space left on device", "out/report.json")
    monkeypatch.setattr("checker.commands.check.write_reports", full)
    code, err = check(capsys)
    assert code == 2
    assert "No space left on device" in err and "out/report.json" in err


# --- bounded memory: locations share the file's text ----------------------------------------

def peak_while(load) -> tuple[int, object]:
    """Peak traced memory (bytes) while calling `load`, and what it returned or raised."""
    tracemalloc.start()
    try:
        result = load()
    except LimitError as error:
        result = error
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    return peak, result


def test_hostile_200_kb_line_of_100000_values_stops_at_the_line_cap(tmp_path):
    # This file took 114 s and 19.7 GB when every value kept a copy of its line.
    path = write(tmp_path, "limits.yaml", "limits: [" + ",".join(["1"] * 100_000) + "]\n")
    peak, error = peak_while(lambda: load_limit_file(path))
    assert isinstance(error, LimitError)
    assert (error.location.line, error.location.column) == (1, MAX_LINE + 1)
    assert peak < 20_000_000


def test_hostile_many_values_on_long_lines_load_in_little_memory(tmp_path):
    # 9,000 values on three lines of 9,000 characters: copies of their line in locations took 178 MB.
    rows = ["  - [" + ",".join(["ab"] * 3000) + "]" for _ in range(3)]
    path = write(tmp_path, "limits.yaml", "waivers:\n" + "\n".join(rows) + "\n")
    peak, error = peak_while(lambda: load_limit_file(path))
    assert isinstance(error, LimitError) and "each entry of `waivers`" in error.message
    assert peak < 30_000_000  # about 15 MB now


def test_hostile_values_past_the_cap_stop_at_the_value_that_passes_it(tmp_path):
    per_line = 2000
    rows = ["  - [" + ",".join(["1"] * per_line) + "]" for _ in range(MAX_NODES // per_line + 1)]
    path = write(tmp_path, "limits.yaml", "limits:\n" + "\n".join(rows) + "\n")
    with pytest.raises(LimitError, match=f"more than {MAX_NODES} YAML values") as caught:
        load_limit_file(path)
    # Nodes so far: the document's mapping, the key, the outer list, then per row a list and its items.
    line = 2 + (MAX_NODES - 3) // (per_line + 1)
    assert caught.value.location.line == line


def test_hostile_1_mb_line_stops_at_the_line_cap(repo, capsys):
    write(repo, "limits.yaml", "limits: [" + "'x'," * 249_000 + "]\n")
    code, err = check(capsys)
    assert code == 2
    assert located(err) == ("limits.yaml", 1, MAX_LINE + 1)
    assert f"longer than {MAX_LINE} characters" in err


# --- bounded time: the work caps and the deadline ------------------------------------------------

def test_hostile_monte_carlo_samples_past_the_work_cap(repo, capsys):
    write(repo, "nodegate.yaml", CONFIG + "analysis:\n  tolerances: monte-carlo\n  samples: 1000000\n")
    write(repo, "bike.circuit", CIRCUIT + "case cold : ambient = -20 degC\ncase hot : ambient = 45 degC\n")
    code, err = check(capsys)
    assert code == 2
    assert located(err) == ("nodegate.yaml", 7, 12)
    assert "2,000,000 boards" in err and f"{MAX_BOARDS:,}" in err and "lower `samples`" in err
    assert not (repo / "out").exists()


def test_hostile_worst_case_vertices_past_the_work_cap(repo, capsys):
    write(repo, "nodegate.yaml", CONFIG + "analysis:\n  tolerances: worst-case\n  vertex_values: 20\n")
    ladder = [f"resistor R{i} from n{i} to n{i + 1} : 1 kohm, tol = 1 %" for i in range(20)]
    for number in range(5):
        write(repo, f"c{number}.circuit", "\n".join([f"circuit c{number}", "ground gnd",
                                                     "source V from n0 to gnd : 1 V", *ladder,
                                                     "resistor RT from n20 to gnd : 1 kohm"]) + "\n")
    (repo / "bike.circuit").unlink()
    write(repo, "limits.yaml", "limits:\n  - id: low\n    check: voltage(n1) <= 2 V\n    cases: [default]\n")
    code, err = check(capsys)
    assert code == 2
    assert located(err) == ("nodegate.yaml", 7, 18)
    assert f"{5 * 2 ** 20:,} vertices" in err and f"{MAX_VERTICES:,}" in err


def test_hostile_deadline_names_the_stage_and_writes_no_report(repo, capsys, monkeypatch):
    def endless(*args, **kwargs):
        time.sleep(600)
    monkeypatch.setattr("checker.analysis.run.solve_states", endless)
    code, err = check(capsys, "--timeout", "0.2")
    assert code == 2
    assert "longer than --timeout 0.2 s; it was solving the circuits" in err
    assert not (repo / "out").exists()


@pytest.mark.parametrize("value", ["0", "-1", "nan", "soon"])
def test_hostile_timeout_must_be_positive_seconds(repo, capsys, value):
    code, err = check(capsys, "--timeout", value)
    assert code == 2 and "--timeout" in err


# --- as the CI action runs it ----------------------------------------------------------------------

def nodegate(*argv: str, cwd: Path) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "checker", *argv], cwd=cwd, capture_output=True, text=True,
                          timeout=300, env={**os.environ, "PYTHONPATH": str(Path(__file__).parents[2])})


def test_hostile_subprocess_control_character_in_configuration(repo):
    write(repo, "nodegate.yaml", CONFIG.replace("limits:", "lim\x1bits:"))
    done = nodegate("check", ".", "--out", "out", cwd=repo)
    assert done.returncode == 2 and "Traceback" not in done.stderr
    assert located(done.stderr) == ("nodegate.yaml", 3, 4)


def test_hostile_subprocess_deadline(repo):
    done = nodegate("check", ".", "--out", "out", "--timeout", "0.001", cwd=repo)
    assert done.returncode == 2 and "Traceback" not in done.stderr
    assert "longer than --timeout 0.001 s; it was " in done.stderr
    assert not (repo / "out").exists()
