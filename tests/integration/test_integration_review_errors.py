"""Errors of one run name their files alike and never escape as internal errors (exit 3).

Through `checker.cli.main` on a weather station's mast board, a scenario of our own.
"""

from __future__ import annotations

from pathlib import Path

import pytest

from checker.cli import EXIT_INPUT, main

CIRCUIT = """\
circuit mast "Weather station mast"
ground gnd
source   VSOL from sol to gnd : 6 V
resistor RA   from sol to adc : 68 kohm
resistor RB   from adc to gnd : 32 kohm
case cold : ambient = -17.4 degC
"""


def mast_repo(folder: Path, config_extra: str = "", check: str = "voltage(adc) <= 2 V") -> Path:
    (folder / "boards").mkdir(parents=True)
    (folder / "boards" / "mast.circuit").write_text(CIRCUIT, encoding="utf-8")
    (folder / "boards" / "limits.yaml").write_text(f'limits:\n  - id: mast\n    check: "{check}"\n', encoding="utf-8")
    (folder / "nodegate.yaml").write_text(
        "circuits: [boards/mast.circuit]\nlimits: [boards/limits.yaml]\n" + config_extra, encoding="utf-8")
    return folder


@pytest.mark.parametrize("config_extra, check, first_line", [
    ("analysis: {tolerance: nominal}\n", "voltage(adc) <= 2 V", "nodegate.yaml:3:12: error: unknown key `tolerance`"),
    ("", "voltage(adcc) <= 2 V", "boards/limits.yaml:3:21: error: no net or part `adcc`"),
])
def test_integration_review_errors_name_files_relative_to_the_working_folder(
        tmp_path, monkeypatch, capsys, config_extra, check, first_line):
    monkeypatch.chdir(mast_repo(tmp_path, config_extra, check))
    assert main(["check", "."]) == EXIT_INPUT
    assert capsys.readouterr().err.splitlines()[0].startswith(first_line)


def test_integration_review_overflowing_unit_in_a_limit_is_an_input_error(tmp_path, capsys):
    repo = mast_repo(tmp_path, check="voltage(adc) <= 1 kV^999")
    assert main(["check", str(repo), "--out", str(tmp_path / "out")]) == EXIT_INPUT  # was 3, a bug
    err = capsys.readouterr().err
    assert "limits.yaml:3:31: error: the unit `kV^999` is too large to represent" in err


def test_integration_review_check_on_its_celsius_bound_holds(tmp_path, capsys):
    # The case sits exactly on the bound; both languages must read -17.4 degC as one float.
    repo = mast_repo(tmp_path, check="ambient >= -17.4 degC")
    assert main(["check", str(repo), "--out", str(tmp_path / "out"), "--format", "json"]) == 0
