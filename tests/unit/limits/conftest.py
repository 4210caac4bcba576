"""Hand-built designs and operating points for the limits tests (parser and solver are separate stages)."""

from __future__ import annotations

import datetime
import types

import pytest

from checker.design import Design, Netlist, OperatingPoint, Part, PartResult
from checker.errors import Location
from checker.limits import evaluate_limits, load_limit_text

ROOM = 298.15  # K, 25 degC


def part(name, kind="resistor", nets=("a", "gnd"), value=None, unit=None, tags=(), pins=None, **props):
    """A Part; two-terminal from `nets` unless `pins` gives (pin, net) pairs."""
    pins = pins or (("from", nets[0]), ("to", nets[1]))
    return Part(name=name, kind=kind, pins=tuple(pins), value=value, value_unit=unit, props=dict(props),
                tags=frozenset(tags), location=Location("board.circuit", 3, 1))


def design(parts, cases=(("nominal", ROOM),), name="board", absent=None, overrides=None):
    """A Design with one netlist per (case, ambient K); `absent[case]` lists parts not fitted,
    `overrides[case]` maps a part name to a replacement Part."""
    absent, overrides = absent or {}, overrides or {}
    netlists = tuple(
        Netlist(name, case, ambient, "gnd",
                tuple(overrides.get(case, {}).get(p.name, p) for p in parts if p.name not in absent.get(case, ())))
        for case, ambient in cases)
    return Design(name, name, f"{name}.circuit", "gnd", tuple(parts), netlists)


def op(design_, case, nets, results):
    """An OperatingPoint; `results` maps a part name to (voltage, current, power) or to a PartResult."""
    netlist = design_.netlist(case)
    parts = {}
    for name, result in results.items():
        if not isinstance(result, PartResult):
            voltage, current, power = result
            result = PartResult(power=power, pins={"from": current, "to": -current}, voltage=voltage, current=current)
        parts[name] = result
    return OperatingPoint(netlist, {"gnd": 0.0, **nets}, parts)


def limits(text, path="limits.yaml"):
    return load_limit_text(text, path)


def single(check, designs, ops, today=datetime.date(2026, 1, 1), extra=""):
    """Findings of one limit `check` (a YAML plain scalar) over `designs` and `ops` {circuit: [op]}."""
    text = f"limits:\n  - id: the-limit\n    about: a test limit\n    check: {check}\n{extra}"
    return evaluate_limits([limits(text)], designs, ops, today)[0]


def divider_board():
    """A 3.3 V source on `vbat`, R1 (1 kohm) from vbat to mid, R2 (2 kohm) from mid to gnd."""
    parts = [part("VBAT", "source", ("vbat", "gnd"), 3.3, "V"),
             part("R1", nets=("vbat", "mid"), value=1e3, unit="ohm", rating=0.1, tol=0.01),
             part("R2", nets=("mid", "gnd"), value=2e3, unit="ohm", tol=0.01)]
    board = design(parts)
    current = 3.3 / 3e3  # A, Ohm's law through the series pair
    point = op(board, "nominal", {"vbat": 3.3, "mid": 2.2},
               {"VBAT": (3.3, -current, -3.3 * current), "R1": (1.1, current, 1.1 * current),
                "R2": (2.2, current, 2.2 * current)})
    return board, point


@pytest.fixture
def make():
    return types.SimpleNamespace(part=part, design=design, op=op, limits=limits, single=single,
                                 divider_board=divider_board, ROOM=ROOM)
