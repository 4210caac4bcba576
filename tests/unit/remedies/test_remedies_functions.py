"""The limit functions `preferred()` and `declared()` (docs/remedies.md), and explain's remedy lines."""

from __future__ import annotations

import datetime

import pytest

from checker.analysis import analyse
from checker.errors import LimitError
from checker.findings import Analysis
from checker.language import parse_design
from checker.limits import compile_limits, load_limit_text
from checker.remedies.explain import remedy_lines
from checker.remedies.search import with_remedies

TODAY = datetime.date(2030, 1, 1)
CIRCUIT = ('circuit bench "Bench"\nground gnd\n'
           "source V1 from a to gnd : 5 V\n"
           "resistor R1 from a to b : 3.4 kohm, tol = 5%\n"
           "resistor R2 from b to gnd : 10 kohm, tol = 1%\n"
           "case high : R2 = 12 kohm\n")


def _findings(check: str, analysis: Analysis = Analysis()):
    design = parse_design(CIRCUIT, "bench.circuit")
    files = [load_limit_text(f"limits:\n  - id: probe\n    about: probe\n    check: {check}\n", "l.yaml")]
    return analyse(compile_limits(files, [design]), [design], TODAY, analysis).findings


def test_preferred_snaps_to_the_series_of_the_tolerance():
    finding, = _findings("R1.value in preferred(R1.value, R1.tol) .. preferred(R1.value, R1.tol)")
    assert finding.worst.bound == 3300.0 and finding.status == "fail"
    finding, = _findings("R2.value <= preferred(R2.value, 1%)")  # 10 k is E96
    assert finding.status == "pass"


def test_declared_ignores_case_overrides_and_tolerances():
    finding, = _findings("declared(R2.value) <= 10 kohm", Analysis("worst-case"))
    assert finding.status == "pass" and all(o.value == 10e3 for o in finding.outcomes)
    finding, = _findings("R2.value <= 10 kohm")  # the case's own value: 12 kΩ in `high`
    assert finding.status == "fail"


@pytest.mark.parametrize("check, message", [
    ("declared(voltage(a)) <= 1 V", "`declared` reads part properties and numbers only"),
    ("declared(ambient) <= 30 degC", "`declared` reads part properties and numbers only"),
    ("R1.value <= preferred(R1.value, 5 V)", "a tolerance is a plain fraction"),
    ("R1.value <= preferred(R1.value)", "`preferred` takes a value and a tolerance"),
])
def test_misuse_is_an_error_at_the_function(check, message):
    with pytest.raises(LimitError, match=message):
        _findings(check)


def test_explain_shows_the_root_before_snapping():
    led = ('circuit bench "Bench"\nground gnd\nsource V1 from a to gnd : 5 V\n'
           "resistor R1 from a to k : 470 ohm, tol = 5%\nled D1 from k to gnd : vf = 2.0 V at 10 mA\n")
    design = parse_design(led, "bench.circuit")
    files = [load_limit_text("limits:\n  - id: led\n    about: led\n    check: current(R1) >= 10 mA\n", "l.yaml")]
    found = with_remedies(analyse(compile_limits(files, [design]), [design], TODAY), files, [design], TODAY,
                          Analysis())
    lines = remedy_lines(found.findings[0])
    assert lines[0] == "  remedies (one part change each, confirmed against every limit of the circuit):"
    assert "      the margin crosses zero at R1 = 300.000000 \u03a9; 270 \u03a9 is the next E24 value past it" in lines
