"""Worst cases a review found flattering, kept as regressions, each against a closed form or a brute
force over every vertex with nodegate's solver alone (no analysis code)."""

from __future__ import annotations

import itertools

import pytest
from analysis_circuits import run

from checker.analysis.tolerances import perturbed
from checker.findings import Analysis
from checker.language import parse_design
from checker.limits import compile_limits, load_limit_text
from checker.limits.compiler import CaseValues
from checker.solver import solve

# A greenhouse sensor bench of our own: sources and resistors in a loop, eight toleranced values.
BENCH = """circuit bench "Greenhouse sensor bench"
ground gnd
resistor R1 from n1 to gnd : 10000 ohm, tol = 5%
resistor R2 from n2 to n1 : 3300 ohm
resistor R3 from n3 to n1 : 100 ohm, tol = 8%
resistor R4 from n4 to n3 : 4700 ohm, tol = 4%
source VS1 from n1 to n3 : 12 V, tol = 3%
source VS2 from n2 to n4 : 24 V
source IS1 from gnd to n1 : 0.002 A, tol = 7%
source IS2 from n3 to gnd : 0.002 A, tol = 7%
"""
BENCH_CHECK = "min(power(R2) + power(R3), power(R1) + power(R4)) <= 9.8782835892 mW"


def brute_force_vertices(circuit: str, check: str) -> float:
    """The lowest margin over every vertex, each solved by nodegate's solver and judged by the check."""
    design = parse_design(circuit, "b.circuit")
    item = compile_limits([load_limit_text(f"limits:\n  - id: x\n    about: x\n    check: {check}\n", "l.yaml")],
                          [design]).limits[0].items[0]
    netlist = design.netlists[0]
    tols = {p.name: p.props["tol"] for p in netlist.parts if p.props.get("tol")}
    margins = []
    for signs in itertools.product((-1.0, 1.0), repeat=len(tols)):
        point = solve(perturbed(netlist, {name: s * t for (name, t), s in zip(tols.items(), signs)}))
        margins.append(item.check(CaseValues(point)).margin)
    return min(margins)


@pytest.mark.parametrize("vertex_values", [16, 2, 0])
def test_corner_search_reaches_the_lowest_vertex(vertex_values):
    # The corner search once flipped values that already sat at their lower end (a reversed sign).
    # The powers are monotone enough here that the lowest vertex is the worst point.
    expected = brute_force_vertices(BENCH, BENCH_CHECK)
    worst = run(BENCH, (BENCH_CHECK,), Analysis("worst-case", vertex_values=vertex_values)).findings[0].worst
    assert worst.margin <= expected + 1e-9 * 1e-2


def test_regulator_at_its_dropout_edge_with_many_values_fails():
    # vin - out is largest with VIN at +10 % (3.96 V) and vout at -3 % (3.201 V), the regulator still
    # regulating (3.96 V - 3.201 V = 0.759 V > 0.3 V dropout): margin 0.7 V - 0.759 V = -0.059 V.
    # 30 toleranced values exceed the vertex bound, so the corner search decides.
    circuit = ('circuit edge "Regulator at its dropout edge"\nground gnd\n'
               "source VIN from vin to gnd : 3.6 V, tol = 10%\n"
               "regulator U1 (in: vin, out: out, gnd: gnd) : vout = 3.3 V, tol = 3%, dropout = 300 mV\n"
               "resistor RL from out to gnd : 47 ohm, tol = 5%\n"
               + "".join(f"resistor RX{i} from vin to gnd : 10 kohm, tol = 1%\n" for i in range(27)))
    worst = run(circuit, ("voltage(vin) - voltage(out) in 0.2 V .. 0.7 V",), Analysis("worst-case")).findings[0].worst
    assert worst.method == "corner-search" and not worst.proved
    assert worst.margin == pytest.approx(0.7 - (3.96 - 3.201), abs=1e-6)


def test_a_check_mixing_units_is_ranked_by_its_relative_margin_and_never_proved():
    # and across ohms and volts decides by relative margin (the margin rules): R1.value >= 94.9 Mohm
    # has relative margin (95 - 94.9) / 94.9 = 1.05e-3 at R1 -5 %, far below the voltage's.
    circuit = ('circuit hv "High-voltage probe divider"\nground gnd\n'
               "source VS from top to gnd : 1 kV\nresistor R1 from top to tap : 100 Mohm, tol = 5%\n"
               "resistor R2 from tap to gnd : 1 Mohm\n")
    worst = run(circuit, ("R1.value >= 94.9 Mohm and voltage(tap) <= 20 V",), Analysis("worst-case")).findings[0].worst
    assert worst.margin == pytest.approx(95e6 - 94.9e6, rel=1e-9)
    assert worst.relative == pytest.approx(0.1e6 / 94.9e6, rel=1e-9)
    assert not worst.proved
