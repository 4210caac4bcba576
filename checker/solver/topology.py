"""What follows from a netlist's parts' kinds and pins alone, worked out once per topology.

Case sweeps, worst-case corners and Monte Carlo samples solve many netlists that
differ only in values. Numbering the nets, grouping the parts by kind and checking
their pins is a Python pass over every pin, which costs more than the numerics for
large circuits. A `Topology` does it once, and also remembers what later netlists of
the same topology can skip: graph diagnoses that passed, and Jacobian sparsity
patterns. A `Cache` keeps topologies across `solve_cases` calls, bounded in number.
"""

from __future__ import annotations

from dataclasses import dataclass
from itertools import chain
from operator import attrgetter, itemgetter

import numpy as np

from checker.design import Netlist, Part
from checker.devices import DEVICES, Device
from checker.errors import DesignError
from checker.solver.linear import Orderings

MAX_TOPOLOGIES = 16  # kept by one Cache, the least recently used dropped first
MAX_REMEMBERED = 8  # passed diagnoses and sparsity patterns kept per topology

_KIND, _PINS = attrgetter("kind"), attrgetter("pins")
_FIRST, _SECOND = itemgetter(0), itemgetter(1)


@dataclass(frozen=True)
class KindGroup:
    """The parts of one kind: their device class, positions in `Netlist.parts` and pin unknowns."""

    cls: type[Device]
    positions: np.ndarray
    nodes: np.ndarray  # (parts, pins): unknown index of each pin's net, -1 for ground


@dataclass(frozen=True)
class Pattern:
    """Where each coordinate entry (row, col) of a layout lands in the data of a CSC matrix.

    Duplicates add up; the pattern is the layout's, so explicit zeros stay in it.
    """

    rows: np.ndarray
    cols: np.ndarray
    slot: np.ndarray  # entry k adds to data[slot[k]]
    indices: np.ndarray
    indptr: np.ndarray

    @classmethod
    def of(cls, rows: np.ndarray, cols: np.ndarray, size: int) -> Pattern:
        """Index arrays are C ints, as SuperLU takes them: scipy then neither scans nor copies them."""
        keys, slot = np.unique(cols.astype(np.int64) * size + rows, return_inverse=True)
        indptr = np.searchsorted(keys // size, np.arange(size + 1))
        return cls(rows, cols, slot, (keys % size).astype(np.intc), indptr.astype(np.intc))

    def fits(self, rows: np.ndarray, cols: np.ndarray) -> bool:
        return np.array_equal(self.rows, rows) and np.array_equal(self.cols, cols)

    def data(self, values: np.ndarray) -> np.ndarray:
        """The CSC data array of the entries `values` (in layout order)."""
        return np.bincount(self.slot, values, self.indices.size)


class Topology:
    """Net numbering, kind groups and result positions of every netlist with these kinds and pins."""

    def __init__(self, netlist: Netlist, kinds: list[str], pins: list[tuple[tuple[str, str], ...]]):
        self.ground, self.kinds, self.pins = netlist.ground, kinds, pins
        pairs = list(chain.from_iterable(pins))
        pin_nets = list(map(_SECOND, pairs))
        self.nets = tuple(dict.fromkeys([netlist.ground] + pin_nets))  # the order of Netlist.nets
        index = dict(zip(self.nets, range(-1, len(self.nets) - 1)))  # ground -> -1
        unknowns = np.fromiter(map(index.__getitem__, pin_nets), np.int64, len(pin_nets))
        counts = list(map(len, pins))
        first_pin = np.cumsum([0] + counts)
        by_kind = _by_kind(kinds)
        classes = {kind: _device_class(kind, netlist.parts[int(members[0])]) for kind, members in by_kind.items()}
        expected = {kind: cls.pins for kind, cls in classes.items()}
        if (counts != list(map(len, map(expected.__getitem__, kinds)))
                or list(map(_FIRST, pairs)) != list(chain.from_iterable(map(expected.__getitem__, kinds)))):
            for kind, members in by_kind.items():
                _check_pins(classes[kind], [netlist.parts[m] for m in members.tolist()])
        self.groups: list[KindGroup] = []
        for kind, members in by_kind.items():
            cls = classes[kind]
            nodes = unknowns[first_pin[members][:, None] + np.arange(len(cls.pins))]
            self.groups.append(KindGroup(cls, members, nodes))
        self.group_of = np.empty(len(kinds), dtype=np.int64)  # each part's device, in `groups` order
        self.row_of = np.empty(len(kinds), dtype=np.int64)  # and its row in that device
        for number, group in enumerate(self.groups):
            self.group_of[group.positions] = number
            self.row_of[group.positions] = np.arange(group.positions.size)
        self.passed: list[tuple[np.ndarray, ...]] = []  # edge sets whose diagnosis found nothing wrong
        self.patterns: list[Pattern] = []
        self.orderings = Orderings()  # fill-reducing orderings of its matrices' sparsity patterns (`linear`)

    @property
    def n_nodes(self) -> int:
        return len(self.nets) - 1

    def matches(self, ground: str, kinds: list[str], pins: list) -> bool:
        return self.ground == ground and self.kinds == kinds and self.pins == pins

    def diagnosed(self, edges: tuple[np.ndarray, ...]) -> bool:
        """Whether this very edge set has passed the diagnosis before."""
        return any(all(np.array_equal(a, b) for a, b in zip(edges, seen)) for seen in self.passed)

    def remember_passed(self, edges: tuple[np.ndarray, ...]) -> None:
        self.passed = (self.passed + [edges])[-MAX_REMEMBERED:]

    def pattern(self, rows: np.ndarray, cols: np.ndarray, size: int) -> Pattern:
        """The sparsity pattern of a layout, made once per distinct layout."""
        for pattern in self.patterns:
            if pattern.fits(rows, cols):
                return pattern
        pattern = Pattern.of(rows, cols, size)
        self.patterns = (self.patterns + [pattern])[-MAX_REMEMBERED:]
        return pattern


class Cache:
    """Topologies met so far, kept across `solve_cases` calls (at most MAX_TOPOLOGIES).

    Finding a netlist's topology costs two attribute reads per part and a list
    comparison, which is nearly free when netlists share their Part objects (as
    case overrides and tolerance perturbations do).
    """

    def __init__(self) -> None:
        self._topologies: list[Topology] = []

    def __len__(self) -> int:
        return len(self._topologies)

    def topology(self, netlist: Netlist) -> Topology:
        kinds, pins = list(map(_KIND, netlist.parts)), list(map(_PINS, netlist.parts))
        for topology in self._topologies:
            if topology.matches(netlist.ground, kinds, pins):
                self._topologies.remove(topology)
                self._topologies.append(topology)
                return topology
        topology = Topology(netlist, kinds, pins)
        self._topologies = (self._topologies + [topology])[-MAX_TOPOLOGIES:]
        return topology


def _by_kind(kinds: list[str]) -> dict[str, np.ndarray]:
    """Positions of the parts of each kind, kinds in order of first appearance."""
    column = np.array(kinds, dtype=object)
    return {kind: np.flatnonzero(column == kind) for kind in dict.fromkeys(kinds)}


def _device_class(kind: str, part: Part) -> type[Device]:
    if kind not in DEVICES:
        raise DesignError(f"part kind `{kind}` is not yet supported by the solver", part.location)
    return DEVICES[kind]


def _check_pins(cls: type[Device], parts: list[Part]) -> None:
    """Every part names the kind's pins in the kind's order (the kind table guarantees it);
    called to word the error once the quick check of all pins at once has failed."""
    pins = [pin for part in parts for pin, _ in part.pins]
    if pins != list(cls.pins) * len(parts) or {len(part.pins) for part in parts} != {len(cls.pins)}:
        wrong = next(part for part in parts if tuple(pin for pin, _ in part.pins) != cls.pins)
        raise DesignError(f"{cls.kind} {wrong.name} must have the pins {', '.join(cls.pins)}", wrong.location)
