"""Circuits with no DC operating point are named in plain words before any factorisation.

Scenario: a weather station's sensor front end, with mistakes put in on purpose.
"""

from __future__ import annotations

import numpy as np
import pytest

from checker.design import Netlist, Part
from checker.devices import DEVICES
from checker.devices.base import Device, EdgeKind, Edges
from checker.errors import Location, NoSolutionError
from checker.solver import solve

CASE_LOCATION = Location("station.circuit", 40, 6)


def two(name, kind, a, b, value=None, unit=None, flags=(), line=1, **props):
    return Part(name, kind, (("from", a), ("to", b)), value, unit, frozenset(flags), props,
                location=Location("station.circuit", line, 10))


def net(*parts):
    return Netlist("station", "humid", 298.15, "gnd", tuple(parts), case_location=CASE_LOCATION)


SUPPLY = [two("VCC", "source", "vcc", "gnd", 3.3, "V", line=2), two("R1", "resistor", "vcc", "mid", 10e3, "ohm", line=3),
          two("R2", "resistor", "mid", "gnd", 10e3, "ohm", line=4)]


def failure(*parts) -> NoSolutionError:
    with pytest.raises(NoSolutionError) as caught:
        solve(net(*parts))
    return caught.value


def test_net_touching_only_a_capacitor_floats():
    error = failure(*SUPPLY, two("C3", "capacitor", "mid", "tap", 1e-9, "F", line=9))
    assert error.message == "net `tap` is connected to nothing but the capacitor C3: it floats at DC"
    assert error.location.line == 9
    assert error.notes == ("in case `humid` of circuit `station`",)


def test_open_switch_and_capacitor_both_named():
    error = failure(*SUPPLY, two("S1", "switch", "mid", "tap", flags={"open"}, line=8),
                    two("C3", "capacitor", "tap", "gnd", 1e-9, "F", line=9))
    assert error.message == ("net `tap` is connected to nothing but the open switch S1 and the capacitor C3: "
                             "it floats at DC")
    assert error.location.line == 8


def test_group_of_nets_floating_together():
    error = failure(*SUPPLY, two("C5", "capacitor", "mid", "a", 1e-9, "F", line=11),
                    two("R7", "resistor", "a", "b", 1e3, "ohm", line=12),
                    two("L2", "inductor", "b", "c", 1e-6, "H", line=13))
    assert error.message.startswith("nets `a`, `b` and `c` have no DC path to ground")
    assert "the capacitor C5, the resistor R7 and the inductor L2 (a short at DC)" in error.message
    assert error.location.line == 11


def test_voltage_source_alone_between_two_nets_floats():
    error = failure(*SUPPLY, two("VREF", "source", "p", "n", 1.2, "V", line=14))
    assert error.message == ("nets `p` and `n` have no DC path to ground: they touch only the voltage "
                             "source VREF, so they float at DC")


def test_current_source_into_a_cut_set():
    error = failure(*SUPPLY, two("IBIAS", "source", "mid", "sense", 1e-6, "A", line=15),
                    two("C3", "capacitor", "sense", "gnd", 1e-9, "F", line=16))
    assert error.message == ("the current source IBIAS drives net `sense`, which has no other DC path "
                             "to ground: the current has nowhere to go")
    assert error.location.line == 15


def test_current_sources_in_series_are_a_cut_set():
    error = failure(*SUPPLY, two("I1", "source", "vcc", "x", 1e-3, "A", line=17),
                    two("HEATER", "load", "x", "gnd", 1e-3, "A", line=18))
    assert error.message.startswith("the current source I1 and the current load HEATER drive net `x`")
    assert error.location.line == 17


def test_parallel_voltage_sources_form_a_loop():
    error = failure(*SUPPLY, two("VAUX", "source", "vcc", "gnd", 3.3, "V", line=20))
    assert error.message.startswith("the voltage source VCC and the voltage source VAUX form a loop "
                                    "through nets `vcc` and `gnd`")
    assert "undetermined" in error.message
    assert error.location.line == 2


def test_loop_of_source_and_shorts_names_only_its_members():
    error = failure(*SUPPLY, two("L1", "inductor", "vcc", "x", 1e-6, "H", line=21),
                    two("S2", "switch", "x", "gnd", flags={"closed"}, line=22),
                    two("S3", "switch", "x", "gnd", flags={"closed"}, ron=5.0, line=23))
    assert error.message.startswith("the voltage source VCC, the inductor L1 (a short at DC) and the closed "
                                    "switch S2 (a short) form a loop through nets `vcc`, `x` and `gnd`")
    assert "S3" not in error.message and "R1" not in error.message


def test_short_with_both_ends_on_one_net_is_a_loop():
    error = failure(*SUPPLY, two("L4", "inductor", "mid", "mid", 1e-6, "H", line=24))
    assert error.message.startswith("the inductor L4 (a short at DC) forms a loop through net `mid`")
    assert error.location.line == 24


def test_long_lists_are_cut_short():
    capacitors = [two(f"C{k}", "capacitor", "tap", "gnd", 1e-9, "F", line=30 + k) for k in range(9)]
    error = failure(*SUPPLY, *capacitors)
    assert "the capacitor C4 and 4 more: it floats" in error.message


def test_location_falls_back_to_the_case():
    parts = [Part(p.name, p.kind, p.pins, p.value, p.value_unit, p.flags) for p in SUPPLY]
    error = failure(*parts, Part("C3", "capacitor", (("from", "mid"), ("to", "tap")), 1e-9, "F"))
    assert error.location == CASE_LOCATION


class Ghost(Device):
    """Claims a DC path but stamps nothing: its matrix is singular although the graph looks fine."""

    kind = "ghost"

    def edges(self) -> Edges:
        rows = np.arange(len(self.parts))
        return Edges(self.nodes[:, 0], self.nodes[:, 1], np.full(rows.size, EdgeKind.CONDUCTIVE), rows)

    def pin_currents(self, x):
        return np.zeros((len(self.parts), 2))


def test_singular_matrix_past_diagnosis_is_still_no_solution(monkeypatch):
    monkeypatch.setitem(DEVICES, "ghost", Ghost)
    error = failure(*SUPPLY, two("G1", "ghost", "mid", "lost"))
    assert "singular" in error.message and "`humid`" in error.message
    assert error.location == CASE_LOCATION


def test_diagnosis_runs_before_factorising(monkeypatch):
    calls = []
    monkeypatch.setattr("checker.solver.linear.splu", lambda matrix: calls.append(matrix))
    failure(*SUPPLY, two("C3", "capacitor", "mid", "tap", 1e-9, "F"))
    assert calls == []
