"""Numerical health through the command line: the conditioning warning fires on a built
ill-conditioned circuit (a 1 mΩ shunt between nets held by 10 GΩ leakage paths, whose
equilibrated condition number numpy puts near 1e13, see
tests/unit/solver/test_solver_selfcheck.py) and stays silent on the bundled example."""

from __future__ import annotations

import json
import shutil
import textwrap
from pathlib import Path

from checker.cli import main

EXAMPLE = Path(__file__).resolve().parents[2] / "examples" / "weather_station"

ILL = """\
circuit ill "Shunt beside leakage"
ground gnd
source   V1      from vin to gnd : 3.3 V
resistor R_LEAK  from vin to a   : 10 Gohm
resistor R_SHUNT from a to b     : 1 mohm
resistor R_LEAK2 from b to gnd   : 10 Gohm
"""


def test_solve_warns_on_stderr_naming_the_extreme_parts(tmp_path, capsys):
    path = tmp_path / "ill.circuit"
    path.write_text(textwrap.dedent(ILL))
    assert main(["solve", str(path)]) == 0
    captured = capsys.readouterr()
    assert "ill-conditioned" in captured.err and "R_SHUNT" in captured.err and "R_LEAK" in captured.err
    assert "ill-conditioned" not in captured.out
    assert main(["solve", str(path), "--format", "json"]) == 0
    case = json.loads(capsys.readouterr().out)["cases"][0]
    assert case["self_check"]["digits_lost"] > 10


def test_check_of_the_example_prints_no_conditioning_warning_and_reports_the_self_check(tmp_path, capsys):
    repo = tmp_path / "weather_station"
    shutil.copytree(EXAMPLE, repo, ignore=shutil.ignore_patterns("build"))
    out = tmp_path / "out"
    assert main(["check", str(repo), "--out", str(out), "--format", "json"]) == 0
    captured = capsys.readouterr()
    assert "ill-conditioned" not in captured.out + captured.err
    report = json.loads((out / "report.json").read_text())
    for circuit in report["circuits"]:
        worst = circuit["self_check"]
        assert worst["kcl"] == max(case["self_check"]["kcl"] for case in circuit["cases"])
        assert worst["digits_lost"] < 4


def test_solve_of_the_example_shows_directions_in_words(capsys):
    board = EXAMPLE / "boards" / "mainboard" / "mainboard.circuit"
    assert main(["solve", str(board), "--case", "heater_on"]) == 0
    out = capsys.readouterr().out
    vbat = next(line for line in out.splitlines() if line.split()[:1] == ["VBAT"])
    assert "-" in vbat and vbat.endswith("(flows gnd → vbat)")  # the cell delivers: current leaves its + pin
    assert "checked: every net balances" in out


def test_equations_of_a_small_block_of_the_example(tmp_path, capsys):
    # The example's battery divider alone, as a reviewer would check it by hand.
    path = tmp_path / "divider.circuit"
    path.write_text("circuit div \"Battery sense\"\nground gnd\nsource VBAT from vbat to gnd : 3.7 V\n"
                    "resistor RA from vbat to adc : 68 kohm\nresistor RB from adc to gnd : 32 kohm\n")
    assert main(["solve", str(path), "--equations"]) == 0
    out = capsys.readouterr().out
    assert "net adc:   −14.71 µS·v(vbat) + 45.96 µS·v(adc) = 0 A" in out  # 1/68k; 1/68k + 1/32k
    assert "is symmetric" in out
