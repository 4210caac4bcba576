"""Tolerance analyses start Newton-Raphson at each case's nominal point: the findings are those of
cold starts (to 1e-9 relative), with fewer Newton iterations (counted, never timed).

The reference is the same analysis with the warm start switched off: every perturbed board
solved from the solver's ordinary first guess, a solver checked against published closed forms
and scipy root finders in tests/reference/.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from analysis_circuits import TODAY

import checker.analysis.blocks
import checker.analysis.samples
from checker.analysis import analyse
from checker.analysis.sensitivity import SideSwing
from checker.findings import Analysis, Findings
from checker.limits import compile_limits
from checker.pipeline import load_designs, load_limit_files
from checker.repo.config import load_config
from checker.solver import solve_cases

EXAMPLE = Path(__file__).resolve().parents[3] / "examples" / "weather_station" / "nodegate.yaml"
SAME = 1e-9
USERS = (checker.analysis.blocks,)  # where tolerance analyses call the solver


def example_run(analysis: Analysis) -> Findings:
    config = load_config(EXAMPLE)
    designs = load_designs(config)
    return analyse(compile_limits(load_limit_files(config), designs), designs, TODAY, analysis)


def counted(monkeypatch, warm: bool) -> list[int]:
    """Route the analysis modules' solves through a wrapper that counts Newton iterations and,
    unless `warm`, drops the guesses."""
    spent: list[int] = []

    def solve(netlists, cache=None, guesses=None, fallback=True):
        points = solve_cases(netlists, cache, guesses if warm else None, fallback)
        spent.extend(p.iterations for p in points if p.strategy != "linear")
        return points
    for module in USERS:
        monkeypatch.setattr(module, "solve_cases", solve)
    if not warm:  # Monte Carlo's batched samples (test_analysis_batched.py) go to the ordinary solver, cold
        monkeypatch.setattr(checker.analysis.samples, "_batch", lambda work, d: (None, np.zeros(len(d), bool)))
    return spent


def assert_same_findings(warm: Findings, cold: Findings) -> None:
    assert len(warm.findings) == len(cold.findings) > 20
    for w, c in zip(warm.findings, cold.findings):
        assert (w.limit.id, w.item, w.status, w.fail_fraction) == (c.limit.id, c.item, c.status, c.fail_fraction)
        assert [(o.case, o.corner, o.holds) for o in w.outcomes] == [(o.case, o.corner, o.holds) for o in c.outcomes]
        for ow, oc in zip(w.outcomes, c.outcomes):
            scale = max(abs(oc.value), abs(oc.bound), abs(oc.margin))
            assert ow.margin == pytest.approx(oc.margin, rel=SAME, abs=SAME * scale), (w.limit.id, w.item, oc.case)
            assert ow.value == pytest.approx(oc.value, rel=SAME, abs=SAME * scale)
        assert [p for p, _ in w.drivers] == [p for p, _ in c.drivers]
        for (_, dw), (_, dc) in zip(w.drivers, c.drivers):
            assert dw == pytest.approx(dc, rel=1e-6, abs=SAME * max(abs(d) for _, d in c.drivers))


@pytest.mark.parametrize("analysis", [Analysis("monte-carlo", 25, 1), Analysis("worst-case")],
                         ids=["monte-carlo", "worst-case"])
def test_example_board_same_findings_with_fewer_iterations(monkeypatch, analysis):
    cold_spent = counted(monkeypatch, warm=False)
    cold = example_run(analysis)
    warm_spent = counted(monkeypatch, warm=True)
    warm = example_run(analysis)
    assert_same_findings(warm, cold)
    if analysis.mode == "monte-carlo":
        return  # warm, its samples are solved in batches, not by solve_cases: compared above with the cold solver
    # The interior search of worst-case analysis decides on margins equal to the solver's tolerance,
    # so warm and cold runs may take a different number of solves; compare the average solve.
    assert min(len(warm_spent), len(cold_spent)) > 100
    # About 10 iterations per case from the first guess, about 4 from the nominal point.
    assert np.mean(warm_spent) < 0.6 * np.mean(cold_spent)


def test_side_changes_within_solver_noise_count_as_none():
    # Arithmetic: A moves the side by 1e-13 (noise below its 1e-9 floor of a side of size 1), B by 0.5,
    # C by exactly 0.
    swing = SideSwing(("A", "B", "C"), np.array([[1.0, 2.0, 3.0]]), np.array([[1.0 + 1e-13, 2.5, 3.0]]),
                      np.array([1.0]))
    assert swing.change(0).tolist() == [0.0, 0.5, 0.0]
    assert swing.drivers(0) == (("B", 0.5),)
