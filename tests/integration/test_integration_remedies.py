"""Remedies through the command line on the bundled example: its warning gets a remedy under which
every limit holds, and a failing variant's remedy, applied by hand, makes the check pass."""

from __future__ import annotations

import json
import shutil
from pathlib import Path

from checker.cli import main

EXAMPLE = Path(__file__).resolve().parents[2] / "examples" / "weather_station"
CIRCUIT = Path("boards") / "mainboard" / "mainboard.circuit"


def _copy(tmp_path: Path) -> Path:
    repo = tmp_path / "weather_station"
    shutil.copytree(EXAMPLE, repo, ignore=shutil.ignore_patterns("build"))
    return repo


def _findings(out: Path) -> dict[str, dict]:
    return {f["limit"]: f for f in json.loads((out / "report.json").read_text(encoding="utf-8"))["findings"]
            if f["item"] is None}


def test_the_example_warning_has_a_remedy_under_which_every_limit_holds(tmp_path, capsys):
    out = tmp_path / "out"
    assert main(["check", str(_copy(tmp_path)), "--out", str(out)]) == 0
    printed = capsys.readouterr().out
    assert "  remedy: U_LDO.dropout 150 mV \u2192 29.0 mV (round): margin +1.00 mV (0.78 %); all 37 limits hold" \
        in printed.splitlines()
    remedy, = _findings(out)["ldo-headroom"]["remedies"]
    assert remedy["all_limits_hold"] and remedy["to"] == 0.029 and remedy["margin_after"] > 0
    assert "Remedy: U\\_LDO.dropout 150 mV \u2192 29.0 mV" in (out / "report.md").read_text(encoding="utf-8")
    assert "<li>Remedy: U_LDO.dropout 150 mV \u2192 29.0 mV" in (out / "report.html").read_text(encoding="utf-8")


def test_a_failing_variant_passes_with_its_remedy_applied_by_hand(tmp_path):
    repo = _copy(tmp_path)
    circuit = repo / CIRCUIT
    circuit.write_text(circuit.read_text(encoding="utf-8").replace("150 ohm, tol = 5%", "47 ohm, tol = 5%"),
                       encoding="utf-8")  # a brighter power LED: too much current
    out = tmp_path / "out"
    assert main(["check", str(repo), "--out", str(out), "--format", "json"]) == 1
    failing = _findings(out)["power-led-current"]
    assert failing["status"] == "fail"
    remedy = next(r for r in failing["remedies"] if r["part"] == "R_LED")
    assert remedy["series"] == "E24" and remedy["to"] > 47.0 and remedy["margin_after"] > 0
    assert not remedy["breaks"]
    ohms = f"{remedy['to']:g} ohm"
    circuit.write_text(circuit.read_text(encoding="utf-8").replace("47 ohm", ohms), encoding="utf-8")
    assert main(["check", str(repo), "--out", str(out), "--format", "json", "--no-remedies"]) == 0
    assert _findings(out)["power-led-current"]["status"] == "pass"
    assert _findings(out)["power-led-current"]["remedies"] == []
