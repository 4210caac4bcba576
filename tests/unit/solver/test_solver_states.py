"""The pieces of the stable-state search (checker/solver/stability.py, states.py) on their own.

The determinant's sign is checked against numpy.linalg.det on random sparse matrices; the
feedback test against circuits whose answer is known by construction (a divider has one
operating point; a latch's two transistors form a loop; a constant-power load on a net held by a
source cannot meet a load line twice); `stable_near` against the latch's states.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
import scipy.sparse as sp

from checker.language import load_design, parse_design
from checker.solver import solve_states, stable_near
from checker.solver.assembly import assemble
from checker.solver.results import operating_point, warm_start
from checker.solver.stability import determinant_sign
from checker.solver.states import MAX_RUNS, may_have_several, search
from checker.solver.topology import Cache
from test_solver_warm_start import LATCH  # a cross-coupled latch; its first case, `hold`, has two stable states

EXAMPLE = Path(__file__).resolve().parents[3] / "examples" / "weather_station"


def _netlist(text: str):
    return parse_design(text, "t.circuit").netlists[0]


@pytest.mark.parametrize("seed", range(20))
def test_determinant_sign_agrees_with_numpy(seed):
    rng = np.random.default_rng(seed)
    size = int(rng.integers(1, 9))
    dense = rng.normal(size=(size, size)) * (rng.random((size, size)) < 0.6) + np.diag(rng.normal(size=size))
    expected = int(np.sign(np.linalg.det(dense)))
    assert determinant_sign(sp.csc_matrix(dense)) == expected


@pytest.mark.parametrize("text, several", [
    ("circuit d\nground gnd\nsource V1 from a to gnd : 5 V\nresistor R1 from a to b : 1 kohm\n"
     "resistor R2 from b to gnd : 1 kohm\n", False),
    (LATCH, True),
    ("circuit p\nground gnd\nsource V1 from a to gnd : 5 V\nresistor R1 from a to b : 1 ohm\n"
     "load P1 from b to gnd : 1 W\n", True),
    ("circuit p\nground gnd\nsource V1 from a to gnd : 5 V\nload P1 from a to gnd : 1 W\n", False),
    ("circuit m\nground gnd\nsource V1 from a to gnd : 5 V\nsource VG from g to gnd : 3 V\n"
     "resistor RD from a to d : 1 kohm\nmosfet M1 (d: d, g: g, s: gnd) : nmos\n", False),
])
def test_feedback_decides_whether_to_search(text, several):
    assert may_have_several(_netlist(text)) is several


def test_the_example_boards_main_board_is_not_searched():
    design = load_design(EXAMPLE / "boards" / "mainboard" / "mainboard.circuit", root=EXAMPLE)
    assert not any(may_have_several(netlist) for netlist in design.netlists)


def test_stable_near_settles_off_the_balance_point_towards_the_guess():
    netlist = _netlist(LATCH)
    case = solve_states([netlist])[0]
    system = assemble(netlist, Cache().topology(netlist))
    found = search(system, warm_start(system, case.points[0]))
    balance = next(point for point in found.points if not point.stability.stable)
    unstable = operating_point(system, balance.x, 1, "newton")
    for state in case.points:
        settled = stable_near(unstable, state)
        assert settled.nets["q"] == pytest.approx(state.nets["q"], rel=1e-9)
        assert settled.strategy == "state search"


def test_a_stable_point_is_returned_as_it_is():
    case = solve_states([_netlist(LATCH)])[0]
    assert stable_near(case.points[0], case.points[1]) is case.points[0]


def test_the_search_stays_within_its_budget():
    netlist = _netlist(LATCH)
    point = solve_states([netlist])[0].points[0]
    system = assemble(netlist, Cache().topology(netlist))
    assert search(system, warm_start(system, point)).runs <= MAX_RUNS
