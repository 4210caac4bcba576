"""Limits bound to circuits (docs/limits.md, "Binding limits to circuits"), through `checker.cli.main`.

Two boards of our own in one repository: `alpha`, a greenhouse logger, and `beta`, a bike
light. Both have a net `v3v3` and a regulator `U_LDO`, the common names that let a limit
written for one board be evaluated on the other when limits were not bound.
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from checker.cli import EXIT_INPUT, main

ALPHA = """\
circuit alpha "Greenhouse logger"
ground gnd
source    VSOLAR from vsol to gnd : 5 V
regulator U_LDO  (in: vsol, out: v3v3, gnd: gnd) : vout = 3.3 V, dropout = 200 mV
resistor  R_SOIL from v3v3 to soil : 10 kohm, rating = 63 mW
resistor  R_PROBE from soil to gnd : 22 kohm, rating = 63 mW
case dawn : ambient = 4 degC
"""

BETA = """\
circuit beta "Bike light"
ground gnd
source    VCELL from vcell to gnd : 3.7 V
regulator U_LDO (in: vcell, out: v3v3, gnd: gnd) : vout = 3.3 V, dropout = 150 mV
resistor  R_LAMP from v3v3 to gnd : 330 ohm, rating = 125 mW
case ride : ambient = 12 degC
"""

LDO_RAIL = """\
limits:
  - id: logger-rail
    check: voltage(v3v3) in 3.2 V .. 3.4 V
"""


def repo(folder: Path, limits: str, entry: str = "- boards/limits.yaml") -> Path:
    """The two boards, one limits file listed in nodegate.yaml as `entry`, and `folder` to run in."""
    boards = folder / "boards"
    boards.mkdir(parents=True)
    (boards / "alpha.circuit").write_text(ALPHA, encoding="utf-8")
    (boards / "beta.circuit").write_text(BETA, encoding="utf-8")
    (boards / "limits.yaml").write_text(limits, encoding="utf-8")
    (folder / "nodegate.yaml").write_text(
        f"circuits:\n  - boards/*.circuit\nlimits:\n  {entry}\n", encoding="utf-8")
    return folder


def findings(folder: Path) -> list[dict]:
    """Run a check writing JSON; its findings."""
    out = folder / "out"
    assert main(["check", str(folder), "--out", str(out), "--format", "json"]) in (0, 1)
    return json.loads((out / "report.json").read_text(encoding="utf-8"))["findings"]


def error(folder: Path, capsys) -> str:
    """Run a check expected to stop on an input error; what it printed."""
    assert main(["check", str(folder), "--out", str(folder / "out")]) == EXIT_INPUT
    return capsys.readouterr().err


def test_integration_binding_a_bound_file_is_evaluated_on_its_circuits_only(tmp_path):
    folder = repo(tmp_path, LDO_RAIL, "- path: boards/limits.yaml\n    circuits: [alpha]")
    assert [(f["limit"], f["circuit"]) for f in findings(folder)] == [("logger-rail", "alpha")]


def test_integration_binding_a_misspelt_net_in_a_bound_limit_is_an_error_at_the_token(tmp_path, capsys):
    limits = LDO_RAIL.replace("voltage(v3v3)", "voltage(v3v33)")
    err = error(repo(tmp_path, limits, "- path: boards/limits.yaml\n    circuits: [alpha]"), capsys)
    assert "limits.yaml:3:20: error: no net or part `v3v33` in circuit `alpha`" in err
    assert "did you mean `v3v3`?" in err


def test_integration_binding_an_unbound_limit_must_resolve_in_every_circuit(tmp_path, capsys):
    limits = "limits:\n  - id: soil-probe\n    check: voltage(soil) <= 1.2 V\n"
    err = error(repo(tmp_path, limits), capsys)
    assert "limits.yaml:3:20: error: no net or part `soil` in circuit `beta`" in err
    assert "fails to resolve in `beta`" in err
    assert "`circuits: [alpha]`" in err


def test_integration_binding_to_an_unknown_circuit_is_an_error_at_the_name(tmp_path, capsys):
    err = error(repo(tmp_path, LDO_RAIL, "- path: boards/limits.yaml\n    circuits: [alpah]"), capsys)
    assert "nodegate.yaml:5:16: error: no circuit `alpah`" in err
    assert "did you mean `alpha`?" in err


@pytest.mark.parametrize("entry, expected", [
    ("- path: boards/limits.yaml\n    circuits: []", "nodegate.yaml:5:15: error: `circuits` lists at least one circuit"),
    ("- path: boards/limits.yaml\n    circuits: [alpha, alpha]",
     "nodegate.yaml:5:23: error: circuit `alpha` is listed twice in `circuits`"),
    ("- path: boards/limits.yaml\n    pack: ratings", "nodegate.yaml:4:5: error: a limits entry names either"),
])
def test_integration_binding_malformed_entries_are_errors_where_written(tmp_path, capsys, entry, expected):
    assert expected in error(repo(tmp_path, LDO_RAIL, entry), capsys)


def test_integration_binding_a_single_limit_carries_its_own_circuits(tmp_path, capsys):
    limits = LDO_RAIL + ("  - id: lamp-current\n    circuits: [beta]\n"
                         "    check: current(R_LAMP) <= 20 mA\n")
    assert {(f["limit"], f["circuit"]) for f in findings(repo(tmp_path / "one", limits))} == {
        ("logger-rail", "alpha"), ("logger-rail", "beta"), ("lamp-current", "beta")}
    bound = "- path: boards/limits.yaml\n    circuits: [alpha]"
    err = error(repo(tmp_path / "two", limits, bound), capsys)
    assert "limits.yaml:5:16: error: circuit `beta` is outside its file's binding (`circuits: [alpha]`)" in err


def test_integration_binding_a_waiver_is_narrowed_by_its_circuits(tmp_path, capsys):
    limits = ("limits:\n  - id: rail-tight\n    check: voltage(v3v3) <= 3.1 V\n"
              "waivers:\n  - limit: rail-tight\n    circuits: [beta]\n"
              "    reason: the lamp tolerates the full rail\n    until: 2999-01-01\n")
    status = {f["circuit"]: f["status"] for f in findings(repo(tmp_path / "one", limits))}
    assert status == {"alpha": "fail", "beta": "waived"}
    err = error(repo(tmp_path / "two", limits.replace("[beta]", "[bta]")), capsys)
    assert "limits.yaml:6:16: error: no circuit `bta`" in err and "did you mean `beta`?" in err


def test_integration_binding_each_limits_and_packs_select_what_exists(tmp_path):
    limits = "limits:\n  - id: ldo-headroom\n    each: regulator\n    check: power(part) <= 1 W\n"
    folder = repo(tmp_path, limits)
    config = folder / "nodegate.yaml"
    config.write_text(config.read_text(encoding="utf-8") + "  - pack: ratings\n", encoding="utf-8")
    got = {(f["limit"], f["circuit"], f["item"]) for f in findings(folder)}
    assert {("ldo-headroom", "alpha", "U_LDO"), ("ldo-headroom", "beta", "U_LDO")} <= got
    ratings = {(circuit, item) for limit, circuit, item in got if limit != "ldo-headroom"}
    assert ("alpha", "R_SOIL") in ratings and ("beta", "R_LAMP") in ratings


def test_integration_binding_a_bound_pack_applies_to_its_circuits_only(tmp_path):
    folder = repo(tmp_path, LDO_RAIL, "- path: boards/limits.yaml\n    circuits: [alpha]\n"
                                      "  - pack: ratings\n    circuits: [beta]")
    got = {(f["limit"], f["circuit"]) for f in findings(folder)}
    assert ("logger-rail", "alpha") in got
    assert {circuit for limit, circuit in got if limit != "logger-rail"} == {"beta"}
