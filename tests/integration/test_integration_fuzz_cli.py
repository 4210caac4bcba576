"""Random text and random mutations of valid files never crash the command line.

Whatever arrives in a pull request, `nodegate solve` and `nodegate check` either
work (exit 0 or 1) or explain the problem (exit 2): never exit 3, never a traceback.
"""

from __future__ import annotations

import tempfile
from pathlib import Path

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from checker.cli import main

VALID = """\
# Bike light, invented for this test
circuit bike "Bike light"
ground gnd
let r_led = 68 ohm
source   VBAT  from bat to gnd : 3.7 V, tol = 2%
resistor R_LED from bat to k   : r_led, tol = 5%, rating = 125 mW, tempco = 200 ppm/K
resistor R_TOP from bat to tap : 47 kohm
resistor R_BOT from tap to gnd : 22 kohm
inductor L1    from bat to sw  : 10 uH, dcr = 50 mohm
switch   S1    from sw to k    : closed, ron = 0.2 ohm
capacitor C1   from tap to gnd : 100 nF
load     MCU   from bat to gnd : 4 mA
case low  : VBAT = 3.2 V, ambient = -10 degC
case high : VBAT = 4.2 V, S1 = open, MCU = 70 mA
"""

LIMITS = """\
limits:
  - id: tap-range
    about: sense stays in range
    check: voltage(tap) in 0.5 V .. 1.5 V and current(R_LED) <= 50 mA
  - id: resistor-power
    about: half rating
    each: resistor
    where: part.rating > 0 W
    check: power(part) <= 50% * part.rating
"""

ALPHABET = st.sampled_from(list("abcRVgnd_ ()=:,.%\n#\"-+*/^0123456789kmuµΩ") + ["ohm", "from", "to", "case", "block"])


def mutate(text: str, data) -> str:
    """Apply a few random insertions, deletions and replacements."""
    for _ in range(data.draw(st.integers(1, 4))):
        position = data.draw(st.integers(0, len(text)))
        action = data.draw(st.sampled_from(["insert", "delete", "replace"]))
        piece = "".join(data.draw(st.lists(ALPHABET, min_size=1, max_size=3)))
        if action == "insert":
            text = text[:position] + piece + text[position:]
        elif action == "delete":
            text = text[:position] + text[position + len(piece):]
        else:
            text = text[:position] + piece + text[position + 1:]
    return text


def run_solve(text: str, capsys) -> tuple[int, str]:
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "fuzz.circuit"
        path.write_text(text, encoding="utf-8")
        code = main(["solve", str(path)])
    return code, capsys.readouterr().err


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(st.data())
def test_mutated_circuit_never_crashes(capsys, data):
    code, err = run_solve(mutate(VALID, data), capsys)
    assert code in (0, 2), err
    assert "Traceback" not in err


@settings(max_examples=80, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(st.text(max_size=200))
def test_random_text_never_crashes(capsys, text):
    code, err = run_solve(text, capsys)
    assert code in (0, 2), err


@settings(max_examples=100, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(st.data())
def test_mutated_limits_never_crash(capsys, data):
    with tempfile.TemporaryDirectory() as folder:
        root = Path(folder)
        (root / "bike.circuit").write_text(VALID, encoding="utf-8")
        (root / "limits.yaml").write_text(mutate(LIMITS, data), encoding="utf-8")
        (root / "nodegate.yaml").write_text("circuits: [bike.circuit]\nlimits: [limits.yaml]\n", encoding="utf-8")
        code = main(["check", str(root), "--out", str(root / "out")])
    err = capsys.readouterr().err
    assert code in (0, 1, 2), err
    assert "Traceback" not in err


def test_the_valid_file_solves(capsys):
    code, err = run_solve(VALID, capsys)
    assert code == 0, err
