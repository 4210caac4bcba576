"""Which netlists of one `solve_cases` call can share one assembled system.

Two netlists share when they have the same ambient and the same parts in the same
order, equal in everything (name, kind, pins, flags, properties, location) except
the values that enter only the right-hand side (`Device.rhs_units`: source voltages
and currents, current loads). Such netlists have the same matrix, so a linear group
needs one factorisation, and a nonlinear group one set of devices.

Finding a group costs a hash of each netlist's values (a prefilter) and one list
comparison, which is nearly free for netlists that share their Part objects.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from itertools import compress, count
from operator import attrgetter, is_not

from checker.design import Netlist, Part
from checker.devices import DEVICES
from checker.solver.assembly import System
from checker.solver.topology import Topology

_VALUE, _LOCATION = attrgetter("value"), attrgetter("location")


def _rhs_only(part: Part) -> bool:
    return part.value is not None and part.value_unit in DEVICES[part.kind].rhs_units


def _without_value(part: Part) -> tuple:
    """Everything about a part but its value, for parts whose value enters only the right-hand side."""
    return (part.name, part.kind, part.pins, part.value is None, part.value_unit, part.flags, part.props, part.at,
            part.tags)


@dataclass
class Group:
    """Netlists sharing the representative's system; `members` are positions in the call."""

    system: System
    members: list[int] = field(default_factory=list)
    _signature: int | None = None
    _compared: tuple[list, list, list[int]] | None = None

    @property
    def netlist(self) -> Netlist:
        return self.system.netlist

    def signature(self) -> int:
        if self._signature is None:
            self._signature = signature(self.netlist, self.system.topology)
        return self._signature

    def admits(self, netlist: Netlist, its_signature: int) -> bool:
        """Whether `netlist` (of the same topology) differs from the representative only in
        right-hand-side values."""
        if its_signature != self.signature() or netlist.ambient != self.netlist.ambient:
            return False
        if self._compared is None:
            parts = self.netlist.parts
            rhs = [k for k in _rhs_candidates(self.system.topology) if _rhs_only(parts[k])]
            self._compared = (_masked(parts, rhs), list(map(_LOCATION, parts)), rhs)
        masked, locations, rhs = self._compared
        return _masked(netlist.parts, rhs) == masked and list(map(_LOCATION, netlist.parts)) == locations


    def shares_parts(self, netlist: Netlist) -> bool:
        """Whether `netlist` holds the representative's very Part objects but for parts that differ from
        theirs only in a right-hand-side value (a case that overrides only sources): then it belongs
        to this group, as `admits` would find, at the cost of one identity pass over the parts."""
        mine, theirs = self.netlist, netlist
        if (theirs.ground != mine.ground or theirs.ambient != mine.ambient
                or len(theirs.parts) != len(mine.parts)):
            return False
        for k in compress(count(), map(is_not, mine.parts, theirs.parts)):
            a, b = mine.parts[k], theirs.parts[k]
            if not (a.kind == b.kind and _rhs_only(a) and _rhs_only(b) and a.location == b.location
                    and _without_value(a) == _without_value(b)):
                return False
        return True


def signature(netlist: Netlist, topology: Topology) -> int:
    """A hash of every part's value, those of kinds with right-hand-side-only values left out:
    equal for netlists that could share a system."""
    values = list(map(_VALUE, netlist.parts))
    for k in _rhs_candidates(topology):
        values[k] = None
    return hash(tuple(values))


def _rhs_candidates(topology: Topology) -> list[int]:
    """Positions of the parts of kinds that have right-hand-side-only values."""
    return [k for group in topology.groups if group.cls.rhs_units for k in group.positions.tolist()]


def _masked(parts: tuple[Part, ...], rhs: list[int]) -> list:
    masked: list = list(parts)
    for k in rhs:
        masked[k] = _without_value(parts[k])
    return masked
