"""`nodegate fmt FILE... [--check]` through `checker.cli.main` and as a subprocess, on real files."""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import pytest

from checker.cli import main

# A bike light's battery monitor, invented for these tests; written untidily on purpose.
UNTIDY = "circuit lamp\nground gnd\nsource VB from vb to gnd:3V\nresistor R_SENSE from vb to s : 10kΩ # top\n"
TIDY = "circuit lamp\nground gnd\nsource   VB      from vb to gnd : 3 V\nresistor R_SENSE from vb to s   : 10 kohm  # top\n"
BROKEN = "circuit lamp\nground gnd\nresistor R1 from vb s : 1 kohm\n"


def write(folder: Path, name: str, text: str) -> Path:
    path = folder / name
    path.write_bytes(text.encode("utf-8"))
    return path


def test_integration_fmt_rewrites_in_place(tmp_path, capsys):
    path = write(tmp_path, "lamp.circuit", UNTIDY)
    assert main(["fmt", str(path)]) == 0
    assert path.read_text(encoding="utf-8") == TIDY
    assert capsys.readouterr().out == f"formatted {path}\n"
    assert main(["fmt", str(path)]) == 0  # already canonical: nothing written, nothing said
    assert capsys.readouterr().out == ""


def test_integration_fmt_check_changes_nothing(tmp_path, capsys):
    untidy, tidy = write(tmp_path, "a.circuit", UNTIDY), write(tmp_path, "b.circuit", TIDY)
    assert main(["fmt", "--check", str(untidy), str(tidy)]) == 1
    assert capsys.readouterr().out == (f"not in canonical layout: {untidy}\n"
                                       "nodegate fmt: 1 of 2 file(s) not in canonical layout; "
                                       "`nodegate fmt FILE` rewrites them\n")
    assert untidy.read_text(encoding="utf-8") == UNTIDY
    assert main(["fmt", "--check", str(tidy)]) == 0
    assert capsys.readouterr().out == "nodegate fmt: all 1 file(s) in canonical layout\n"
    assert capsys.readouterr().out == ""


def test_integration_fmt_syntax_error_writes_no_file(tmp_path, capsys):
    untidy, broken = write(tmp_path, "a.circuit", UNTIDY), write(tmp_path, "b.circuit", BROKEN)
    assert main(["fmt", str(untidy), str(broken)]) == 2
    captured = capsys.readouterr()
    assert captured.out == ""
    assert captured.err.splitlines()[0].startswith(f"{broken}:3:21: error: expected `to`")
    assert captured.err.splitlines()[1:] == ["  resistor R1 from vb s : 1 kohm", "                      ^"]
    assert untidy.read_text(encoding="utf-8") == UNTIDY
    assert broken.read_text(encoding="utf-8") == BROKEN


def test_integration_fmt_missing_file_is_an_input_error(tmp_path, capsys):
    assert main(["fmt", str(tmp_path / "none.circuit")]) == 2
    assert "cannot find the file" in capsys.readouterr().err


def test_integration_fmt_line_ends_count_as_changes(tmp_path):
    path = write(tmp_path, "lamp.circuit", "\ufeff" + TIDY.replace("\n", "\r\n"))
    assert main(["fmt", "--check", str(path)]) == 1
    assert main(["fmt", str(path)]) == 0
    assert path.read_bytes() == TIDY.encode("utf-8")


@pytest.mark.skipif(os.name != "posix", reason="file modes and symlinks as on POSIX")
def test_integration_fmt_keeps_mode_and_symlinks(tmp_path):
    real = write(tmp_path, "real.circuit", UNTIDY)
    real.chmod(0o600)
    link = tmp_path / "link.circuit"
    link.symlink_to(real)
    assert main(["fmt", str(link)]) == 0
    assert link.is_symlink() and real.read_text(encoding="utf-8") == TIDY
    assert real.stat().st_mode & 0o777 == 0o600
    assert [p.name for p in tmp_path.iterdir() if p.name.endswith(".tmp")] == []


def test_integration_fmt_as_a_subprocess(tmp_path):
    path = write(tmp_path, "lamp.circuit", UNTIDY)
    root = Path(__file__).resolve().parents[2]
    done = subprocess.run([sys.executable, "-m", "checker", "fmt", "--check", str(path)], cwd=root,
                          capture_output=True, text=True, check=False)
    assert (done.returncode, done.stdout, done.stderr) == (1, f"not in canonical layout: {path}\n"
                                                            "nodegate fmt: 1 of 1 file(s) not in canonical layout; "
                                                            "`nodegate fmt FILE` rewrites them\n", "")
