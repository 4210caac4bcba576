"""Worst-case corners against brute force over every corner, and sensitivities against calculus.

Independent references: the brute force solves each corner's nodal equations with
numpy.linalg.solve in the test (Kirchhoff's current law at every node), not with
nodegate's solver; derivatives of a divider are taken by hand.
"""

from __future__ import annotations

import itertools

import numpy as np
import pytest
from analysis_circuits import divider_text, run

from checker.analysis import worstcase
from checker.analysis.boxpoints import BoxPoints
from checker.analysis.sensitivity import Target, side_swings
from checker.analysis.run import targets_of
from checker.analysis.tolerances import toleranced
from checker.errors import DesignError
from checker.findings import Analysis
from checker.language import parse_design
from checker.limits import compile_limits, load_limit_text
from checker.solver import Cache, solve

WORST = Analysis("worst-case")


def random_network(seed: int, n_res: int = 6):
    """A connected resistor network on 4 nodes (0 = ground, 1 = driven by a 5 V source), random values."""
    rng = np.random.default_rng(seed)
    pairs = [(1, 2), (2, 3), (3, 0)]  # a chain makes it connected
    pairs += [tuple(rng.choice(4, 2, replace=False)) for _ in range(n_res - len(pairs))]
    values = rng.uniform(1e3, 1e5, n_res)
    tols = rng.choice([0.01, 0.02, 0.05, 0.1], n_res)
    return pairs, values, tols


def nodal_voltages(pairs, values, vin=5.0) -> np.ndarray:
    """Voltages of nodes 0..3 with node 1 held at `vin`: KCL at nodes 2 and 3, solved by numpy."""
    g = np.zeros((4, 4))
    for (a, b), r in zip(pairs, values):
        g[a, a] += 1 / r
        g[b, b] += 1 / r
        g[a, b] -= 1 / r
        g[b, a] -= 1 / r
    free = [2, 3]
    v = np.zeros(4)
    v[1] = vin
    v[free] = np.linalg.solve(g[np.ix_(free, free)], -g[np.ix_(free, [1])] @ [vin])
    return v


def network_text(pairs, values, tols) -> str:
    names = {0: "gnd", 1: "vin", 2: "n2", 3: "n3"}
    lines = ['circuit net "random"', "ground gnd", "source V1 from vin to gnd : 5 V"]
    lines += [f"resistor R{i} from {names[a]} to {names[b]} : {float(r)!r} ohm, tol = {float(t) * 100:g}%"
              for i, ((a, b), r, t) in enumerate(zip(pairs, values, tols))]
    return "\n".join(lines) + "\n"


@pytest.mark.parametrize("seed", range(8))
def test_worst_case_equals_brute_force_over_all_corners(seed):
    pairs, values, tols = random_network(seed)
    nominal = nodal_voltages(pairs, values)
    corners = np.array([nodal_voltages(pairs, values * (1 + np.array(signs) * tols))
                        for signs in itertools.product((-1, 1), repeat=len(values))])
    high, low = float(nominal[3]) * 1.01, float(nominal[2]) * 0.99  # near nominal, so corners matter
    findings = run(network_text(pairs, values, tols),
                   (f"voltage(n3) <= {high!r} V", f"voltage(n2) >= {low!r} V"), WORST)
    upper, lower = findings.findings
    assert upper.worst.margin == pytest.approx(high - corners[:, 3].max(), rel=1e-9, abs=1e-12)
    assert lower.worst.margin == pytest.approx(corners[:, 2].min() - low, rel=1e-9, abs=1e-12)


def test_divider_worst_case_matches_the_closed_form_and_names_the_corner():
    # Vout = Vin R2 / (R1 + R2); dVout/dR1 = -Vin R2/(R1+R2)^2 < 0 and dVout/dR2 = Vin R1/(R1+R2)^2 > 0,
    # so Vout is monotone in each resistor and its lowest value is at R1 (1 + t), R2 (1 - t), Vin (1 - tv),
    # its highest at the mirror corner. Nominal (1.599 V) is nearer the low end of 1.5 .. 1.7 V, yet the
    # high corner comes closer to its end: the mirror corner decides.
    vin, r1, r2, t, tv = 5.0, 10e3, 4.7e3, 0.01, 0.02
    low = vin * (1 - tv) * r2 * (1 - t) / (r1 * (1 + t) + r2 * (1 - t))
    high = vin * (1 + tv) * r2 * (1 + t) / (r1 * (1 - t) + r2 * (1 + t))
    nominal, lo, hi = vin * r2 / (r1 + r2), 1.5, 1.6975
    assert nominal - lo < hi - nominal and hi - high < low - lo  # the premise of this test
    findings = run(divider_text(vin, r1, r2, t, tv), (f"voltage(mid) in {lo} V .. {hi} V",), WORST)
    worst = findings.findings[0].worst
    assert worst.margin == pytest.approx(hi - high, rel=1e-12)
    assert sorted(worst.corner.split(", ")) == ["R1 \u22121 %", "R2 +1 %", "VIN +2 %"]


def test_drivers_are_the_full_band_swing_of_each_part_largest_first():
    # Full-band change of Vout over R1 in [R1 (1 - t), R1 (1 + t)], everything else nominal: closed form.
    vin, r1, r2, t = 5.0, 10e3, 10e3, 0.05
    vout = lambda a, b: vin * b / (a + b)  # noqa: E731
    findings = run(divider_text(vin, r1, r2, t, 0.01), ("voltage(mid) <= 3 V",), WORST)
    drivers = dict(findings.findings[0].drivers)
    assert set(list(drivers)[:2]) == {"R1", "R2"} and list(drivers)[2] == "VIN"  # 5 % parts before 1 %
    assert drivers["R1"] == pytest.approx(vout(r1 * (1 - t), r2) - vout(r1 * (1 + t), r2), rel=1e-12)
    assert drivers["R2"] == pytest.approx(vout(r1, r2 * (1 + t)) - vout(r1, r2 * (1 - t)), rel=1e-12)
    assert drivers["VIN"] == pytest.approx(0.02 * vin * 0.5, rel=1e-12)


def test_swing_matches_the_analytic_derivative_of_a_divider():
    # Central difference over ±t: (up - down) / (2 t R1) -> dVout/dR1 = -Vin R2 / (R1 + R2)^2, error O(t^2).
    vin, r1, r2, t = 5.0, 10e3, 4.7e3, 0.001
    design = parse_design(divider_text(vin, r1, r2, t), "d.circuit")
    limit_set = compile_limits([load_limit_text(
        "limits:\n  - id: lim\n    about: a\n    check: voltage(mid) >= 0 V\n", "l.yaml")], [design])
    targets = targets_of(limit_set, design.name)
    netlist = design.netlists[0]
    box = BoxPoints(netlist, toleranced(netlist), solve(netlist), Cache())
    swing = side_swings(box, targets)[targets[0].key]
    slope = (swing.up[0] - swing.down[0]) / (2 * t * np.array([r1, r2]))
    assert slope[0] == pytest.approx(-vin * r2 / (r1 + r2) ** 2, rel=1e-5)
    assert slope[1] == pytest.approx(vin * r1 / (r1 + r2) ** 2, rel=1e-5)
    assert isinstance(targets[0], Target)


def test_nominal_is_kept_when_no_corner_is_worse():
    # |Vout - 2.5 V| is least at nominal (R1 = R2, Vin = 5 V): the margin is not monotone in the parts,
    # every corner is better than nominal, so the nominal margin (-1 mV) is reported.
    findings = run(divider_text(), ("abs(voltage(mid) - 2.5 V) >= 1 mV",), WORST)
    worst = findings.findings[0].worst
    assert worst.corner == "nominal"
    assert worst.margin == pytest.approx(-1e-3, abs=1e-12)


def test_too_many_toleranced_parts_is_an_error(monkeypatch):
    monkeypatch.setattr(worstcase, "MAX_TOLERANCED_PARTS", 2)
    with pytest.raises(DesignError) as caught:
        run(divider_text(tol_v=0.01), ("voltage(mid) <= 3 V",), Analysis("worst-case", vertex_values=2))
    assert "at most 2" in caught.value.message


def test_without_tolerances_worst_case_is_nominal():
    findings = run(divider_text(tol_r=0.0), ("voltage(mid) <= 3 V",), WORST)
    finding = findings.findings[0]
    assert finding.worst.margin == pytest.approx(0.5, rel=1e-12)
    # A box of one point: nominal is the worst, and solving that one vertex proves it.
    assert finding.worst.corner == "nominal" and finding.drivers == ()
    assert finding.worst.method == "vertices" and finding.worst.proved
    assert findings.analysis == WORST
