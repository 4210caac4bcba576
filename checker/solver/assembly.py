"""Turn a netlist into the sparse modified-nodal-analysis system A x = b.

Unknowns: the voltage of every net but ground (in `Netlist.nets` order, ground
first and left out), then the devices' branch currents. Row k of a net says that
the currents leaving the net into its parts sum to zero (Kirchhoff's current law);
a branch row is its device's voltage equation (Vlach & Singhal, "Computer Methods
for Circuit Analysis and Design", 1983 — from memory).
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np
import scipy.sparse as sp

from checker.design import Netlist
from checker.devices import Device
from checker.devices.base import Triplets
from checker.solver.topology import Cache, Topology


@dataclass
class System:
    """One netlist ready to solve: its devices and the constant (linear) part of its equations."""

    netlist: Netlist
    topology: Topology
    devices: list[Device]  # one per kind, in the order of `topology.groups`
    matrix: sp.csc_matrix
    rhs: np.ndarray

    @property
    def nets(self) -> tuple[str, ...]:
        """Ground first, then in order of first appearance (as Netlist.nets)."""
        return self.topology.nets

    @property
    def positions(self) -> list[np.ndarray]:
        """For each device, where its parts stand in netlist.parts."""
        return [group.positions for group in self.topology.groups]

    @property
    def n_nodes(self) -> int:
        """Unknown net voltages: every net except ground."""
        return self.topology.n_nodes

    @property
    def size(self) -> int:
        return self.matrix.shape[0]

    @property
    def nonlinear_devices(self) -> list[Device]:
        return [device for device in self.devices if device.nonlinear]


def assemble(netlist: Netlist, topology: Topology | None = None) -> System:
    """Build the devices and the constant matrix and right-hand side of `netlist`.

    Written as flat passes over all pins (done once per topology, see `topology`):
    a grid of 10^5 parts must not cost more to assemble than to factorise.
    """
    topology = topology or Cache().topology(netlist)
    devices: list[Device] = []
    next_unknown = topology.n_nodes
    for group in topology.groups:
        device = group.cls(_parts(netlist, group.positions), group.nodes, next_unknown, netlist.ambient)
        next_unknown += device.n_branches
        devices.append(device)
    matrix = _matrix([device.matrix() for device in devices], next_unknown)
    return System(netlist, topology, devices, matrix, _rhs(devices, next_unknown))


def with_sources(system: System, netlist: Netlist) -> System:
    """`system` for `netlist`, which differs from `system.netlist` at most in values that enter only
    the right-hand side (`Device.rhs_units`): those devices are rebuilt, everything else is shared."""
    devices = [group.cls(_parts(netlist, group.positions), group.nodes, device.first_branch, netlist.ambient)
               if group.cls.rhs_units else device
               for group, device in zip(system.topology.groups, system.devices)]
    return replace(system, netlist=netlist, devices=devices, rhs=_rhs(devices, system.size))


def _parts(netlist: Netlist, positions: np.ndarray) -> list:
    parts = netlist.parts
    return [parts[m] for m in positions.tolist()]


def _matrix(stamps: list[Triplets], size: int) -> sp.csc_matrix:
    """Sum the stamps into one canonical CSC matrix, dropping ground's row and column."""
    rows = np.concatenate([s.rows for s in stamps] or [np.empty(0, int)])
    cols = np.concatenate([s.cols for s in stamps] or [np.empty(0, int)])
    values = np.concatenate([s.values for s in stamps] or [np.empty(0)])
    keep = (rows >= 0) & (cols >= 0)
    matrix = sp.csc_matrix((values[keep], (rows[keep], cols[keep])), shape=(size, size))
    matrix.sum_duplicates()
    matrix.eliminate_zeros()
    return matrix


def _rhs(devices: list[Device], size: int) -> np.ndarray:
    rhs = np.zeros(size)
    for device in devices:
        injection = device.sources()
        keep = injection.rows >= 0
        np.add.at(rhs, injection.rows[keep], injection.values[keep])
    return rhs
