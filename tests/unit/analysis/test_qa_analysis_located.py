"""Regression: a file without `case` statements has a `default` case with no location, so an
error from solving it (a singular system, no convergence) printed without `path:line:col`."""

from __future__ import annotations

import pytest

from checker.analysis.run import located_at
from checker.errors import Location, NoSolutionError
from checker.language import parse_design

BOARD = "circuit probe\nground gnd\nsource V from a to gnd : 1 V\nresistor R from a to gnd : 1 kohm\n"


def test_qa_unlocated_solver_error_points_at_the_circuit_name():
    design = parse_design(BOARD, "probe.circuit")
    assert design.netlists[0].case_location is None  # the gap this guards
    with pytest.raises(NoSolutionError) as caught, located_at(design):
        raise NoSolutionError("no single DC operating point", None, ("in case `default`",))
    location = caught.value.location
    assert (location.path, location.line, location.column) == ("probe.circuit", 1, 9)
    assert caught.value.notes == ("in case `default`",)


def test_qa_located_solver_error_keeps_its_place():
    design = parse_design(BOARD, "probe.circuit")
    place = Location("probe.circuit", 4, 10)
    with pytest.raises(NoSolutionError) as caught, located_at(design):
        raise NoSolutionError("a loop of sources", place)
    assert caught.value.location is place
