"""Monte Carlo in batches gives the findings of solving every sample alone with the ordinary solver,
checks every batched sample as the ordinary solver checks its own, never passes an unstable point,
and runs unchanged on a Dask cluster.

The reference is the sample-by-sample path: every sample handed to `blocks.solve_each` (the
ordinary solver with its warm start, fallback, self-check and `stable_near`), its outcomes read
by the compiled checks one at a time, exactly as before batching.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from analysis_circuits import TODAY, divider_text, run

import checker.analysis.blocks
import checker.analysis.boxpoints
import checker.analysis.samples
from checker.analysis import analyse
from checker.analysis.batch import Tiled, stable_screen, start_of
from checker.analysis.linearbox import LinearBox
from checker.analysis.tolerances import perturbed, toleranced
from checker.findings import Analysis, Findings
from checker.limits import compile_limits
from checker.pipeline import load_designs, load_limit_files
from checker.repo.config import load_config
from checker.solver import Cache, solve_states
from checker.solver.assembly import assemble
from checker.solver.newton import Equations
from checker.solver.states import assess_at, search

EXAMPLE = Path(__file__).resolve().parents[3] / "examples" / "weather_station" / "nodegate.yaml"
SAME = 1e-9
CIRCUIT_TWO_CASES = divider_text(5.0, 10e3, 4.7e3, 0.05, 0.02, "case low : VIN = 4.5 V\ncase high : VIN = 5.5 V\n")


def example(analysis: Analysis) -> Findings:
    config = load_config(EXAMPLE)
    designs = load_designs(config)
    return analyse(compile_limits(load_limit_files(config), designs), designs, TODAY, analysis)


def one_by_one(monkeypatch) -> None:
    """Every sample left to the ordinary solver, as Monte Carlo ran before batching."""
    monkeypatch.setattr(checker.analysis.samples, "_batch",
                        lambda work, deviations: (None, np.zeros(len(deviations), bool)))


def assert_same(batched: Findings, alone: Findings) -> None:
    assert len(batched.findings) == len(alone.findings)
    for b, a in zip(batched.findings, alone.findings):
        assert (b.limit.id, b.item, b.status, b.fail_fraction) == (a.limit.id, a.item, a.status, a.fail_fraction)
        assert [(o.case, o.state, o.corner, o.holds, o.error) for o in b.outcomes] == \
            [(o.case, o.state, o.corner, o.holds, o.error) for o in a.outcomes]
        for ob, oa in zip(b.outcomes, a.outcomes):
            scale = max(abs(oa.value), abs(oa.bound), abs(oa.margin), 1e-300)
            assert ob.margin == pytest.approx(oa.margin, rel=SAME, abs=SAME * scale), (b.limit.id, b.item, oa.case)
            assert ob.value == pytest.approx(oa.value, rel=SAME, abs=SAME * scale)


def test_example_board_batched_equals_one_sample_at_a_time(monkeypatch):
    batched = example(Analysis("monte-carlo", 40, 3))
    one_by_one(monkeypatch)
    alone = example(Analysis("monte-carlo", 40, 3))
    assert len(batched.findings) > 20
    assert_same(batched, alone)


def test_linear_circuit_batched_equals_one_sample_at_a_time(monkeypatch):
    checks = ("voltage(mid) >= 1.3 V", "voltage(mid) <= 1.7 V", "power(R1) < 2 mW")
    batched = run(CIRCUIT_TWO_CASES, checks, Analysis("monte-carlo", 200, 5))
    one_by_one(monkeypatch)
    alone = run(CIRCUIT_TWO_CASES, checks, Analysis("monte-carlo", 200, 5))
    assert any(0 < f.fail_fraction < 1 for f in batched.findings)
    assert_same(batched, alone)


def _example_points(name: str):
    config = load_config(EXAMPLE)
    design = next(d for d in load_designs(config) if d.name == name)
    return [p for states in solve_states(design.netlists) for p in states.points]


def test_a_corrupted_sample_fails_the_batched_self_check():
    point = _example_points("weather_main")[0]
    tolerances = toleranced(point.netlist)
    tiled = Tiled.of(point.netlist, tolerances, Cache(), 3)
    deviations = np.zeros((3, len(tolerances)))
    solved = tiled.solve(deviations, start_of(tiled, point))
    assert solved.ok.all()
    x = solved.x.copy()
    x[1, 0] += 1e-3  # one net of sample 1 moved by 1 mV: its KCL no longer balances
    matrix, rhs = tiled._constant()
    currents = [device.pin_currents(np.append(x.ravel(), 0.0)) for device in tiled.devices]
    assert tiled.self_check(x, matrix, rhs, np.abs(matrix), currents).tolist() == [True, False, True]


def test_linear_box_checks_every_sample_against_its_own_equations():
    from checker.language import parse_design
    netlist = parse_design(CIRCUIT_TWO_CASES, "station.circuit").netlists[0]
    tolerances = toleranced(netlist)
    box = LinearBox.of(netlist, tolerances, Cache())
    deviations = np.random.default_rng(1).uniform(-1, 1, (5, len(tolerances))) * [t.fraction for t in tolerances]
    x = box.solve(deviations)
    assert box.balanced(deviations, x).all()
    x[3, 1] *= 1.0 + 1e-3  # the divider tap of sample 3 off by 0.1 %
    assert box.balanced(deviations, x).tolist() == [True, True, True, False, True]


def test_the_stability_screen_passes_only_stable_points():
    points = _example_points("rain_wake")
    drizzle = [p for p in points if p.state]
    assert len(drizzle) == 2
    point = drizzle[0]
    tolerances = toleranced(point.netlist)
    count = 30
    tiled = Tiled.of(point.netlist, tolerances, Cache(), count)
    fractions = np.array([t.fraction for t in tolerances])
    deviations = np.random.default_rng(2).uniform(-1, 1, (count, len(tolerances))) * fractions
    solved = tiled.solve(deviations, start_of(tiled, point))
    assert solved.ok.any()
    for block in np.flatnonzero(solved.ok):  # every sample the batch vouches for, judged by the solver itself
        moved = perturbed(point.netlist, {t.part: float(d) for t, d in zip(tolerances, deviations[block])})
        assert assess_at(Equations(assemble(moved)), solved.x[block]).stable
    # The balance point between the two drizzle states is unstable: the screen must not pass it.
    system = assemble(point.netlist)
    found = search(system, start_of(Tiled.of(point.netlist, tolerances, Cache(), 1), point))
    unstable = [p.x for p in found.points if not p.stability.stable]
    assert unstable
    one = Tiled.of(point.netlist, tolerances, Cache(), len(unstable))
    one.move(np.zeros((len(unstable), len(tolerances))))
    matrix, rhs = one._constant()
    _, jacobian, _ = one.linearise(np.array(unstable), matrix, rhs, np.abs(matrix))
    assert not stable_screen(system, jacobian).any()


def test_a_sample_without_an_operating_point_fails_with_the_solvers_message(monkeypatch):
    messages = {}

    calls = []

    def solve_each(netlists, cache, guesses):  # the first board of each case has no operating point
        calls.append(len(netlists))
        first = len(calls) == 1 or sum(calls[:-1]) % 20 == 0
        return ["no operating point here (test)" if first and k == 0 else
                checker.analysis.blocks.solve_each([n], cache, [g])[0] for k, (n, g) in enumerate(zip(netlists, guesses))]
    one_by_one(monkeypatch)
    monkeypatch.setattr(checker.analysis.samples, "solve_each", solve_each)
    findings = run(CIRCUIT_TWO_CASES, ("voltage(mid) >= 1.3 V",), Analysis("monte-carlo", 20, 1))
    finding = findings.findings[0]
    assert finding.fail_fraction == 1 / 20  # sample 1 only, in both cases
    for outcome in finding.outcomes:
        assert outcome.corner == "sample 1" and outcome.margin == -np.inf and not outcome.holds
        messages[outcome.case] = outcome.error
    assert set(messages.values()) == {"no operating point here (test)"}


def test_runs_on_a_dask_cluster_with_the_local_results():
    distributed = pytest.importorskip("distributed")
    cloudpickle = pytest.importorskip("cloudpickle")
    local = example(Analysis("monte-carlo", 30, 2))
    # What a worker in another process receives: a task's work, pickled, evaluates to the same tally.
    point = _example_points("weather_main")[0]
    config = load_config(EXAMPLE)
    designs = load_designs(config)
    from checker.analysis.run import targets_of
    from checker.analysis.samples import Work, evaluate
    targets = targets_of(compile_limits(load_limit_files(config), designs), "weather_main")
    work = Work(point, targets, np.random.default_rng(1).uniform(-1, 1, (8, len(toleranced(point.netlist)))))
    here, there = evaluate(work, 0, 8), evaluate(cloudpickle.loads(cloudpickle.dumps(work)), 0, 8)
    assert here.worst == there.worst and all((here.fails[k] == there.fails[k]).all() for k in here.fails)
    with distributed.LocalCluster(n_workers=1, threads_per_worker=1, processes=False,
                                  dashboard_address=None) as cluster:
        remote = example(Analysis("monte-carlo", 30, 2, scheduler=cluster.scheduler_address))
    assert [(f.limit.id, f.item, f.status, f.fail_fraction, f.outcomes) for f in remote.findings] == \
        [(f.limit.id, f.item, f.status, f.fail_fraction, f.outcomes) for f in local.findings]


def test_runs_of_samples_merge_to_the_result_of_one_run(monkeypatch):
    checks = ("voltage(mid) >= 1.3 V", "voltage(mid) <= 1.7 V")
    whole = run(CIRCUIT_TWO_CASES, checks, Analysis("monte-carlo", 60, 4))
    import checker.analysis.montecarlo
    monkeypatch.setattr(checker.analysis.montecarlo, "RUN", 7)  # runs of 12 samples (whole tenths)
    pieces = run(CIRCUIT_TWO_CASES, checks, Analysis("monte-carlo", 60, 4))
    assert any(0 < f.fail_fraction < 1 for f in whole.findings)
    assert [(f.fail_fraction, f.outcomes) for f in pieces.findings] == [(f.fail_fraction, f.outcomes) for f in whole.findings]


def test_worst_case_batched_equals_joint_circuits(monkeypatch):
    batched = example(Analysis("worst-case"))
    monkeypatch.setattr(checker.analysis.boxpoints.Tiled, "of", classmethod(lambda cls, *args: None))
    joint = example(Analysis("worst-case"))  # every point of the box solved as before: blocks of one joint circuit
    assert len(batched.findings) > 20
    assert_same(batched, joint)


def test_nonlinear_runs_reuse_their_batch_with_the_new_values(monkeypatch):
    whole = example(Analysis("monte-carlo", 24, 6))
    import checker.analysis.montecarlo
    monkeypatch.setattr(checker.analysis.montecarlo, "RUN", 5)  # three runs of 8 samples on one tiled system
    left = []
    alone = checker.analysis.samples._alone
    monkeypatch.setattr(checker.analysis.samples, "_alone", lambda work, netlists: left.extend(netlists) or
                        alone(work, netlists))
    pieces = example(Analysis("monte-carlo", 24, 6))
    assert_same(pieces, whole)
    assert not left  # every sample of every run passed the batch's own checks: no stale device state
