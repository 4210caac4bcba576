"""Pin voltages in limits through the command line: an `each: regulator` headroom rule on a board
of our own, its exit code and wording, and a misspelt pin as a located error.

Closed form (Ohm's law): the regulator draws 300 mA + 1 mA through a 2 ohm feed, so its input sits
at V_supply − 0.602 V; in `brownout` (6 V) that is 5.398 V, below 5 V + 1.2 V dropout, so the
output follows the input minus the dropout and the headroom is exactly the dropout, 1.2 V: it
misses `dropout + 100 mV` by 100 mV.
"""

from __future__ import annotations

from checker.cli import main

VALVES = """circuit valves "Irrigation valve controller"
ground gnd
source    VIN    from vsup to gnd : 12 V
resistor  R_FEED from vsup to lin : 2 ohm
regulator U1     (in: lin, out: v5, gnd: gnd) : vout = 5 V, dropout = 1.2 V, iq = 1 mA
load      DRV    from v5 to gnd : 300 mA
case nominal  : VIN = 12 V
case brownout : VIN = 6 V
"""


def _repo(tmp_path, check: str):
    (tmp_path / "valves.circuit").write_text(VALVES, encoding="utf-8")
    (tmp_path / "limits.yaml").write_text(
        "limits:\n  - id: ldo-headroom\n    about: Regulators keep 100 mV above their dropout\n"
        f"    each: regulator\n    check: {check}\n", encoding="utf-8")
    (tmp_path / "nodegate.yaml").write_text("circuits:\n  - valves.circuit\nlimits:\n  - limits.yaml\n",
                                            encoding="utf-8")
    return tmp_path


def test_headroom_rule_with_pin_voltages_fails_in_brownout(tmp_path, capsys):
    repo = _repo(tmp_path, "voltage(part.in, part.out) >= part.dropout + 100 mV")
    assert main(["check", str(repo), "--out", str(tmp_path / "out")]) == 1
    out = capsys.readouterr().out
    line = next(line for line in out.splitlines() if line.startswith("FAIL"))
    assert "ldo-headroom" in line and "U1" in line and "brownout" in line
    assert "margin -100 mV" in line


def test_a_misspelt_pin_is_an_error_at_the_pin_listing_the_pins(tmp_path, capsys):
    repo = _repo(tmp_path, "voltage(part.inn, part.out) >= 1.3 V")
    assert main(["check", str(repo), "--out", str(tmp_path / "out")]) == 2
    err = capsys.readouterr().err
    assert "limits.yaml:5:25: error: part `U1` has no pin `inn`" in err  # the column of `inn`
    assert "did you mean `in`?" in err and "its pins: in, out, gnd" in err
