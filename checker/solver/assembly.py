"""Turn a netlist into the sparse modified-nodal-analysis system A x = b.

Unknowns: the voltage of every net but ground (in `Netlist.nets` order, ground
first and left out), then the devices' branch currents. Row k of a net says that
the currents leaving the net into its parts sum to zero (Kirchhoff's current law);
a branch row is its device's voltage equation (Vlach & Singhal, "Computer Methods
for Circuit Analysis and Design", 1983 — from memory).
"""

from __future__ import annotations

import hashlib
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp

from checker.design import Netlist, Part
from checker.devices import DEVICES, Device
from checker.devices.base import Triplets
from checker.errors import DesignError


@dataclass
class System:
    """One netlist ready to solve: its devices and the constant (linear) part of its equations."""

    netlist: Netlist
    nets: tuple[str, ...]  # ground first, then in order of first appearance (as Netlist.nets)
    devices: list[Device]
    positions: list[np.ndarray]  # for each device, where its parts stand in netlist.parts
    matrix: sp.csc_matrix
    rhs: np.ndarray

    @property
    def n_nodes(self) -> int:
        """Unknown net voltages: every net except ground."""
        return len(self.nets) - 1

    @property
    def size(self) -> int:
        return self.matrix.shape[0]

    @property
    def nonlinear_devices(self) -> list[Device]:
        return [device for device in self.devices if device.nonlinear]

    def fingerprint(self) -> bytes:
        """A digest of the matrix: equal digests mean one factorisation serves both systems."""
        digest = hashlib.blake2b(digest_size=20)
        for array in (np.asarray(self.matrix.shape), self.matrix.indptr, self.matrix.indices, self.matrix.data):
            digest.update(np.ascontiguousarray(array).tobytes())
        return digest.digest()


def assemble(netlist: Netlist) -> System:
    """Build the devices and the constant matrix and right-hand side of `netlist`.

    Written as flat passes over all pins: a grid of 10^5 parts must not cost
    more to assemble than to factorise.
    """
    parts = netlist.parts
    pin_nets = [net for part in parts for _, net in part.pins]
    nets = tuple(dict.fromkeys([netlist.ground] + pin_nets))  # the order of Netlist.nets
    index = {net: position - 1 for position, net in enumerate(nets)}  # ground -> -1
    unknowns = np.fromiter(map(index.__getitem__, pin_nets), np.int64, len(pin_nets))
    first_pin = np.cumsum([0] + [len(part.pins) for part in parts])
    devices: list[Device] = []
    positions: list[np.ndarray] = []
    next_unknown = len(nets) - 1
    for kind, members in _by_kind(parts).items():
        group = [parts[m] for m in members.tolist()]
        cls = _device_class(kind, group[0])
        _check_pins(cls, group)
        nodes = unknowns[first_pin[members][:, None] + np.arange(len(cls.pins))]
        device = cls(group, nodes, next_unknown, netlist.ambient)
        next_unknown += device.n_branches
        devices.append(device)
        positions.append(members)
    matrix = _matrix([device.matrix() for device in devices], next_unknown)
    return System(netlist, nets, devices, positions, matrix, _rhs(devices, next_unknown))


def _by_kind(parts: tuple[Part, ...]) -> dict[str, np.ndarray]:
    """Positions of the parts of each kind, kinds in order of first appearance."""
    kinds = [part.kind for part in parts]
    column = np.array(kinds, dtype=object)
    return {kind: np.flatnonzero(column == kind) for kind in dict.fromkeys(kinds)}


def _device_class(kind: str, part: Part) -> type[Device]:
    if kind not in DEVICES:
        raise DesignError(f"part kind `{kind}` is not yet supported by the solver", part.location)
    return DEVICES[kind]


def _check_pins(cls: type[Device], parts: list[Part]) -> None:
    """Every part names the kind's pins in the kind's order (the kind table guarantees it)."""
    pins = [pin for part in parts for pin, _ in part.pins]
    if pins != list(cls.pins) * len(parts) or {len(part.pins) for part in parts} != {len(cls.pins)}:
        wrong = next(part for part in parts if tuple(pin for pin, _ in part.pins) != cls.pins)
        raise DesignError(f"{cls.kind} {wrong.name} must have the pins {', '.join(cls.pins)}", wrong.location)


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
