"""Several stable states through the command line (docs/models.md, "Stability and several states"):
every limit is evaluated in each state, reports label the state, worst-case analysis searches each
state from its own operating point, and `NET starts at V` is checked like any override.

The latch is the door-latch memory of tests/reference/test_reference_stability.py: with q high,
q = 5 V / (1 + RD1 (1/100 MΩ + 1 pS)) (a divider, Ohm's law), so with RD1 = 10 kΩ ± 5 % its lowest
value is at RD1 +5 %: 5 / (1 + 10.5e3 (1e-8 + 1e-12)) = 4.999475 V.
"""

from __future__ import annotations

import json

import pytest

from checker.cli import main

LATCH = """circuit door "Greenhouse door latch memory"
ground gnd
source   VDD     from vdd to gnd : 5 V
resistor RD1     from vdd to q   : 10 kohm, tol = 5%
resistor RD2     from vdd to qn  : 10 kohm, tol = 5%
mosfet   M1      (d: q, g: qn, s: gnd)  : nmos, vth = 1 V, k = 2 mA/V^2
mosfet   M2      (d: qn, g: q, s: gnd)  : nmos, vth = 1 V, k = 2 mA/V^2
resistor R_SET   from q to gnd   : 100 Mohm
resistor R_RESET from qn to gnd  : 100 Mohm
case hold : VDD = 5 V
"""

LIMITS = """limits:
  - id: q-readable
    about: the door sensor reads q as high
    check: voltage(q) >= 4.9 V
"""


def _repo(tmp_path, circuit: str = LATCH, tolerances: str = "nominal"):
    (tmp_path / "door.circuit").write_text(circuit, encoding="utf-8")
    (tmp_path / "limits.yaml").write_text(LIMITS, encoding="utf-8")
    (tmp_path / "nodegate.yaml").write_text(
        f"circuits: [door.circuit]\nlimits: [limits.yaml]\nanalysis:\n  tolerances: {tolerances}\n"
        "report:\n  json: out/report.json\n  markdown: out/report.md\n", encoding="utf-8")
    return tmp_path


def _outcomes(repo) -> list[dict]:
    report = json.loads((repo / "out/report.json").read_text(encoding="utf-8"))
    return next(f for f in report["findings"] if f["limit"] == "q-readable")["outcomes"]


def test_every_limit_is_evaluated_in_each_state_and_the_failing_one_is_named(tmp_path, capsys):
    repo = _repo(tmp_path)
    assert main(["check", str(repo)]) == 1  # q is low in one of the two states
    outcomes = _outcomes(repo)
    assert [(o["case"], o["state"], o["holds"]) for o in outcomes] == [("hold", "1 of 2", True),
                                                                      ("hold", "2 of 2", False)]
    line = next(line for line in capsys.readouterr().out.splitlines() if line.startswith("FAIL"))
    assert "case hold [state 2 of 2]" in line
    assert "state 2 of 2" in (repo / "out/report.md").read_text(encoding="utf-8")
    report = json.loads((repo / "out/report.json").read_text(encoding="utf-8"))
    assert [c["state"] for c in report["circuits"][0]["cases"]] == ["1 of 2", "2 of 2"]


def test_a_pinned_state_is_the_only_one_checked(tmp_path):
    repo = _repo(tmp_path, LATCH.replace("case hold : VDD = 5 V", "case hold : VDD = 5 V, q starts at 5 V"))
    assert main(["check", str(repo)]) == 0
    assert [(o["state"], o["holds"]) for o in _outcomes(repo)] == [(None, True)]


def test_worst_case_searches_each_state_from_its_own_point(tmp_path):
    repo = _repo(tmp_path, tolerances="worst-case")
    assert main(["check", str(repo)]) == 1
    high, low = _outcomes(repo)
    assert (high["state"], low["state"]) == ("1 of 2", "2 of 2")
    assert high["value"] == pytest.approx(5 / (1 + 10.5e3 * (1e-8 + 1e-12)), rel=1e-9)
    assert high["holds"] and not low["holds"]


def test_monte_carlo_samples_each_state(tmp_path):
    repo = _repo(tmp_path, tolerances="monte-carlo")
    (repo / "nodegate.yaml").write_text((repo / "nodegate.yaml").read_text() .replace(
        "tolerances: monte-carlo", "tolerances: monte-carlo\n  samples: 20"), encoding="utf-8")
    assert main(["check", str(repo)]) == 1
    assert [o["state"] for o in _outcomes(repo)] == ["1 of 2", "2 of 2"]


@pytest.mark.parametrize("override, message", [
    ("qq starts at 5 V", "no net `qq` in this case to start at a voltage"),
    ("q starts at 5 mA", "a net starts at a voltage; got"),
])
def test_a_wrong_start_is_a_located_error(tmp_path, capsys, override, message):
    repo = _repo(tmp_path, LATCH.replace("case hold : VDD = 5 V", f"case hold : VDD = 5 V, {override}"))
    assert main(["check", str(repo)]) == 2
    err = capsys.readouterr().err
    assert "door.circuit:10:" in err and message in err
