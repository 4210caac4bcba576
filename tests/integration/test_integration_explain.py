"""`nodegate explain` and `nodegate check` with tolerance analysis, through `checker.cli.main`.

Expected numbers come from the divider's closed form Vout = Vin R2 / (R1 + R2) (Ohm's and
Kirchhoff's laws), computed here, and are formatted with the project's engineering notation.
"""

from __future__ import annotations

import json

import pytest

from checker.cli import main
from checker.report.view import format_margin

CIRCUIT = """# Rain gauge battery sense (our own scenario)
circuit rain_gauge "Rain gauge battery sense"
ground gnd
source   VBAT  from vbat to gnd   : 3.7 V, tol = 2%
resistor R_TOP from vbat to sense : 100 kohm, tol = 1%
resistor R_BOT from sense to gnd  : 47 kohm, tol = 1%
case empty : VBAT = 3.0 V
case full  : VBAT = 4.2 V
"""
LIMITS = """limits:
  - id: sense-range
    about: Battery sense stays inside the ADC range
    check: voltage(sense) in 0.9 V .. 1.3 V
"""
K = 47e3 / 147e3  # divider ratio


def _repo(tmp_path, circuit=CIRCUIT, analysis="nominal"):
    (tmp_path / "gauge.circuit").write_text(circuit, encoding="utf-8")
    (tmp_path / "limits.yaml").write_text(LIMITS, encoding="utf-8")
    config = tmp_path / "nodegate.yaml"
    config.write_text(f"circuits:\n  - gauge.circuit\nlimits:\n  - limits.yaml\n"
                      f"analysis:\n  tolerances: {analysis}\n  samples: 100\n  seed: 4\n", encoding="utf-8")
    return config


def test_explain_shows_the_check_each_case_and_ordered_drivers(tmp_path, capsys):
    config = _repo(tmp_path)
    assert main(["explain", "sense-range", "--config", str(config)]) == 0
    out = capsys.readouterr().out
    assert "check     voltage(sense) in 0.9 V .. 1.3 V" in out
    assert "limits.yaml:2" in out
    margins = {"empty": 3.0 * K - 0.9, "full": 1.3 - 4.2 * K}  # nearer end of the range in each case
    for case, margin in margins.items():
        line = next(line for line in out.splitlines() if line.strip().startswith(case))
        assert format_margin(margin, "V") in line
    # Drivers at the worst case (full), for each end of the range: VBAT's 2 % band moves the side by
    # 0.04 * 4.2 V * K, the two 1 % resistors by about 2 * 0.01 * 4.2 V * K (1 - K) each, so VBAT comes first.
    assert "values that move each side (case full" in out
    assert "side 1: voltage(sense) >= 0.9 V" in out and "side 2: voltage(sense) <= 1.3 V" in out
    drivers = out[out.index("side 2: voltage(sense) <= 1.3 V"):]
    assert drivers.index("VBAT") < drivers.index("R_TOP") and drivers.index("VBAT") < drivers.index("R_BOT")
    assert format_margin(0.04 * 4.2 * K, "V") in drivers


def test_explain_without_tolerances_uses_one_percent_bands(tmp_path, capsys):
    config = _repo(tmp_path, CIRCUIT.replace(", tol = 2%", "").replace(", tol = 1%", ""))
    assert main(["explain", "sense-range", "--config", str(config)]) == 0
    out = capsys.readouterr().out
    assert "value \u00b11 % (the circuit declares no tolerance)" in out
    assert format_margin(0.02 * 4.2 * K, "V") in out  # VBAT over ±1 %


def test_explain_in_worst_case_mode_names_the_corner(tmp_path, capsys):
    config = _repo(tmp_path, analysis="worst-case")
    assert main(["explain", "sense-range", "--config", str(config)]) == 0
    out = capsys.readouterr().out
    high = 4.2 * 1.02 * 47e3 * 1.01 / (100e3 * 0.99 + 47e3 * 1.01)  # the closed-form extreme
    assert "full (VBAT +2 %" in out and format_margin(1.3 - high, "V") in out


def test_unknown_limit_id_exits_2_with_a_suggestion(tmp_path, capsys):
    config = _repo(tmp_path)
    assert main(["explain", "sense-rnage", "--config", str(config)]) == 2
    err = capsys.readouterr().err
    assert "no limit with id `sense-rnage`" in err and "did you mean `sense-range`" in err


@pytest.mark.parametrize("mode", ["worst-case", "monte-carlo"])
def test_check_honours_the_configured_analysis(tmp_path, capsys, mode):
    config = _repo(tmp_path, analysis=mode)
    out_dir = tmp_path / "out"
    assert main(["check", str(tmp_path), "--config", str(config), "--out", str(out_dir)]) == 1
    document = json.loads((out_dir / "report.json").read_text(encoding="utf-8"))
    assert document["analysis"]["mode"] == mode
    finding = document["findings"][0]
    assert [d["part"] for d in finding["drivers"]][0] == "VBAT"
    markdown = (out_dir / "report.md").read_text(encoding="utf-8")
    assert "driven by" in markdown and ("fails in" in markdown) == (mode == "monte-carlo")
    if mode == "monte-carlo":
        assert document["analysis"] == {"mode": mode, "samples": 100, "seed": 4}
        assert 0.0 < finding["fail_fraction"] <= 1.0
