"""Tolerance analysis of a resistive divider against closed forms and probability theory.

Sources, each derived here rather than recalled:
- Extreme-value analysis: Vout = Vin R2 / (R1 + R2) has dVout/dR1 = -Vin R2 / (R1 + R2)^2 < 0 and
  dVout/dR2 = Vin R1 / (R1 + R2)^2 > 0, so over the box R1 (1 ± t), R2 (1 ± t) it is extreme at the
  corners: Vmin = Vin R2 (1 - t) / (R1 (1 + t) + R2 (1 - t)), Vmax = Vin R2 (1 + t) / (R1 (1 - t) + R2 (1 + t)).
- Monte Carlo: with u1, u2 independent and uniform on [-1, 1], the failure probability
  P(Vout < theta) = 1/2 \u222b P(u2 < u2*(u1)) du1 is integrated with scipy.integrate.quad; the observed
  fraction of n samples is binomial, standard error sqrt(p (1 - p) / n) (any probability text, e.g.
  Feller, "An Introduction to Probability Theory and Its Applications", vol. 1, 3rd ed., 1968, ch. VI).
"""

from __future__ import annotations

import datetime
import math

import numpy as np
import pytest
from scipy import integrate

from checker.analysis import analyse
from checker.findings import Analysis
from checker.language import parse_design
from checker.limits import compile_limits, load_limit_text

VIN, R1, R2 = 5.0, 10e3, 10e3


def _run(tol: float, check: str, analysis: Analysis):
    design = parse_design(f'circuit hive "Beehive scale battery sense"\nground gnd\n'
                          f"source VIN from vin to gnd : {VIN} V\n"
                          f"resistor R1 from vin to mid : {R1} ohm, tol = {tol * 100:g}%\n"
                          f"resistor R2 from mid to gnd : {R2} ohm, tol = {tol * 100:g}%\n", "hive.circuit")
    limits = load_limit_text(f"limits:\n  - id: sense\n    about: sense\n    check: {check}\n", "limits.yaml")
    findings = analyse(compile_limits([limits], [design]), [design], datetime.date(2030, 1, 1), analysis)
    return findings.findings[0]


@pytest.mark.parametrize("tol", [0.01, 0.05, 0.1])
def test_worst_case_extremes_of_a_divider(tol):
    v_min = VIN * R2 * (1 - tol) / (R1 * (1 + tol) + R2 * (1 - tol))
    v_max = VIN * R2 * (1 + tol) / (R1 * (1 - tol) + R2 * (1 + tol))
    lower = _run(tol, "voltage(mid) >= 2 V", Analysis("worst-case"))
    upper = _run(tol, "voltage(mid) <= 3 V", Analysis("worst-case"))
    assert lower.worst.value == pytest.approx(v_min, rel=1e-12)
    assert upper.worst.value == pytest.approx(v_max, rel=1e-12)
    assert lower.worst.corner == f"R1 +{tol * 100:.3g} %, R2 \u2212{tol * 100:.3g} %" or \
        lower.worst.corner == f"R2 \u2212{tol * 100:.3g} %, R1 +{tol * 100:.3g} %"


def _failure_probability(tol: float, theta: float) -> float:
    """P(Vout < theta) for u1, u2 ~ U[-1, 1]: Vout < theta <=> (1 + t u2)(1 - k) < k (1 + t u1), k = theta/Vin."""
    k = theta / VIN  # R1 = R2, so the ratio depends on the two deviations only

    def conditional(u1: float) -> float:
        u2_star = (k * (1 + tol * u1) / (1 - k) - 1) / tol
        return min(max((u2_star + 1) / 2, 0.0), 1.0)
    value, _ = integrate.quad(conditional, -1.0, 1.0, epsabs=1e-12, points=[-1.0, 1.0])
    return value / 2


def test_monte_carlo_failure_fraction_matches_the_integral():
    tol, theta, samples = 0.05, 2.45, 2000
    p = _failure_probability(tol, theta)
    assert 0.05 < p < 0.5  # a test that can fail both ways
    finding = _run(tol, f"voltage(mid) >= {theta} V", Analysis("monte-carlo", samples, 11))
    standard_error = math.sqrt(p * (1 - p) / samples)
    assert abs(finding.fail_fraction - p) < 4 * standard_error


def test_the_integral_itself_against_a_fine_grid():
    # The same probability by counting a 2001 x 2001 grid of (u1, u2): an independent check of the integrand.
    tol, theta = 0.05, 2.45
    u = np.linspace(-1, 1, 2001)
    u1, u2 = np.meshgrid(u, u)
    vout = VIN * (1 + tol * u2) / ((1 + tol * u1) + (1 + tol * u2))
    assert np.mean(vout < theta) == pytest.approx(_failure_probability(tol, theta), abs=2e-3)
