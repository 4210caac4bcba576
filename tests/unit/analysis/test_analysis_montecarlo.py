"""Monte Carlo: reproducible, seed-dependent, bounded by nominal and the worst corner, reports progress."""

from __future__ import annotations

import pytest
from analysis_circuits import divider_text, run

from checker.findings import Analysis

CIRCUIT = divider_text(5.0, 10e3, 4.7e3, 0.05, 0.02, "case low : VIN = 4.5 V\ncase high : VIN = 5.5 V\n")
CHECKS = ("voltage(mid) >= 1.3 V", "voltage(mid) <= 1.7 V")


def _margins(findings):
    return [(o.case, o.margin, o.corner) for f in findings.findings for o in f.outcomes]


def test_same_seed_same_result_and_another_seed_differs():
    first = run(CIRCUIT, CHECKS, Analysis("monte-carlo", 300, 7))
    again = run(CIRCUIT, CHECKS, Analysis("monte-carlo", 300, 7))
    other = run(CIRCUIT, CHECKS, Analysis("monte-carlo", 300, 8))
    assert _margins(first) == _margins(again)
    assert [f.fail_fraction for f in first.findings] == [f.fail_fraction for f in again.findings]
    assert _margins(first) != _margins(other)


def test_observed_worst_lies_between_nominal_and_the_worst_corner():
    nominal = run(CIRCUIT, CHECKS, Analysis())
    corner = run(CIRCUIT, CHECKS, Analysis("worst-case"))
    sampled = run(CIRCUIT, CHECKS, Analysis("monte-carlo", 400, 1))
    for n, w, s in zip(nominal.findings, corner.findings, sampled.findings):
        for on, ow, os_ in zip(n.outcomes, w.outcomes, s.outcomes):
            assert ow.margin - 1e-12 <= os_.margin <= on.margin
            assert os_.corner.startswith("sample ") and 1 <= int(os_.corner.split()[1]) <= 400


def test_fail_fraction_counts_samples_failing_in_any_case_and_drivers_are_named():
    # With 5 % resistors and a ±10 % supply over the cases, "high" often exceeds 1.7 V and "low" never
    # does; the fraction is the share of boards failing in at least one case.
    findings = run(CIRCUIT, CHECKS, Analysis("monte-carlo", 400, 3))
    upper = findings.findings[1]
    high_failures = upper.fail_fraction
    assert 0.0 < high_failures < 1.0
    assert upper.status == "fail"
    assert {part for part, _ in upper.drivers} == {"VIN", "R1", "R2"}
    assert findings.findings[0].fail_fraction == 0.0 and findings.findings[0].status == "pass"


def test_progress_every_tenth_of_the_samples():
    messages = []
    run(CIRCUIT, CHECKS, Analysis("monte-carlo", 50, 1), messages.append)
    samples = [m for m in messages if "samples" in m]
    assert samples == [f"station: {k} of 50 samples" for k in range(5, 51, 5)]


def test_a_circuit_without_tolerances_counts_as_one_sample():
    findings = run(divider_text(tol_r=0.0), ("voltage(mid) <= 2 V",), Analysis("monte-carlo", 100, 1))
    finding = findings.findings[0]
    assert finding.fail_fraction == 1.0 and finding.worst.margin == pytest.approx(-0.5, rel=1e-12)
