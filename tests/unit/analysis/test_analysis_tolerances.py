"""Which values carry a tolerance, how they are moved, and how a corner is named."""

from __future__ import annotations

import pytest
from analysis_circuits import divider_text

from checker.analysis.tolerances import Tolerance, corner_label, perturbed, primary_values, toleranced
from checker.design import Netlist, Part
from checker.errors import DesignError
from checker.language import parse_design


def test_tol_applies_to_the_primary_value_and_case_overrides_count():
    design = parse_design(divider_text(tol_v=0.02, cases="case a\ncase b : R1.tol = 5%\n"), "d.circuit")
    assert toleranced(design.netlist("a")) == (Tolerance("VIN", 0.02), Tolerance("R1", 0.01), Tolerance("R2", 0.01))
    assert toleranced(design.netlist("b"))[1] == Tolerance("R1", 0.05)


def test_regulator_tolerance_moves_vout():
    regulator = Part("U1", "regulator", (("in", "a"), ("out", "b"), ("gnd", "gnd")),
                     props={"vout": 3.3, "tol": 0.02})
    netlist = Netlist("c", "default", 298.15, "gnd", (regulator,))
    assert toleranced(netlist) == (Tolerance("U1", 0.02, "vout"),)
    assert toleranced(netlist)[0].name == "U1.vout"
    moved = perturbed(netlist, {"U1": -0.02})
    assert moved.part("U1").props["vout"] == pytest.approx(3.3 * 0.98, rel=1e-15)
    assert moved.part("U1").value is None


def test_perturbed_scales_only_the_named_parts():
    netlist = parse_design(divider_text(r1=4700.0), "d.circuit").netlists[0]
    moved = perturbed(netlist, {"R1": 0.01})
    assert moved.part("R1").value == pytest.approx(4747.0, rel=1e-15)
    assert moved.part("R2") == netlist.part("R2") and moved.part("VIN") == netlist.part("VIN")
    assert netlist.part("R1").value == 4700.0  # the original is untouched


def test_a_tolerance_of_100_percent_or_more_is_an_error_at_the_value_in_every_mode():
    # The language refuses it while reading the file, before any analysis could use it.
    with pytest.raises(DesignError) as caught:
        parse_design(divider_text(tol_r=1.5), "d.circuit")
    assert "below 100 %" in caught.value.message and caught.value.location.line == 4


def test_zero_tolerance_is_not_toleranced_and_primary_values_cover_every_value():
    netlist = parse_design(divider_text(tol_r=0.0), "d.circuit").netlists[0]
    assert toleranced(netlist) == ()
    assert [t.part for t in primary_values(netlist, 0.01)] == ["VIN", "R1", "R2"]


def test_corner_label_names_three_parts_then_counts_the_rest():
    assert corner_label([("R_TOP", 0.01), ("R_BOT", -0.01), ("VBAT", -0.02)]) == \
        "R_TOP +1 %, R_BOT \u22121 %, VBAT \u22122 %"
    assert corner_label([(f"R{i}", 0.05) for i in range(7)]) == "R0 +5 %, R1 +5 %, R2 +5 % and 4 more"
