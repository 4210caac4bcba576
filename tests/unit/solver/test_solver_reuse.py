"""solve_cases and the topology Cache reuse work between netlists, and results stay those of
solving each netlist alone.

Reuse is counted, never timed: assemblies, diagnoses, factorisations, Newton runs, device
constructions and sparsity patterns are counted by wrapping the functions the solver calls.
Each circuit is also checked against a result computed outside the project: the divider
with a current load by its Thevenin equivalent (Alexander & Sadiku, "Fundamentals of
Electric Circuits", 5th ed., 2013, ch. 4 — chapter from memory), the diode circuits by
scipy's brentq on the Shockley equation written here (Sedra & Smith, "Microelectronic
Circuits", 7th ed., 2015, ch. 4 — chapter from memory).
"""

from __future__ import annotations

import dataclasses
import math

import pytest
from scipy.optimize import brentq

import checker.solver
import checker.solver.diagnosis
import checker.solver.linear
from checker.design import Netlist, Part
from checker.devices.passives import Resistor
from checker.devices.sources import Source
from checker.errors import NoSolutionError
from checker.language import parse_design
from checker.solver import Cache, solve, solve_cases
from checker.solver.topology import MAX_TOPOLOGIES, Pattern, Topology

K, Q = 1.380649e-23, 1.602176634e-19  # exact SI 2019 values (SI Brochure, 9th ed., 2019)
T25 = 298.15
VT = K * T25 / Q
ISAT = 1e-14  # A: the solver's default diode saturation current (docs/models.md)
SHUNT = 1e-12  # S: in parallel with every diode (docs/models.md)

PUMP = """circuit pump "Aquarium pump monitor"
ground gnd
source   VIN    from vin to gnd   : 12 V
resistor R1     from vin to sense : 10 kohm
resistor R2     from sense to gnd : 4.7 kohm
resistor R3     from vin to aux   : 1 kohm, tempco = 3000 ppm/K
resistor R4     from aux to gnd   : 1 kohm
load     PROBE  from sense to gnd : 50 uA
case nominal    : VIN = 12 V
case low_supply : VIN = 10.5 V, PROBE = 80 uA
case high_supply: VIN = 13.8 V
case no_aux     : VIN = 13.8 V, R3 = absent
case hot        : ambient = 60 degC
"""


def sense_volts(vin: float, probe: float) -> float:
    """Thevenin: VIN R2/(R1+R2) minus the probe current times R1 || R2."""
    return vin * 4.7e3 / 14.7e3 - probe * (10e3 * 4.7e3 / 14.7e3)


class Counter:
    """Wraps `owner.name` so that every call is recorded."""

    def __init__(self, monkeypatch, owner, name):
        self.calls = 0
        original = getattr(owner, name)

        def counted(*args, **kwargs):
            self.calls += 1
            return original(*args, **kwargs)
        monkeypatch.setattr(owner, name, counted)


def count(monkeypatch, owner, name) -> Counter:
    return Counter(monkeypatch, owner, name)


def assert_same_as_alone(point, alone):
    assert point.netlist is alone.netlist or point.netlist == alone.netlist
    assert point.nets.keys() == alone.nets.keys()
    for net, volts in alone.nets.items():
        assert point.nets[net] == pytest.approx(volts, rel=1e-12, abs=1e-15)
    for name in alone.parts:
        mine, theirs = point.parts[name], alone.parts[name]
        assert mine.pins == pytest.approx(theirs.pins, rel=1e-12, abs=1e-18)
        assert mine.power == pytest.approx(theirs.power, rel=1e-12, abs=1e-18)
    assert (point.iterations, point.strategy) == (alone.iterations, alone.strategy)


def test_reuse_source_only_cases_are_assembled_diagnosed_and_factorised_once(monkeypatch):
    design = parse_design(PUMP, "pump.circuit")
    cases = [design.netlist(name) for name in ("nominal", "low_supply", "high_supply")]
    alone = [solve(netlist) for netlist in cases]
    assemblies = count(monkeypatch, checker.solver, "assemble")
    diagnoses = count(monkeypatch, checker.solver.diagnosis, "_check_floating")
    factorisations = count(monkeypatch, checker.solver.linear, "splu")
    resistors = count(monkeypatch, Resistor, "__init__")
    sources = count(monkeypatch, Source, "__init__")
    points = solve_cases(cases)
    assert (assemblies.calls, diagnoses.calls, factorisations.calls, resistors.calls) == (1, 1, 1, 1)
    assert sources.calls == 3  # per case only the parts whose values enter the right-hand side
    for point, netlist, single in zip(points, cases, alone):
        assert point.netlist is netlist
        assert_same_as_alone(point, single)
    for point, (vin, probe) in zip(points, [(12.0, 50e-6), (10.5, 80e-6), (13.8, 50e-6)]):
        assert point.nets["sense"] == pytest.approx(sense_volts(vin, probe), rel=1e-12)
        assert point.parts["PROBE"].current == pytest.approx(probe, rel=1e-15)  # the case's own load


def test_reuse_absent_parts_and_another_ambient_do_not_share(monkeypatch):
    design = parse_design(PUMP, "pump.circuit")
    alone = [solve(netlist) for netlist in design.netlists]
    assemblies = count(monkeypatch, checker.solver, "assemble")
    factorisations = count(monkeypatch, checker.solver.linear, "splu")
    points = solve_cases(design.netlists)
    assert [p.case for p in points] == list(design.cases)
    assert (assemblies.calls, factorisations.calls) == (3, 3)  # {nominal, low, high}, no_aux, hot
    for point, single in zip(points, alone):
        assert_same_as_alone(point, single)
    no_aux, hot = points[3], points[4]
    assert "R3" not in no_aux.parts and no_aux.nets["aux"] == 0.0
    assert hot.nets["aux"] == pytest.approx(12.0 * 1.0 / (1.0 + 1.0 + 3000e-6 * 35.0), rel=1e-12)  # R3 at 60 degC
    assert points[0].nets["aux"] == pytest.approx(6.0, rel=1e-12)


def divider_with(load: Part) -> Netlist:
    parts = (Part("V1", "source", (("from", "in"), ("to", "gnd")), 5.0, "V"),
             Part("RA", "resistor", (("from", "in"), ("to", "out")), 1e3, "ohm"),
             Part("RB", "resistor", (("from", "out"), ("to", "gnd")), 1e3, "ohm"), load)
    return Netlist("divider", load.value_unit or "", T25, "gnd", parts)


def test_reuse_a_load_turned_from_current_into_resistance_does_not_share(monkeypatch):
    current = Part("L", "load", (("from", "out"), ("to", "gnd")), 1e-3, "A")
    resistance = dataclasses.replace(current, value=1e3, value_unit="ohm")
    assemblies = count(monkeypatch, checker.solver, "assemble")
    as_current, as_resistance = solve_cases([divider_with(current), divider_with(resistance)])
    assert assemblies.calls == 2
    assert as_current.nets["out"] == pytest.approx(2.5 - 1e-3 * 500.0, rel=1e-12)  # Thevenin: 2.5 V behind 500 Ω
    assert as_resistance.nets["out"] == pytest.approx(5.0 * 500.0 / 1500.0, rel=1e-12)  # 1 kΩ || 1 kΩ below 1 kΩ


def diode_circuit(volts: float, ohms: float = 1e3, case: str = "default") -> Netlist:
    parts = (Part("V1", "source", (("from", "in"), ("to", "gnd")), volts, "V"),
             Part("R1", "resistor", (("from", "in"), ("to", "a")), ohms, "ohm"),
             Part("D1", "diode", (("from", "a"), ("to", "gnd"))))
    return Netlist("clamp", case, T25, "gnd", parts)


def diode_volts(volts: float, ohms: float) -> float:
    """The diode voltage from KCL at its anode, solved by brentq."""
    return brentq(lambda v: ISAT * math.expm1(v / VT) + SHUNT * v - (volts - v) / ohms, 0.0, volts, xtol=1e-15)


def test_reuse_nonlinear_source_cases_share_devices_and_run_newton_per_case(monkeypatch):
    cases = [diode_circuit(v, case=f"v{v}") for v in (1.0, 3.0, 9.0)]
    alone = [solve(netlist) for netlist in cases]
    assemblies = count(monkeypatch, checker.solver, "assemble")
    diagnoses = count(monkeypatch, checker.solver.diagnosis, "_check_floating")
    newton = count(monkeypatch, checker.solver, "newton")
    points = solve_cases(cases)
    assert (assemblies.calls, diagnoses.calls, newton.calls) == (1, 1, 3)
    for point, single, volts in zip(points, alone, (1.0, 3.0, 9.0)):
        assert_same_as_alone(point, single)
        assert point.nets["a"] == pytest.approx(diode_volts(volts, 1e3), rel=1e-9)


def test_reuse_cache_keeps_topology_diagnosis_and_pattern_across_calls(monkeypatch):
    # Monte Carlo in miniature: every call solves a board whose resistor value moved.
    ohms = [1e3 * (1.0 + 0.05 * math.sin(k)) for k in range(12)]
    alone = [solve(diode_circuit(5.0, r)) for r in ohms]
    topologies = count(monkeypatch, Topology, "__init__")
    diagnoses = count(monkeypatch, checker.solver.diagnosis, "_check_floating")
    assemblies = count(monkeypatch, checker.solver, "assemble")
    patterns = []
    made = Pattern.of
    monkeypatch.setattr(Pattern, "of", lambda *args: patterns.append(1) or made(*args))
    cache = Cache()
    points = [solve_cases([diode_circuit(5.0, r)], cache)[0] for r in ohms]
    assert (topologies.calls, diagnoses.calls, len(patterns)) == (1, 1, 1)
    assert assemblies.calls == len(ohms)  # the values differ: devices are built for each
    for point, single, r in zip(points, alone, ohms):
        assert_same_as_alone(point, single)
        assert point.nets["a"] == pytest.approx(diode_volts(5.0, r), rel=1e-9)


def lamp(switch: str) -> Netlist:
    """A lamp behind a switch; with the switch open, the lamp's far net floats."""
    parts = (Part("V1", "source", (("from", "bat"), ("to", "gnd")), 6.0, "V"),
             Part("S1", "switch", (("from", "bat"), ("to", "sw")), flags=frozenset({switch})),
             Part("R_LAMP", "resistor", (("from", "sw"), ("to", "far")), 12.0, "ohm"),
             Part("C1", "capacitor", (("from", "far"), ("to", "gnd")), 1e-6, "F"))
    return Netlist("lamp", switch, T25, "gnd", parts)


def test_reuse_a_changed_flag_is_diagnosed_again_and_its_error_still_raised(monkeypatch):
    cache = Cache()
    diagnoses = count(monkeypatch, checker.solver.diagnosis, "_check_floating")
    closed = solve_cases([lamp("closed")], cache)[0]
    assert closed.nets["far"] == pytest.approx(6.0, rel=1e-15)  # no DC current through C1: no drop
    with pytest.raises(NoSolutionError, match="float"):
        solve_cases([lamp("open")], cache)
    assert diagnoses.calls == 2 and len(cache) == 1
    with pytest.raises(NoSolutionError, match="float"):  # a failed diagnosis is never remembered
        solve_cases([lamp("open")], cache)


def test_reuse_cache_keeps_a_bounded_number_of_topologies():
    cache = Cache()
    for k in range(MAX_TOPOLOGIES + 5):
        parts = (Part("V1", "source", (("from", "in"), ("to", "gnd")), 1.0, "V"),
                 *(Part(f"R{j}", "resistor", (("from", "in"), ("to", "gnd")), 1e3, "ohm") for j in range(k + 1)))
        point = solve_cases([Netlist("fan", f"c{k}", T25, "gnd", parts)], cache)[0]
        assert point.parts["V1"].current == pytest.approx(-(k + 1) * 1e-3, rel=1e-12)  # n x 1 kΩ in parallel
    assert len(cache) == MAX_TOPOLOGIES
