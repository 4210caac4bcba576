"""The self-check every operating point carries: it passes on real solutions, and it fires,
naming the net or the part, on a solution corrupted through the test seam
`checker.solver.selfcheck.solution_seen`. Condition estimates are compared with numpy's
exact 1-norm condition number of the equilibrated matrix, built here by hand."""

from __future__ import annotations

from pathlib import Path

import math

import numpy as np
import pytest

from checker.design import Netlist, Part
from checker.errors import NoSolutionError
from checker.language import load_design
from checker.solver import selfcheck, solve, solve_cases
from checker.solver.assembly import assemble

EXAMPLE = Path(__file__).resolve().parents[3] / "examples" / "weather_station"

T25 = 298.15


def two(name, kind, a, b, value=None, unit=None, **props):
    return Part(name, kind, (("from", a), ("to", b)), value, unit, frozenset(), props)


def bench(*parts):
    return Netlist("bench", "default", T25, "gnd", tuple(parts))


DIVIDER = bench(two("V1", "source", "vin", "gnd", 12.0, "V"), two("R1", "resistor", "vin", "mid", 10e3, "ohm"),
                two("R2", "resistor", "mid", "gnd", 5e3, "ohm"), two("R3", "resistor", "mid", "low", 1e3, "ohm"),
                two("R4", "resistor", "low", "gnd", 2e3, "ohm"))
CLAMP = bench(two("V1", "source", "vin", "gnd", 5.0, "V"), two("RS", "resistor", "vin", "a", 1e3, "ohm"),
              two("D1", "diode", "a", "gnd"))
# A 1 mΩ shunt between two nets held apart from everything else by 10 GΩ leakage paths.
ILL = bench(two("V1", "source", "vin", "gnd", 3.3, "V"), two("R_LEAK", "resistor", "vin", "a", 10e9, "ohm"),
            two("R_SHUNT", "resistor", "a", "b", 1e-3, "ohm"), two("R_LEAK2", "resistor", "b", "gnd", 10e9, "ohm"))


def corrupt(monkeypatch, change):
    monkeypatch.setattr(selfcheck, "solution_seen", lambda system, x: change(x.copy()))


@pytest.mark.parametrize("netlist", [DIVIDER, CLAMP], ids=["divider", "diode clamp"])
def test_a_real_solution_passes_and_carries_its_figures(netlist):
    point = solve(netlist)
    found = point.self_check
    largest = max(abs(r.current) for r in point.parts.values())
    assert found.kcl <= 1e-12 * largest and found.power <= 1e-12 * largest * 12.0
    assert found.digits_lost is not None and 0.0 <= found.digits_lost < 4.0
    assert not found.ill_conditioned


def test_a_perturbed_net_voltage_is_an_error_naming_the_net(monkeypatch):
    def change(x):
        x[1] *= 1.001  # `mid`, the second unknown
        return x
    corrupt(monkeypatch, change)
    with pytest.raises(NoSolutionError) as caught:
        solve(DIVIDER)
    assert "fails its own check" in caught.value.message
    assert "net `mid`" in caught.value.message  # the first net out of balance, in unknown order
    assert any("R1, R2, R3" in note for note in caught.value.notes)


def test_a_perturbed_branch_current_is_an_error_at_the_sources_net(monkeypatch):
    def change(x):
        x[-1] *= 1.01
        return x
    corrupt(monkeypatch, change)
    with pytest.raises(NoSolutionError, match="net `vin`"):
        solve(DIVIDER)


def test_a_solution_scaled_as_a_whole_balances_every_net_but_fails_the_source_equation(monkeypatch):
    corrupt(monkeypatch, lambda x: x * 1.01)
    with pytest.raises(NoSolutionError, match="the equation of the source V1"):
        solve(DIVIDER)


def test_a_nonlinear_solution_corrupted_is_caught(monkeypatch):
    def change(x):
        x[1] += 1e-3  # the diode's anode, 1 mV off: its current is off by about 4 %
        return x
    corrupt(monkeypatch, change)
    with pytest.raises(NoSolutionError, match="net `a`"):
        solve(CLAMP)


def test_every_case_of_the_example_passes_and_is_well_conditioned():
    design = load_design(EXAMPLE / "boards" / "mainboard" / "mainboard.circuit", root=EXAMPLE)
    for point in solve_cases(design.netlists):
        assert point.self_check is not None and not point.self_check.ill_conditioned
        assert selfcheck.conditioning_warning(point) is None


def _equilibrated_condition(matrix: np.ndarray) -> float:
    """κ₁ of R A C: rows scaled to a largest magnitude of 1, then columns; numpy's exact cond."""
    rows = matrix / np.abs(matrix).max(axis=1, keepdims=True)
    scaled = rows / np.abs(rows).max(axis=0, keepdims=True)
    return float(np.linalg.cond(scaled, 1))


def test_digits_lost_match_numpy_on_an_ill_conditioned_circuit():
    point = solve(ILL)
    # The same MNA matrix written by hand: unknowns vin, a, b, i(V1).
    g_leak, g_shunt = 1e-10, 1e3
    by_hand = np.array([[g_leak, -g_leak, 0.0, 1.0],
                        [-g_leak, g_leak + g_shunt, -g_shunt, 0.0],
                        [0.0, -g_shunt, g_shunt + g_leak, 0.0],
                        [1.0, 0.0, 0.0, 0.0]])
    expected = math.log10(_equilibrated_condition(by_hand))
    assert expected > 12.0
    assert point.self_check.digits_lost == pytest.approx(expected, abs=0.05)
    assert point.self_check.ill_conditioned
    warning = selfcheck.conditioning_warning(point)
    assert "R_SHUNT" in warning and "R_LEAK" in warning and "13 decades" in warning


def test_the_estimate_through_the_lu_factors_agrees_with_numpy_on_a_larger_ladder(monkeypatch):
    monkeypatch.setattr(selfcheck, "DENSE_LIMIT", 0)  # force scipy's onenormest
    rungs = 80
    parts = [two("V1", "source", "n0", "gnd", 5.0, "V")]
    for k in range(rungs):
        parts.append(two(f"RS{k}", "resistor", f"n{k}", f"n{k + 1}", 10.0 ** (k % 7), "ohm"))
        parts.append(two(f"RP{k}", "resistor", f"n{k + 1}", "gnd", 10.0 ** (6 - k % 5), "ohm"))
    netlist = bench(*parts)
    point = solve(netlist)
    expected = math.log10(_equilibrated_condition(assemble(netlist).matrix.toarray()))
    # onenormest is exact or an underestimate within a small factor (Higham & Tisseur, SIAM J.
    # Matrix Anal. Appl. 21(4), 2000 — from memory): within a factor of 3 here.
    assert expected - math.log10(3.0) <= point.self_check.digits_lost <= expected + 1e-9


def test_json_shape_of_the_self_check():
    found = solve(DIVIDER).self_check.as_json()
    assert set(found) == {"kcl", "power", "digits_lost"}
