"""Net voltages and part results read off a solution vector, and that vector back as a warm start."""

from __future__ import annotations

from collections.abc import Iterator, Mapping
from dataclasses import dataclass

import numpy as np

from checker.design import OperatingPoint, Part, PartResult
from checker.devices import Device
from checker.solver import linear, selfcheck
from checker.solver.assembly import System
from checker.solver.topology import Topology


@dataclass(frozen=True)
class Solution:
    """The unknowns an operating point was read from (V for nets, A for branches), with what
    says what each unknown means: the topology, and which part owns each branch unknown."""

    topology: Topology
    layout: tuple[bytes, ...]
    x: np.ndarray

    def fits(self, system: System) -> bool:
        """Whether every unknown of `system` means the same as here (a tolerance perturbation does)."""
        mine, theirs = self.topology, system.topology
        same = mine is theirs or mine.matches(theirs.ground, theirs.kinds, theirs.pins)
        return same and self.x.size == system.size and self.layout == branch_layout(system)


def branch_layout(system: System) -> tuple[bytes, ...]:
    """Each device's branch unknown per part (devices without branches give b"")."""
    return tuple(np.asarray(getattr(device, "branch", ()), dtype=np.int64).tobytes() for device in system.devices)


def operating_point(system: System, x: np.ndarray, iterations: int, strategy: str) -> OperatingPoint:
    """Every net (ground 0 V) and every part, in netlist order, with the solution's own check
    (`selfcheck`: NoSolutionError instead of a point that does not balance)."""
    x = selfcheck.solution_seen(system, x)
    x_ext = np.append(x, 0.0)
    nets = dict(zip(system.nets, [0.0] + x[:system.n_nodes].tolist()))
    groups = [_group_results(device, x_ext) for device in system.devices]
    topology = system.topology
    factor = linear.latest(system.matrix, system.netlist, system.size)
    with linear.one_thread(system.size):  # the estimate's products and solves, like the solve's
        checked = selfcheck.check(system, x, [g.currents for g in groups], [g.power for g in groups],
                                  selfcheck.digits_lost(factor))
    if system.nonlinear_devices:
        linear.forget()  # Newton-Raphson's last Jacobian: nothing else will ask for it
    parts = PartResults(system.netlist.parts, groups, topology.group_of, topology.row_of,
                        Solution(topology, branch_layout(system), x))
    return OperatingPoint(system.netlist, nets, parts, iterations, strategy, self_check=checked)


def warm_start(system: System, point: OperatingPoint) -> np.ndarray:
    """Where Newton-Raphson starts on `system` given `point`, an operating point of a netlist like it.

    When the point was solved here with the same unknowns (same topology and branch
    layout, as for a tolerance perturbation of the same case) it is every net voltage
    and branch current; otherwise the net voltages found by name (0 V for nets the
    point lacks) with branch currents 0 A.
    """
    if isinstance(point.parts, PartResults) and point.parts.solution.fits(system):
        return point.parts.solution.x.copy()
    nets = point.nets
    x = np.zeros(system.size)
    x[:system.n_nodes] = [nets.get(name, 0.0) for name in system.nets[1:]]
    return x


@dataclass(frozen=True)
class _Group:
    """One device's results as arrays, one row per part."""

    pins: tuple[str, ...]
    currents: np.ndarray  # A into each pin, (parts, pins)
    voltage: np.ndarray | None  # V, from minus to; None for multi-terminal kinds
    power: np.ndarray  # W absorbed


def _group_results(device: Device, x_ext: np.ndarray) -> _Group:
    """Power is the sum over pins of pin voltage x current into the pin; for two pins, v x i."""
    currents = device.pin_currents(x_ext) + 0.0  # + 0.0 turns -0.0 into 0.0 for the reports
    volts = x_ext[device.nodes]
    if device.pins == ("from", "to"):
        voltage = volts[:, 0] - volts[:, 1]
        return _Group(device.pins, currents, voltage, voltage * currents[:, 0] + 0.0)
    return _Group(device.pins, currents, None, (volts * currents).sum(axis=1) + 0.0)


class PartResults(Mapping):
    """Part name -> PartResult, built on access from the solution's arrays.

    A 500 x 500 resistor grid has half a million parts; building every PartResult
    (or even the index of names) up front would cost more than the factorisation.
    """

    def __init__(self, parts: tuple[Part, ...], groups: list[_Group], group_of: np.ndarray, row_of: np.ndarray,
                 solution: Solution):
        self._parts = parts
        self.solution = solution  # kept so that a later solve can start here (`warm_start`)
        self._groups = groups
        self._group, self._row = group_of, row_of  # each part's device and its row there, in netlist order
        self._position: dict[str, int] | None = None

    def _index(self) -> dict[str, int]:
        if self._position is None:
            self._position = {part.name: position for position, part in enumerate(self._parts)}
        return self._position

    def __getitem__(self, name: str) -> PartResult:
        position = self._index()[name]
        group, row = self._groups[self._group[position]], int(self._row[position])
        pins = dict(zip(group.pins, group.currents[row].tolist()))
        power = float(group.power[row])
        if group.voltage is None:
            return PartResult(power, pins)
        return PartResult(power, pins, float(group.voltage[row]), pins["from"])

    def columns(self, positions: np.ndarray) -> tuple[tuple[str, ...], np.ndarray, np.ndarray | None, np.ndarray]:
        """The results of the parts at these netlist positions, all of one kind, as arrays: pin names,
        currents into the pins (parts, pins), voltage (None for multi-terminal kinds) and power."""
        group = self._groups[int(self._group[positions[0]])]
        rows = self._row[positions]
        voltage = None if group.voltage is None else group.voltage[rows]
        return group.pins, group.currents[rows], voltage, group.power[rows]

    def __contains__(self, name: object) -> bool:
        return name in self._index()

    def __iter__(self) -> Iterator[str]:
        return (part.name for part in self._parts)

    def __len__(self) -> int:
        return len(self._parts)

    def __repr__(self) -> str:
        return f"PartResults({len(self)} parts)"
