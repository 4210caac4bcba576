"""Hostile pull requests, issue 9 items 5 and 6: no forged CI commands, no silently wrong results.

Each test writes a small hardware repository (a bike light's battery sense divider, invented
for these tests) and runs `checker.cli.main` on it, as the CI action would.
"""

from __future__ import annotations

import json
import textwrap
from pathlib import Path

import pytest

from checker.cli import main
from checker.units import format_percent
from hostile_repo import CIRCUIT, LIMITS

CONFIG = """\
circuits: ['*.circuit']
limits: [limits.yaml]
analysis:
  tolerances: nominal
"""
FORGED = "::warning file=README.md,line=1::x"


@pytest.fixture
def repo(tmp_path, monkeypatch):
    """A repository in `tmp_path`, which is also the working folder (messages show relative paths)."""
    monkeypatch.chdir(tmp_path)

    def write(circuit: str = CIRCUIT, limits: str = LIMITS, name: str = "bike.circuit") -> Path:
        for file, text in ((name, circuit), ("limits.yaml", limits), ("nodegate.yaml", CONFIG)):
            (tmp_path / file).write_text(textwrap.dedent(text), encoding="utf-8")
        return tmp_path
    return write


def run(capsys, *argv: str) -> tuple[int, str, str]:
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def check(capsys, *extra: str) -> tuple[int, str, str]:
    return run(capsys, "check", ".", "--format", "json", "--out", "out", *extra)


def no_command_lines(*outputs: str) -> bool:
    """True when no printed line would reach the CI runner as a workflow command."""
    return not any(line.strip().startswith("::") for text in outputs for line in text.splitlines())


# Item 5: no forged CI commands.

@pytest.mark.parametrize("indent", ["", "    ", "\t", "\u00a0 "])
def test_hostile_error_echo_of_a_command_line_is_neutralised(repo, capsys, indent):
    repo(CIRCUIT + indent + FORGED + "\n")
    code, out, err = check(capsys)
    assert code == 2
    assert err.startswith("bike.circuit:6:")
    assert ": error: " in err.splitlines()[0]
    assert no_command_lines(out, err)
    source, caret = err.splitlines()[1:3]
    assert source.strip().startswith("| ") and FORGED in source
    assert source[caret.index("^"):].strip().startswith("::")  # the caret still points at the line's text


def test_hostile_command_line_in_solve_and_fmt_is_neutralised(repo, capsys):
    folder = repo(CIRCUIT + FORGED + "\n")
    for argv in (("solve", "bike.circuit"), ("fmt", "--check", "bike.circuit")):
        code, out, err = run(capsys, *argv)
        assert code == 2 and err.startswith("bike.circuit:6:")
        assert no_command_lines(out, err)
    assert (folder / "bike.circuit").read_text(encoding="utf-8").endswith(FORGED + "\n")


def test_hostile_file_name_that_is_a_command_is_neutralised(repo, capsys):
    repo(CIRCUIT + "resistor R3 from adc to gnd : 1 V\n", name=FORGED + ".circuit")
    code, out, err = check(capsys)
    assert code == 2
    assert err.splitlines()[0].startswith(f"| {FORGED}.circuit:6:31: error: ")
    assert no_command_lines(out, err)


def test_hostile_limit_file_line_that_is_a_command_is_neutralised(repo, capsys):
    repo(limits=LIMITS + "    where: part.rating > 0 W\n" + "  " + FORGED + "\n")
    code, out, err = check(capsys)
    assert code == 2 and err.startswith("limits.yaml:")
    assert no_command_lines(out, err)


# Item 6: validation gaps, each a located input error (exit 2).

def test_hostile_case_cannot_turn_a_voltage_source_into_a_current_source(repo, capsys):
    repo(CIRCUIT + "case c : VBAT = 2 A\n")
    code, _, err = check(capsys)
    assert code == 2
    assert err.startswith("bike.circuit:6:17: error: source `VBAT` is declared in V")


@pytest.mark.parametrize("line, position, message", [
    ("resistor R3 from adc to gnd : 1 kohm, theta_ja = -50 K/W\n", "6:50", "`theta_ja` is above 0 K/W"),
    ("resistor R3 from adc to gnd : 1 kohm, theta_ja = 0 K/W\n", "6:50", "`theta_ja` is above 0 K/W"),
    ("resistor R3 from adc to gnd : 1 kohm\ncase c : R3.theta_ja = -1 K/W\n", "7:24", "`theta_ja` is above 0 K/W"),
    ("resistor R3 from adc to gnd : 1 kohm, tol = -5%\n", "6:45", "`tol` is from 0 % to below 100 %"),
    ("resistor R3 from adc to gnd : 1 kohm\ncase c : R3.tol = -1%\n", "7:19", "`tol` is from 0 % to below 100 %"),
    ("resistor R3 from adc to gnd : 1 kohm\ncase c : R3.tol = 150%\n", "7:19", "`tol` is from 0 % to below 100 %"),
])
def test_hostile_thermal_resistance_positive_and_tolerance_in_its_band(repo, capsys, line, position, message):
    # tol is checked in nominal mode too, not only by tolerance analysis: from 0 % to below 100 %
    repo(CIRCUIT + line)
    code, _, err = check(capsys)
    assert code == 2
    assert err.startswith(f"bike.circuit:{position}: error: {message}")


def test_hostile_opamp_rails_the_wrong_way_round(repo, capsys):
    repo(CIRCUIT + "opamp U1 (plus: adc, minus: out, out: out, rail_hi: gnd, rail_lo: vbat)\n"
         "resistor RL from out to gnd : 10 kohm\n")
    code, _, err = check(capsys)
    assert code == 2
    assert err.startswith("bike.circuit:6:7: error: the op-amp U1 has rail_hi at 0 V, below rail_lo at 3.70 V")


def test_hostile_limit_lists_a_case_twice(repo, capsys):
    repo(CIRCUIT + "case nominal\n", LIMITS + "    cases: [nominal, nominal]\n")
    code, _, err = check(capsys)
    assert code == 2
    assert err.startswith("limits.yaml:5:22: error: case `nominal` is listed twice in `cases`")


@pytest.mark.parametrize("base", ["", "  "])
def test_hostile_empty_base_is_an_error(repo, capsys, base):
    # No file holds the mistake, so the message names the option instead of a location.
    repo()
    code, out, err = check(capsys, "--base", base)
    assert code == 2 and out == ""
    assert err.startswith("nodegate check: error: argument --base: is empty")


@pytest.mark.parametrize("micro, ohm", [("\u03bc", "\u2126"), ("\u00b5", "\u03a9")])
def test_hostile_greek_units_in_limit_quantities(repo, capsys, micro, ohm):
    limits = LIMITS + (f"  - id: sense-current\n    check: current(R1) <= 40 {micro}A\n"
                       f"  - id: top-resistor\n    check: R1.value >= 68 k{ohm}\n")
    repo(limits=limits)
    code, _, err = check(capsys)
    assert code == 0, err
    findings = json.loads(Path("out/report.json").read_text(encoding="utf-8"))
    held = {f["limit"]: f["status"] for f in findings["findings"]}
    assert held["sense-current"] == "pass" and held["top-resistor"] == "pass"


def test_hostile_numeric_overflow_is_a_located_message(repo, capsys):
    repo(CIRCUIT + "resistor R3 from adc to gnd : 1e-320 ohm\n")
    code, out, err = check(capsys)
    assert code == 2
    assert err.startswith("bike.circuit:1:9: error: circuit `bike` cannot be solved in floating point")
    assert "note: the arithmetic met overflow while solving this case" in err
    assert "Warning" not in err and ".py:" not in err


def test_hostile_absurd_margin_prints_a_short_percentage():
    # A 1e-300 ohm resistor dissipates about 1e269 W; its margin's percentage must stay short.
    assert format_percent(-6.26e268) == "-6.26e+270 %"
    assert format_percent(-1.056) == "-105.6 %"


def test_hostile_block_left_open_names_the_block_and_its_line(repo, capsys):
    repo(CIRCUIT + "block div (top, tap) {\n    resistor RA from top to tap : 1 kohm\n\n")
    code, _, err = check(capsys)
    assert code == 2
    assert err.startswith("bike.circuit:6:1: error: block `div` opened at line 6 is never closed")


def test_hostile_case_after_an_open_block_notes_the_block(repo, capsys):
    repo(CIRCUIT + "block div (top, tap) {\n    resistor RA from top to tap : 1 kohm\ncase c : VBAT = 3 V\n")
    code, _, err = check(capsys)
    assert code == 2 and err.startswith("bike.circuit:8:")
    assert "note: block `div` opened at line 6 is still open here" in err


def test_hostile_continued_line_note_does_not_stick_to_later_errors(repo, capsys):
    repo(CIRCUIT + "resistor R3 from adc to gnd : 1 kohm,\n    rating = 63 mW\nresistor R4 from adc gnd\n")
    code, _, err = check(capsys)
    assert code == 2 and err.startswith("bike.circuit:8:")
    assert "continues" not in err
