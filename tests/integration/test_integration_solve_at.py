"""`nodegate solve FILE --at POINT` through `checker.cli.main`: solving at a point of the tolerance box.

Every expected voltage is computed in the test from Ohm's law and the voltage-divider
rule V_tap = V_in x R2 / (R1 + R2) (any circuit-theory text, e.g. Alexander & Sadiku,
"Fundamentals of Electric Circuits", 6th ed., 2017, sec. 2.7), with each moved value
taken as declared value x (1 + deviation) (docs/analysis.md, "Which values have a tolerance").
"""

from __future__ import annotations

import json
import textwrap
from pathlib import Path

import pytest
from hypothesis import given
from hypothesis import strategies as st

from checker.analysis.points import format_point, parse_point
from checker.cli import main

# A kiln controller's thermocouple bias and logic supply, invented for these tests.
CIRCUIT = """\
circuit kiln "Kiln controller bias"
ground gnd
source    VIN from vin to gnd : 10 V
resistor  R1  from vin to mid : 1 kohm, tol = 5%
resistor  R2  from mid to gnd : 1 kohm
regulator U1  (in: vin, out: out, gnd: gnd) : vout = 3.3 V, tol = 2%
resistor  RL  from out to gnd : 1 kohm
resistor  RD  from out to dn  : 1 kohm
diode     D1  from dn to gnd  : vf = 0.7 V at 1 mA
case warm
case hot : R1.tol = 10%
"""


@pytest.fixture
def circuit(tmp_path: Path) -> Path:
    path = tmp_path / "kiln.circuit"
    path.write_text(textwrap.dedent(CIRCUIT), encoding="utf-8")
    return path


def solve_json(capsys, circuit: Path, *args: str) -> dict:
    """The JSON document of a successful `solve --format json` run."""
    assert main(["solve", str(circuit), "--format", "json", *args]) == 0
    return json.loads(capsys.readouterr().out)


def test_divider_at_a_corner_gives_the_moved_tap(circuit, capsys):
    document = solve_json(capsys, circuit, "--case", "warm", "--at", "R1=+5%,R2=-5%")
    (case,) = document["cases"]
    # Divider rule: 10 V x (1 kohm x 0.95) / (1 kohm x 1.05 + 1 kohm x 0.95) = 4.75 V.
    assert case["nets"]["mid"] == pytest.approx(10 * 0.95 / (1.05 + 0.95), rel=1e-9)
    assert case["at"] == {"R1": 0.05, "R2": -0.05}


def test_regulator_output_moved_by_its_vout(circuit, capsys):
    (case,) = solve_json(capsys, circuit, "--case", "warm", "--at", "U1.vout=-5%")["cases"]
    # The regulator holds its output at vout x (1 + d) = 3.3 V x 0.95 = 3.135 V (well above dropout).
    assert case["nets"]["out"] == pytest.approx(3.3 * 0.95, rel=1e-9)
    assert case["nets"]["mid"] == pytest.approx(5.0, rel=1e-9)  # divider rule, 10 V x 1k / 2k: unmoved


def test_source_voltage_moved(circuit, capsys):
    (case,) = solve_json(capsys, circuit, "--case", "warm", "--at", "VIN=+10%")["cases"]
    # The source is ideal: 10 V x 1.10 = 11 V, and the equal divider halves it to 5.5 V.
    assert case["nets"]["vin"] == pytest.approx(11.0, rel=1e-9)
    assert case["nets"]["mid"] == pytest.approx(5.5, rel=1e-9)


def test_part_value_suffix_is_the_same_as_the_part_name(circuit, capsys):
    plain = solve_json(capsys, circuit, "--case", "warm", "--at", "R1=+5%")
    suffixed = solve_json(capsys, circuit, "--case", "warm", "--at", "R1.value=+5%")
    assert plain == suffixed


def test_every_case_is_moved_when_no_case_is_chosen(circuit, capsys):
    cases = solve_json(capsys, circuit, "--at", "R2=-5%")["cases"]
    assert [c["case"] for c in cases] == ["warm", "hot"]
    for case in cases:
        # Divider rule: 10 V x 0.95 / (1 + 0.95) = 4.8718 V.
        assert case["nets"]["mid"] == pytest.approx(10 * 0.95 / 1.95, rel=1e-9)


def test_json_has_at_only_with_the_option(circuit, capsys):
    (case,) = solve_json(capsys, circuit, "--case", "warm")["cases"]
    assert "at" not in case


def test_table_first_line_says_the_point(circuit, capsys):
    assert main(["solve", str(circuit), "--case", "warm", "--at", "R1=+5%,U1.vout=-2%"]) == 0
    lines = capsys.readouterr().out.splitlines()
    assert lines[0] == "at R1 +5 %, U1.vout \u22122 %"
    assert not any(line.startswith("note:") for line in lines)  # both within their declared bands
    assert lines[2].startswith("case warm:")


def test_outside_the_band_is_a_note_in_the_table(circuit, capsys):
    assert main(["solve", str(circuit), "--at", "R1=+8%,R2=+1%"]) == 0
    lines = capsys.readouterr().out.splitlines()
    assert lines[0] == "at R1 +8 %, R2 +1 %"
    # R1 has tol = 5 % in case warm and 10 % in case hot: only warm is exceeded.
    assert lines[1] == "note: R1 +8 % is outside its tolerance of ±5 % in case warm"
    assert lines[2] == "note: R2 +1 % moves a value that declares no tolerance"


def test_outside_the_band_is_a_note_on_stderr_for_json(circuit, capsys):
    assert main(["solve", str(circuit), "--case", "warm", "--format", "json", "--at", "U1.vout=+3%"]) == 0
    out, err = capsys.readouterr()
    assert json.loads(out)["cases"][0]["at"] == {"U1.vout": 0.03}
    assert err.strip() == "note: U1.vout +3 % is outside its tolerance of ±2 %"


def test_a_deviation_at_the_declared_band_is_not_outside_it(tmp_path, capsys):
    # `tol = 0.7%` as the language elaborates it is one bit below `--at` 0.7 % parsed exactly
    # (found by comparing the two for 0.1 % .. 99.9 %); the end of the band must still count as inside.
    path = tmp_path / "tight.circuit"
    path.write_text(CIRCUIT.replace("tol = 5%", "tol = 0.7%"), encoding="utf-8")
    assert main(["solve", str(path), "--case", "warm", "--at", "R1=-0.7%"]) == 0
    assert "note:" not in capsys.readouterr().out
    assert main(["solve", str(path), "--case", "warm", "--at", "R1=-0.71%"]) == 0
    assert "note: R1 \u22120.71 % is outside its tolerance of ±0.7 %" in capsys.readouterr().out


@pytest.mark.parametrize("point, expected", [
    ("R1=5", "`--at` entry `R1=5` is not NAME=±X%"),
    ("R1=+5%,R1=+1%", "`--at` names `R1` twice"),
    ("R1=+5%,R1.value=+1%", "`--at` names `R1` twice"),
    ("R11=+1%", "not a value of circuit `kiln` in case `warm`"),
    ("R1=-100%", "a deviation must be above \u2212100 %"),
    ("R1=-99.99999999999999999%", "a deviation must be above \u2212100 %"),  # rounds to a fraction of -1
    ("R1=+2e6%", "at most 1,000,000 %"),
    ("R1.vout=+1%", "the value of resistor `R1` is named `R1`"),
    ("U1=+1%", "the value of regulator `U1` is named `U1.vout`"),
    ("U1.value=+1%", "the value of regulator `U1` is named `U1.vout`"),
    ("D1=+1%", "diode `D1` has no value a tolerance moves"),
    ("", "`--at` names no value"),
])
def test_bad_points_exit_2_with_a_message(circuit, capsys, point, expected):
    assert main(["solve", str(circuit), "--at", point]) == 2
    err = capsys.readouterr().err
    assert err.startswith("nodegate: error: ") and expected in err
    assert "Traceback" not in err


def test_unknown_name_gets_did_you_mean_and_the_values(circuit, capsys):
    assert main(["solve", str(circuit), "--at", "R11=+1%"]) == 2
    err = capsys.readouterr().err
    assert "note: did you mean `R1`?" in err
    assert "note: values it can move: VIN, R1, R2, U1.vout, RL, RD" in err


def test_a_part_absent_in_a_case_cannot_be_moved_there(tmp_path, capsys):
    path = tmp_path / "kiln.circuit"
    path.write_text(CIRCUIT + "case cold : RD = absent, D1 = absent\n", encoding="utf-8")
    assert main(["solve", str(path), "--at", "RD=+1%"]) == 2
    assert "not a value of circuit `kiln` in case `cold`" in capsys.readouterr().err
    assert main(["solve", str(path), "--case", "warm", "--at", "RD=+1%"]) == 0


NAMES = st.from_regex(r"[A-Za-z_][A-Za-z0-9_]{0,6}(\.vout)?", fullmatch=True)
DEVIATIONS = st.floats(min_value=-1.0, max_value=1e4, exclude_min=True, allow_nan=False).filter(lambda d: d != 0.0)


@given(st.dictionaries(NAMES, DEVIATIONS, min_size=1, max_size=6))
def test_format_then_parse_gives_the_point_back_exactly(point):
    assert parse_point(format_point(point.items())) == point
