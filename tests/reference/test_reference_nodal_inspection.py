"""`nodegate solve --equations` against nodal analysis done by hand.

Every conductance matrix here is written in the test by inspection: the diagonal entry
of a net is the sum of the conductances touching it, an off-diagonal entry minus the
conductance joining the two nets, and the right-hand side the source current injected
into the net (Alexander & Sadiku, "Fundamentals of Electric Circuits", 5th ed., 2013,
sec. 3.6, "Nodal and mesh analyses by inspection" — edition and section from memory).
The Matrix Market export is read back with scipy.io and solved with scipy's own sparse
solver. The circuits are our own.
"""

from __future__ import annotations

import json
import re
import textwrap

import numpy as np
import pytest
import scipy.io
from scipy.sparse.linalg import spsolve

from checker.cli import main
from checker.design import Netlist
from checker.language import load_design
from checker.solver import solve
from checker.solver.assembly import assemble
from checker.solver.equations import inspect, linearise

PREFIX = {"p": 1e-12, "n": 1e-9, "µ": 1e-6, "m": 1e-3, "": 1.0, "k": 1e3, "M": 1e6, "G": 1e9}
TERM = re.compile(r"([+−]?)\s*(?:([\d.]+(?:e[+-]?\d+)?)\s*([pnµmkMG]?)(S|Ω)?·)?([vi]\([^)]*\))")

# A soil-moisture probe's bias network: a 2 mA reference current into `probe`, 1 kΩ to
# ground, 2 kΩ on to `sense`, 4 kΩ from `sense` to ground.
PROBE = """\
circuit probe "Soil probe bias"
ground gnd
source   IREF from gnd to probe : 2 mA
resistor R1   from probe to gnd : 1 kohm
resistor R2   from probe to sense : 2 kohm
resistor R3   from sense to gnd : 4 kohm
"""
G_BY_HAND = np.array([[1 / 1e3 + 1 / 2e3, -1 / 2e3],
                      [-1 / 2e3, 1 / 2e3 + 1 / 4e3]])  # rows and columns: probe, sense
I_BY_HAND = np.array([2e-3, 0.0])

# A sensor bridge supplied by a 5 V source (one branch row: v(vdd) = 5 V).
BRIDGE = """\
circuit bridge "Strain bridge"
ground gnd
source   VDD from vdd to gnd : 5 V
resistor RA  from vdd to left : 10 kohm
resistor RB  from left to gnd : 10 kohm
resistor RC  from vdd to right : 12 kohm
resistor RD  from right to gnd : 8.2 kohm
resistor RM  from left to right : 100 kohm
"""

# A non-inverting amplifier: the op-amp's output equation depends on its input nets
# (a controlled element), so its equations are not symmetric.
AMPLIFIER = """\
circuit amp "Gain of two"
ground gnd
source   VCC from vcc to gnd : 5 V
source   VIN from inp to gnd : 1 V
opamp    U1  (plus: inp, minus: fb, out: out, rail_hi: vcc, rail_lo: gnd) : gain = 100000
resistor RF  from out to fb : 10 kohm
resistor RG  from fb to gnd : 10 kohm
"""

# A diode clamp: nonlinear, shown linearised at its solution.
CLAMP = """\
circuit clamp "Input clamp"
ground gnd
source   VS from vs to gnd : 5 V
resistor RS from vs to a : 1 kohm
diode    D1 from a to gnd : isat = 1e-14 A
"""


def _write(tmp_path, text, name="board.circuit"):
    path = tmp_path / name
    path.write_text(textwrap.dedent(text))
    return path


def _printed_rows(out: str) -> dict[str, tuple[dict[str, float], str]]:
    """`net probe: 1.500 mS·v(probe) − 500.0 µS·v(sense) = 2.000 mA` -> {"net probe": ({"v(probe)": 1.5e-3, ...}, rhs)}."""
    rows = {}
    for line in out.splitlines():
        match = re.match(r"\s+(net \S+|\S+):\s+(.*) = (.*)$", line)
        if not match or "·" not in line and "(" not in match.group(2):
            continue
        terms = {}
        for sign, number, prefix, _unit, label in TERM.findall(match.group(2)):
            value = 1.0 if not number else float(number) * PREFIX[prefix]
            terms[label] = -value if sign == "−" else value
        rows[match.group(1)] = (terms, match.group(3))
    return rows


def test_printed_equations_match_the_conductance_matrix_written_by_inspection(tmp_path, capsys):
    path = _write(tmp_path, PROBE)
    assert main(["solve", str(path), "--equations"]) == 0
    out = capsys.readouterr().out
    rows = _printed_rows(out)
    nets = ["probe", "sense"]
    for r, net in enumerate(nets):
        terms, right = rows[f"net {net}"]
        for c, other in enumerate(nets):
            assert terms.get(f"v({other})", 0.0) == pytest.approx(G_BY_HAND[r, c], rel=5e-4)  # 4 figures printed
        assert set(terms) <= {f"v({n})" for n in nets}
    assert rows["net probe"][1] == "2.000 mA" and rows["net sense"][1] == "0 A"
    assert "is symmetric with a positive diagonal and no positive entry off it" in out
    # The solution printed solves the hand-written equations: G v = i.
    v = np.linalg.solve(G_BY_HAND, I_BY_HAND)
    netlist = _netlist_of(path)
    x = solve(netlist).parts.solution.x
    assert x == pytest.approx(v, rel=1e-12)


def test_the_matrix_itself_equals_the_one_written_by_inspection(tmp_path):
    equations = _equations(_write(tmp_path, PROBE))
    assert equations.matrix.toarray() == pytest.approx(G_BY_HAND, rel=1e-15)
    assert equations.rhs == pytest.approx(I_BY_HAND, rel=1e-15)
    assert equations.inspection.applies and equations.inspection.holds


def test_a_voltage_source_adds_its_own_row_and_column(tmp_path, capsys):
    path = _write(tmp_path, BRIDGE)
    equations = _equations(path)
    g = {("vdd", "left"): 1 / 10e3, ("left", "gnd"): 1 / 10e3, ("vdd", "right"): 1 / 12e3,
         ("right", "gnd"): 1 / 8.2e3, ("left", "right"): 1 / 100e3}
    order = ["vdd", "left", "right"]
    by_hand = np.zeros((4, 4))
    for (a, b), conductance in g.items():
        for p, q, sign in ((a, a, 1), (b, b, 1), (a, b, -1), (b, a, -1)):
            if p != "gnd" and q != "gnd":
                by_hand[order.index(p), order.index(q)] += sign * conductance
    by_hand[0, 3] = by_hand[3, 0] = 1.0  # the source's current leaves vdd; its row says v(vdd) = 5 V
    assert equations.matrix.toarray() == pytest.approx(by_hand, rel=1e-14, abs=1e-20)
    assert equations.rhs == pytest.approx([0, 0, 0, 5.0])
    assert main(["solve", str(path), "--equations"]) == 0
    out = capsys.readouterr().out
    assert re.search(r"^\s+VDD:\s+v\(vdd\) = 5\.000 V$", out, re.M)
    assert "i(VDD) the current through VDD from vdd to gnd" in out
    assert "is symmetric" in out


def test_a_controlled_element_breaks_symmetry_and_the_statement_says_it_is_expected(tmp_path, capsys):
    path = _write(tmp_path, AMPLIFIER)
    assert main(["solve", str(path), "--equations"]) == 0
    out = capsys.readouterr().out
    assert "not as nodal analysis by inspection writes it" in out and "expected here" in out
    assert "linearised at the solution" in out
    equations = _equations(path)
    dense = equations.matrix.toarray()
    assert not np.allclose(dense, dense.T)
    assert not equations.inspection.applies and not equations.inspection.holds


def test_a_positive_off_diagonal_entry_in_a_resistor_circuit_is_named_as_a_fault(tmp_path):
    system = assemble(_netlist_of(_write(tmp_path, PROBE)))
    corrupted = system.matrix.tolil()
    corrupted[0, 1] = +1 / 2e3
    found = inspect(system, corrupted.tocsc())
    assert found.applies and not found.holds
    assert "row net probe, column v(sense)" in found.breach
    assert "fault in nodegate" in found.statement()


@pytest.mark.parametrize("text", [BRIDGE, CLAMP, AMPLIFIER], ids=["bridge", "diode clamp", "amplifier"])
def test_matrix_market_read_back_with_scipy_reproduces_the_solution(tmp_path, capsys, text):
    path = _write(tmp_path, text)
    out_file = tmp_path / "equations.mtx"
    assert main(["solve", str(path), "--equations-out", str(out_file)]) == 0
    assert f"written: {out_file}" in capsys.readouterr().out
    augmented = scipy.io.mmread(str(out_file)).tocsc()
    matrix, rhs = augmented[:, :-1], augmented[:, -1].toarray().ravel()
    x = spsolve(matrix, rhs)
    assert main(["solve", str(path), "--format", "json"]) == 0
    nets = json.loads(capsys.readouterr().out)["cases"][0]["nets"]
    header = out_file.read_text().splitlines()
    columns = [re.match(r"% column \d+: v\((\S+)\)", line) for line in header]
    names = [m.group(1) for m in columns if m]
    assert names and len(names) <= x.size
    for k, name in enumerate(names):
        assert x[k] == pytest.approx(nets[name], rel=1e-9, abs=1e-12)


def test_matrix_market_needs_one_case_and_never_replaces_another_file(tmp_path, capsys):
    path = _write(tmp_path, PROBE + "case a : IREF = 1 mA\ncase b : IREF = 3 mA\n")
    assert main(["solve", str(path), "--equations-out", str(tmp_path / "x.mtx")]) == 2
    assert "--case" in capsys.readouterr().err
    precious = tmp_path / "notes.txt"
    precious.write_text("keep me\n")
    assert main(["solve", str(path), "--case", "a", "--equations-out", str(precious)]) == 2
    assert precious.read_text() == "keep me\n"


def _netlist_of(path) -> Netlist:
    return load_design(path, root=path.parent).netlists[0]


def _equations(path):
    netlist = _netlist_of(path)
    return linearise(assemble(netlist), solve(netlist).parts.solution.x)
