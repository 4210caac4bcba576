"""Design lints through the command line (docs/lints.md): each slip the lints exist for, on a
greenhouse-logger board of our own, with its location, its did-you-mean, the exit code with and
without --strict, a waiver, and every report format carrying it.

Numbers are checked against hand calculations (Ohm's law) where a lint reports one:
- the regulator fed backwards: a 5 V supply through 100 Ω into a 3.3 V output makes the
  regulator sink (5 − 3.3) / 100 = 17 mA, so its input receives 5 V × 17 mA = 85 mW;
- the reversed current load: 10 mA pushed from gnd into a 3 V net, −3 V × 10 mA = −30 mW.
"""

from __future__ import annotations

import json

import pytest

from checker.cli import main

LOGGER = """circuit logger "Greenhouse logger"
ground gnd
source    VBAT   from vbat to gnd   : 3.6 V
resistor  R_PU   from vbat to sda   : 1 Mohm, tol = 5%
resistor  R_SDA  from sda to gnd    : 2.2 Mohm, tol = 5%
resistor  R_NTC  from vbat to tsense : 10 kohm, tol = 1%
resistor  R_REF  from tsense to gnd : 10 kohm, tol = 1%
"""


def _repo(tmp_path, extra: str = "", limits: str = "limits: []\n"):
    (tmp_path / "logger.circuit").write_text(LOGGER + extra, encoding="utf-8")
    (tmp_path / "limits.yaml").write_text(limits, encoding="utf-8")
    (tmp_path / "nodegate.yaml").write_text(
        "circuits:\n  - logger.circuit\nlimits:\n  - limits.yaml\n"
        "report:\n  markdown: out/report.md\n  html: out/report.html\n  json: out/report.json\n"
        "  sarif: out/report.sarif\n", encoding="utf-8")
    return tmp_path


def _check(repo, capsys, *options: str) -> tuple[int, str, str]:
    code = main(["check", str(repo), *options])
    captured = capsys.readouterr()
    return code, captured.out, captured.err


def _warning(out: str, lint: str) -> str:
    return next(line for line in out.splitlines() if line.startswith("LINT") and f"lint.{lint}" in line)


def test_a_clean_board_has_no_lint(tmp_path, capsys):
    code, out, _ = _check(_repo(tmp_path), capsys)
    assert code == 0 and "lint." not in out


def test_a_misspelt_net_with_one_connection_is_named_at_its_token_with_the_nearest_nets(tmp_path, capsys):
    repo = _repo(tmp_path, "resistor R_T from tsense to tsens : 100 kohm\n")
    code, out, _ = _check(repo, capsys)
    line = _warning(out, "single-connection")
    assert code == 0  # a warning, until --strict
    assert "[tsens] at " in line and "logger.circuit:8:29:" in line  # line 8, the column of `tsens`
    assert "did you mean `tsense`" in line
    assert _check(repo, capsys, "--strict")[0] == 1


def test_a_net_a_limit_names_is_not_a_slip(tmp_path, capsys):
    repo = _repo(tmp_path, "resistor R_TP from tsense to probe : 1 kohm\n",
                 "limits:\n  - id: probe\n    check: voltage(probe) <= 3.6 V\n")
    code, out, _ = _check(repo, capsys, "--strict")
    assert code == 0 and "single-connection" not in out


@pytest.mark.parametrize("line, shown", [
    ("resistor R_BIG from sda to gnd : 5 Tohm\n", "R_BIG is 5.00 TΩ, outside the range usual for a resistor (1.00 mΩ to 1.00 TΩ)"),
    ("resistor R_TINY from sda to gnd : 0.5 mohm\n", "R_TINY is 500 µΩ"),
    ("capacitor C_HUGE from vbat to gnd : 4.7 F\n", "C_HUGE is 4.70 F, outside the range usual for a capacitor"),
    ("source V_HV from hv to gnd : 240 kV\nresistor R_HV from hv to gnd : 1 Mohm\n", "V_HV is 240 kV"),
])
def test_a_value_far_outside_its_kind_is_flagged_at_the_value(tmp_path, capsys, line, shown):
    code, out, _ = _check(_repo(tmp_path, line), capsys)
    warning = _warning(out, "implausible-value")
    assert shown in warning and "check the unit prefix" in warning
    assert "logger.circuit:8:" in warning


def test_milli_where_the_other_resistors_use_mega_is_a_slipped_prefix(tmp_path, capsys):
    # `10 mohm` meant 10 Mohm: across the 3.6 V cell it would draw 360 A (Ohm's law).
    code, out, _ = _check(_repo(tmp_path, "resistor R_LEAK from vbat to gnd : 10 mohm\n"), capsys)
    warning = _warning(out, "slipped-prefix")
    assert "logger.circuit:8:36:" in warning  # at the value
    assert "did you mean `Mohm`?" in warning and "R_PU" in warning


def test_milli_alone_is_no_slip(tmp_path, capsys):
    # A 10 mΩ shunt on a board whose other resistors are in kΩ is ordinary.
    text = LOGGER.replace("1 Mohm", "100 kohm").replace("2.2 Mohm", "220 kohm")
    (tmp_path / "extra").mkdir()
    repo = _repo(tmp_path, "resistor R_SHUNT from vbat to gnd : 10 mohm\n")
    (repo / "logger.circuit").write_text(text + "resistor R_SHUNT from vbat to gnd : 10 mohm\n", encoding="utf-8")
    code, out, _ = _check(repo, capsys)
    assert "slipped-prefix" not in out


def test_a_tolerance_of_100_percent_or_more_is_an_error_in_nominal_mode(tmp_path, capsys):
    repo = _repo(tmp_path)
    (repo / "logger.circuit").write_text(LOGGER.replace("10 kohm, tol = 1%\nresistor  R_REF",
                                                        "10 kohm, tol = 5\nresistor  R_REF"), encoding="utf-8")
    code, _, err = _check(repo, capsys)
    assert code == 2
    assert "logger.circuit:6:55: error: `tol` is from 0 % to below 100 %" in err
    assert "write a percentage with `%`: `tol = 5%`" in err


def test_a_tolerance_above_50_percent_is_a_warning_with_a_hint_for_a_bare_number(tmp_path, capsys):
    code, out, _ = _check(_repo(tmp_path, "resistor R_X from sda to tsense : 47 kohm, tol = 0.6\n"), capsys)
    warning = _warning(out, "wide-tolerance")
    assert code == 0
    assert "R_X has tol = 60 %" in warning and "did you mean tol = 0.6%?" in warning


@pytest.mark.parametrize("flag, vth, expected", [("pmos", "0.9 V", "-900 mV"), ("nmos", "-1.5 V", "1.50 V")])
def test_a_threshold_with_the_wrong_sign_for_its_type(tmp_path, capsys, flag, vth, expected):
    extra = f"mosfet Q1 (d: sda, g: tsense, s: vbat) : {flag}, vth = {vth}\n"
    code, out, _ = _check(_repo(tmp_path, extra), capsys)
    warning = _warning(out, "threshold-sign")
    assert f"did you mean vth = {expected}?" in warning
    assert "logger.circuit:8:" in warning


def test_a_right_way_round_threshold_is_no_slip(tmp_path, capsys):
    extra = "mosfet Q1 (d: sda, g: tsense, s: vbat) : pmos, vth = -0.9 V\n"
    assert "threshold-sign" not in _check(_repo(tmp_path, extra), capsys)[1]


SWAPPED_SWITCH = """source   VGPIO  from gpio to gnd : 3.3 V
resistor R_B    from gpio to base : 1 kohm
resistor R_FAN  from vbat to sw : 120 ohm
bjt      Q_FAN  (c: gnd, b: base, e: sw) : npn, beta = 100
"""


def test_a_transistor_with_collector_and_emitter_swapped_works_reverse_active(tmp_path, capsys):
    code, out, _ = _check(_repo(tmp_path, SWAPPED_SWITCH), capsys)
    warning = _warning(out, "swapped-transistor")
    assert "Q_FAN (npn) works reverse-active" in warning and "collector and emitter look swapped" in warning


def test_the_same_switch_the_right_way_round_is_no_slip(tmp_path, capsys):
    fixed = SWAPPED_SWITCH.replace("(c: gnd, b: base, e: sw)", "(c: sw, b: base, e: gnd)")
    assert "swapped-transistor" not in _check(_repo(tmp_path, fixed), capsys)[1]


def test_a_regulator_fed_backwards_delivers_power_into_its_input(tmp_path, capsys):
    extra = ("source    VIN    from vin to gnd : 5 V\n"
             "regulator U3V3   (in: vin, out: v3, gnd: gnd) : vout = 3.3 V\n"
             "source    VUSB   from usb to gnd : 5 V\n"
             "resistor  R_BACK from usb to v3 : 100 ohm\n")
    code, out, _ = _check(_repo(tmp_path, extra), capsys)
    warning = _warning(out, "delivers-power")
    assert "U3V3 (regulator) delivers 85.0 mW into its input" in warning  # 5 V x 17 mA


def test_a_load_driven_backwards_delivers_power(tmp_path, capsys):
    code, out, _ = _check(_repo(tmp_path, "load L_PUMP from gnd to vbat : 10 mA\n"), capsys)
    warning = _warning(out, "delivers-power")
    assert "L_PUMP (load) delivers 36.0 mW" in warning  # 3.6 V x 10 mA


def test_a_lint_can_be_waived_like_a_limit(tmp_path, capsys):
    limits = ("limits: []\nwaivers:\n  - limit: lint.single-connection\n    part: tsens\n"
              "    reason: test pad on the sensor connector\n    until: 2999-01-01\n")
    repo = _repo(tmp_path, "resistor R_T from tsense to tsens : 100 kohm\n", limits)
    code, out, _ = _check(repo, capsys, "--strict")
    assert code == 0 and "1 waived" in out


def test_a_lint_waiver_naming_no_net_is_an_error(tmp_path, capsys):
    limits = ("limits: []\nwaivers:\n  - limit: lint.single-connection\n    part: tsenz\n"
              "    reason: typo\n    until: 2999-01-01\n")
    code, _, err = _check(_repo(tmp_path, "resistor R_T from tsense to tsens : 100 kohm\n", limits), capsys)
    assert code == 2 and "no net `tsenz`" in err and "did you mean `tsens`?" in err


def test_every_report_carries_the_lint_and_one_verdict(tmp_path, capsys):
    repo = _repo(tmp_path, "resistor R_T from tsense to tsens : 100 kohm\n")
    code, _, _ = _check(repo, capsys, "--strict")
    assert code == 1
    report = json.loads((repo / "out/report.json").read_text(encoding="utf-8"))
    finding = next(f for f in report["findings"] if f["limit"] == "lint.single-connection")
    assert finding["status"] == "warn" and finding["item"] == "tsens"
    location = finding["item_location"]
    assert location["path"].endswith("logger.circuit") and (location["line"], location["column"]) == (8, 29)
    assert report["verdict"]["passed"] is False
    sarif = json.loads((repo / "out/report.sarif").read_text(encoding="utf-8"))
    result = next(r for r in sarif["runs"][0]["results"] if r["ruleId"] == "lint.single-connection")
    assert result["level"] == "error"  # it fails the check under --strict
    assert "did you mean `tsense`" in result["message"]["text"]
    assert "joins one pin only" in (repo / "out/report.md").read_text(encoding="utf-8")
    assert "net `tsens` joins one pin only" in (repo / "out/report.html").read_text(encoding="utf-8")
