"""Gain stepping: continuation on the op-amps' open-loop gain (docs/models.md, "Strategies").

The cap must act exactly like a declared gain, leave no trace on later solves, be
tried only for circuits with amplifiers (and be named then), and settle random
comparators with hysteresis in the state their resistor network predicts.
"""

from __future__ import annotations

import numpy as np
import pytest

from checker.design import Netlist, Part
from checker.errors import Location, NoSolutionError
from checker.solver import solve, solve_cases
from checker.solver.assembly import assemble
from checker.solver.newton import STRATEGIES, Equations, gain_stepping


def two(name, kind, a, b, value=None, unit=None, **props):
    return Part(name, kind, (("from", a), ("to", b)), value, unit, props=props)


def opamp(name, plus, minus, out, hi, lo, **props):
    return Part(name, "opamp", (("plus", plus), ("minus", minus), ("out", out), ("rail_hi", hi), ("rail_lo", lo)),
                props=props)


def net(*parts, case="default"):
    return Netlist("board", case, 298.15, "gnd", tuple(parts), case_location=Location("board.circuit", 30, 6))


def schmitt(vin, gain=1e5, r1=10e3, r2=10e3, rf=100e3, hi=5.0, lo=0.0, swing=0.1):
    """The frost-alarm comparator with hysteresis: threshold divider and feedback on plus, input on minus."""
    parts = [two("VH", "source", "vh", "gnd", hi, "V"), two("VIN", "source", "vin", "gnd", vin, "V"),
             two("R1", "resistor", "vh", "ref", r1, "ohm"), two("R2", "resistor", "ref", "gnd", r2, "ohm"),
             two("RF", "resistor", "out", "ref", rf, "ohm")]
    rail_lo = "gnd"
    if lo:
        parts.append(two("VL", "source", "vl", "gnd", lo, "V"))
        rail_lo = "vl"
    parts.append(opamp("U1", "ref", "vin", "out", "vh", rail_lo, gain=gain, swing=swing))
    return net(*parts)


def test_a_capped_gain_is_exactly_a_declared_gain():
    # Same residual and Jacobian, at random points, for gain 1e5 capped at 7 as for gain 7 declared.
    capped, declared = Equations(assemble(schmitt(1.0))), Equations(assemble(schmitt(1.0, gain=7.0)))
    rng = np.random.default_rng(3)
    for _ in range(5):
        x = rng.uniform(-2.0, 6.0, capped.size)
        f_cap, j_cap, _ = capped.linearise(x, gain_cap=7.0)
        f_dec, j_dec, _ = declared.linearise(x)
        assert f_cap == pytest.approx(f_dec, rel=1e-14, abs=1e-15)
        assert j_cap.toarray() == pytest.approx(j_dec.toarray(), rel=1e-14, abs=1e-15)
        # and the cap is lifted by the next call that gives none
        assert capped.linearise(x)[0] == pytest.approx(Equations(assemble(schmitt(1.0))).linearise(x)[0], rel=1e-14)


def test_a_gain_already_below_the_start_cap_is_solved_as_declared():
    # An attenuating "op-amp" of gain 0.05 between ±5 V: Vout = Vmid + A (V+ - V-) = 0.05 * 2 V.
    equations = Equations(assemble(net(two("VP", "source", "vp", "gnd", 5.0, "V"),
                                       two("VN", "source", "vn", "gnd", -5.0, "V"),
                                       two("VS", "source", "s", "gnd", 2.0, "V"),
                                       opamp("U1", "s", "gnd", "out", "vp", "vn", gain=0.05),
                                       two("RL", "resistor", "out", "gnd", 1e3, "ohm"))))
    run = gain_stepping(equations)
    assert run.converged
    out = equations.system.nets.index("out") - 1
    assert run.x[out] == pytest.approx(0.1, rel=1e-9)


def test_the_frost_alarm_records_gain_stepping():
    op = solve(schmitt(1.0))
    assert op.strategy == "gain stepping"
    assert op.nets["out"] == pytest.approx(4.9, rel=1e-9)


def test_warm_start_from_a_comparator_state_stays_on_it_with_plain_newton():
    # A tolerance perturbation (R1 1 % high) started at the nominal point: the output stays pinned,
    # so plain Newton settles at once; ref follows KCL with out at 4.9 V.
    nominal = solve(schmitt(1.0))
    warm, = solve_cases([schmitt(1.0, r1=10.1e3)], guesses=[nominal])
    assert warm.strategy == "newton" and warm.iterations < 10
    ref = (5.0 / 10.1e3 + 4.9 / 100e3) / (1 / 10.1e3 + 1 / 10e3 + 1 / 100e3)
    assert warm.nets["ref"] == pytest.approx(ref, rel=1e-9)


def test_no_convergence_with_an_amplifier_names_gain_stepping():
    # 5 V behind 10 Ω delivers at most E^2/(4R) = 0.625 W, so a 1 W load has no operating point;
    # a buffer elsewhere on the board makes gain stepping one of the strategies tried.
    with pytest.raises(NoSolutionError) as caught:
        solve(net(two("V1", "source", "in", "gnd", 5.0, "V"), two("R1", "resistor", "in", "x", 10.0, "ohm"),
                  two("L1", "load", "x", "gnd", 1.0, "W"),
                  opamp("U1", "in", "buf", "buf", "in", "gnd"), two("RL", "resistor", "buf", "gnd", 1e3, "ohm"),
                  case="brownout"))
    message = caught.value.message
    assert all(words in message for words in STRATEGIES.values())
    assert message.index(STRATEGIES["gain stepping"]) < message.index(STRATEGIES["shunt stepping"])


@pytest.mark.parametrize("seed", range(30))
def test_random_comparators_with_hysteresis_settle_in_the_predicted_state(seed):
    # Random divider, feedback, rails, swing and gain; the input lies outside the hysteresis band,
    # where the state is unique. With out held at a limit, KCL gives ref = (Vh/R1 + Vo/RF)/(1/R1 +
    # 1/R2 + 1/RF) (R2 to ground); the high state holds while vin < ref_hi - (VOH - Vmid)/A, the low
    # one while vin > ref_lo + (Vmid - VOL)/A (derived as in test_reference_nonlinear_comparators.py).
    rng = np.random.default_rng(seed)
    r1, r2, rf = (float(v) for v in 10 ** rng.uniform(3, 5, 3))
    rf *= 10.0  # feedback weaker than the divider
    hi, lo = float(rng.uniform(3.0, 15.0)), float(rng.choice([0.0, -5.0]))
    swing, gain = float(rng.uniform(0.0, 0.5)), float(10 ** rng.uniform(4, 6))
    voh, vol, vmid = hi - swing, lo + swing, 0.5 * (hi + lo)

    def ref(out):
        return (hi / r1 + out / rf) / (1 / r1 + 1 / r2 + 1 / rf)
    lower, upper = ref(vol) + (vmid - vol) / gain, ref(voh) - (voh - vmid) / gain
    high = rng.random() < 0.5
    vin = lower - float(rng.uniform(0.01, 1.0)) if high else upper + float(rng.uniform(0.01, 1.0))
    op = solve(schmitt(vin, gain, r1, r2, rf, hi, lo, swing))
    expected = voh if high else vol
    assert op.nets["out"] == pytest.approx(expected, rel=1e-9, abs=1e-12)
    assert op.nets["ref"] == pytest.approx(ref(expected), rel=1e-9)
