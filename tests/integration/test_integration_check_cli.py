"""`nodegate check`, `solve` and `init` through `checker.cli.main`, on real files in a temporary folder.

The circuits here are linear so that every number can be computed in the test from
Ohm's law and the voltage-divider rule (any circuit-theory text, e.g. Alexander &
Sadiku, "Fundamentals of Electric Circuits", 6th ed., 2017, ch. 2).
"""

from __future__ import annotations

import json
import textwrap
from pathlib import Path

import pytest

from checker.cli import main

# A greenhouse logger's soil-probe front end, invented for these tests.
CIRCUIT = """\
circuit probe "Soil probe front end"
ground gnd
source   VIN  from vin to gnd : 5 V
resistor R1   from vin to mid : 30 kohm, rating = 100 mW
resistor R2   from mid to gnd : 20 kohm, rating = 100 mW
load     ADC  from mid to gnd : 10 uA
case low  : VIN = 4.5 V
case high : VIN = 5.5 V
"""


def write(folder: Path, name: str, text: str) -> Path:
    path = folder / name
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(textwrap.dedent(text), encoding="utf-8")
    return path


def repo(tmp_path: Path, limits: str, circuit: str = CIRCUIT, extra_config: str = "") -> Path:
    write(tmp_path, "probe.circuit", circuit)
    write(tmp_path, "limits.yaml", limits)
    write(tmp_path, "nodegate.yaml", "circuits: [probe.circuit]\nlimits: [limits.yaml]\n" + extra_config)
    return tmp_path


# A limit no divider tap of this circuit can meet: the check must fail.
FAILING_LIMIT = """\
limits:
  - id: tap-too-tight
    about: impossible on purpose
    check: voltage(mid) <= 1 V
"""


def mid_voltage(vin: float) -> float:
    """Divider with a 10 µA load on the tap: Thevenin equivalent of the divider, then the load's drop."""
    r1, r2, i_load = 30e3, 20e3, 10e-6
    v_th = vin * r2 / (r1 + r2)
    r_th = r1 * r2 / (r1 + r2)
    return v_th - i_load * r_th


def test_holding_limits_exit_0_and_reports_are_written(tmp_path, capsys):
    root = repo(tmp_path, """\
        limits:
          - id: tap-range
            about: ADC input stays in range
            check: voltage(mid) in 1.5 V .. 2.5 V
        """)
    code = main(["check", str(root), "--out", str(root / "out")])
    assert code == 0
    for name in ("report.md", "report.html", "report.json"):
        assert (root / "out" / name).is_file()
    report = json.loads((root / "out" / "report.json").read_text())
    assert report["schema"] == "nodegate-findings/1"
    assert [f["status"] for f in report["findings"]] == ["pass"]


def test_end_to_end_margin_matches_hand_computation(tmp_path):
    root = repo(tmp_path, """\
        limits:
          - id: tap-max
            about: ADC input stays under 2.1 V
            check: voltage(mid) <= 2.1 V
        """)
    main(["check", str(root), "--out", str(root / "out"), "--format", "json"])
    report = json.loads((root / "out" / "report.json").read_text())
    finding = next(f for f in report["findings"] if f["limit"] == "tap-max")
    margins = {o["case"]: o["margin"] for o in finding["outcomes"]}
    # margin of `a <= b` is b - a (RULES.md), with the tap voltage from the divider rule
    assert margins["low"] == pytest.approx(2.1 - mid_voltage(4.5), rel=1e-9)
    assert margins["high"] == pytest.approx(2.1 - mid_voltage(5.5), rel=1e-9)
    # 5.5 V x 0.4 - 10 uA x 12 kohm = 2.08 V: holds by 20 mV, so the limit passes
    assert margins["high"] == pytest.approx(0.02, rel=1e-9)
    assert finding["status"] == "pass"


def test_failing_error_limit_exits_1_and_still_writes_reports(tmp_path, capsys):
    root = repo(tmp_path, FAILING_LIMIT)
    code = main(["check", str(root), "--out", str(root / "out")])
    out = capsys.readouterr().out
    assert code == 1
    assert "tap-too-tight" in out
    assert (root / "out" / "report.html").is_file()


def test_failing_warning_exits_0_but_1_with_strict(tmp_path):
    root = repo(tmp_path, """\
        limits:
          - id: tap-soft
            about: a wish, not a rule
            check: voltage(mid) <= 1 V
            severity: warning
        """)
    assert main(["check", str(root), "--out", str(root / "out")]) == 0
    assert main(["check", str(root), "--out", str(root / "out"), "--strict"]) == 1


def test_waiver_active_then_expired(tmp_path):
    root = repo(tmp_path, """\
        limits:
          - id: tap-too-tight
            about: impossible on purpose
            check: voltage(mid) <= 1 V
        waivers:
          - limit: tap-too-tight
            reason: accepted for the prototype run
            until: 2027-01-31
        """)
    out = ["--out", str(root / "out")]
    assert main(["check", str(root), *out, "--as-of", "2027-01-31"]) == 0
    assert main(["check", str(root), *out, "--as-of", "2027-02-01"]) == 1


@pytest.mark.parametrize("circuit, line, column", [
    (CIRCUIT.replace("30 kohm", "30 kF"), 4, 31),
    (CIRCUIT.replace("from mid to gnd : 20", "from mid gnd : 20"), 5, 29),
])
def test_bad_circuit_exits_2_with_location(tmp_path, capsys, circuit, line, column):
    root = repo(tmp_path, "limits: []\n", circuit=circuit)
    assert main(["check", str(root), "--out", str(root / "out")]) == 2
    err = capsys.readouterr().err
    first = err.splitlines()[0]
    assert first.startswith(f"probe.circuit:{line}:") or f"probe.circuit:{line}:" in first
    assert "Traceback" not in err
    assert not (root / "out").exists()  # nothing written half-way


def test_unknown_config_key_exits_2_with_nearest_key(tmp_path, capsys):
    root = repo(tmp_path, "limits: []\n", extra_config="reprot:\n  html: x.html\n")
    assert main(["check", str(root)]) == 2
    err = capsys.readouterr().err
    assert "nodegate.yaml:3:1: error:" in err
    assert "report" in err


def test_missing_configuration_exits_2(tmp_path, capsys):
    assert main(["check", str(tmp_path)]) == 2
    assert "nodegate.yaml" in capsys.readouterr().err


def test_hostile_check_expression_exits_2_located_in_limit_file(tmp_path, capsys):
    root = repo(tmp_path, """\
        limits:
          - id: hostile
            about: tries to run Python
            check: __import__('os').system('touch pwned') <= 1 V
        """)
    assert main(["check", str(root)]) == 2
    err = capsys.readouterr().err
    assert "limits.yaml:4:" in err.splitlines()[0]
    assert not (root / "pwned").exists()


def test_formats_junit_sarif_and_annotations(tmp_path, capsys):
    root = repo(tmp_path, FAILING_LIMIT)
    code = main(["check", str(root), "--out", str(root / "out"), "--format", "junit,sarif,annotations"])
    assert code == 1
    assert (root / "out" / "report.junit.xml").is_file()
    assert json.loads((root / "out" / "report.sarif").read_text())["version"] == "2.1.0"
    assert "::error " in capsys.readouterr().out


def test_unknown_format_is_a_usage_error(tmp_path, capsys):
    assert main(["check", str(tmp_path), "--format", "pdf"]) == 2
    assert "unknown format" in capsys.readouterr().err


def test_solve_table_and_json(tmp_path, capsys):
    path = write(tmp_path, "probe.circuit", CIRCUIT)
    assert main(["solve", str(path), "--case", "high", "--format", "json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert [c["case"] for c in data["cases"]] == ["high"]
    assert data["cases"][0]["nets"]["mid"] == pytest.approx(mid_voltage(5.5), rel=1e-9)
    assert main(["solve", str(path)]) == 0
    table = capsys.readouterr().out
    assert "low" in table and "high" in table and "kΩ" not in table.split("\n")[0]


def test_solve_unknown_case_suggests_nearest(tmp_path, capsys):
    path = write(tmp_path, "probe.circuit", CIRCUIT)
    assert main(["solve", str(path), "--case", "hihg"]) == 2
    assert "`high`" in capsys.readouterr().err


def test_init_writes_starter_and_never_overwrites(tmp_path, capsys):
    assert main(["init", str(tmp_path)]) == 0
    config = (tmp_path / "nodegate.yaml").read_text()
    assert "circuits" in config
    assert (tmp_path / ".github" / "workflows" / "nodegate.yml").is_file()
    (tmp_path / "nodegate.yaml").write_text("# mine\n")
    assert main(["init", str(tmp_path)]) == 2
    assert (tmp_path / "nodegate.yaml").read_text() == "# mine\n"


def test_version_and_help_exit_0(capsys):
    assert main(["--version"]) == 0
    assert "nodegate" in capsys.readouterr().out
    assert main(["check", "--help"]) == 0


def test_output_piped_into_a_reader_that_stops_early_is_not_a_bug(tmp_path):
    # `nodegate solve big.circuit --format json | head`: the reader closes the pipe early
    import subprocess
    import sys

    lines = ["circuit big", "ground gnd", "source V from n0 to gnd : 1 V"]
    lines += [f"resistor R{i} from n{i} to n{i + 1} : 1 kohm" for i in range(3000)]
    lines += ["resistor RT from n3000 to gnd : 1 kohm"]
    path = write(tmp_path, "big.circuit", "\n".join(lines) + "\n")
    repo_root = Path(__file__).resolve().parents[2]
    process = subprocess.Popen([sys.executable, "-m", "checker", "solve", str(path), "--format", "json"],
                               stdout=subprocess.PIPE, stderr=subprocess.PIPE, cwd=repo_root)
    process.stdout.read(100)
    process.stdout.close()
    err = process.stderr.read().decode()
    assert process.wait(timeout=120) in (0, 141)
    assert "internal error" not in err and "Traceback" not in err
