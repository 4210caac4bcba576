"""The plain data passed between stages: an elaborated design, its per-case netlists,
and the operating point the solver finds for each.

Frozen dataclasses with no behaviour beyond lookups. All numbers are SI floats;
temperatures are in kelvin.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property
from typing import Any, Mapping

from checker.errors import Location

@dataclass(frozen=True)
class Part:
    """One fitted part, flat, with every value resolved to SI.

    `pins` lists (pin, net) in the kind's pin order; two-terminal parts have
    ("from", net) and ("to", net). `value` is the primary value (resistance,
    source voltage or current, load current/power/resistance, ...) and `value_unit`
    says which: "ohm", "V", "A", "W", "F", "H" (None when the kind has no primary
    value). Bare words (`open`, `npn`, `nmos`) are in `flags`. A property written
    `vf = 2.0 V at 10 mA` is `props["vf"] = 2.0` and `at["vf"] = 0.01`. `spots` says where
    the part's items were written, for messages that point at the token: each pin name ->
    its net, "value" -> the primary value, and each property's name -> its value.
    """

    name: str
    kind: str
    pins: tuple[tuple[str, str], ...]
    value: float | None = None
    value_unit: str | None = None
    flags: frozenset[str] = frozenset()
    props: Mapping[str, float] = field(default_factory=dict)
    at: Mapping[str, float] = field(default_factory=dict)
    tags: frozenset[str] = frozenset()
    location: Location | None = field(default=None, compare=False)
    spots: Mapping[str, Location] = field(default_factory=dict, compare=False)

    def net(self, pin: str) -> str:
        """The net on `pin`; KeyError if the kind has no such pin."""
        for name, net in self.pins:
            if name == pin:
                return net
        raise KeyError(pin)

    @property
    def nets(self) -> tuple[str, ...]:
        return tuple(net for _, net in self.pins)

    def copy_with(self, **changes) -> "Part":
        """A copy with some fields changed: `dataclasses.replace` without re-running `__init__`
        (which checks nothing here), because tolerance analysis makes hundreds of thousands."""
        copy = object.__new__(Part)
        copy.__dict__.update(self.__dict__)
        copy.__dict__.update(changes)
        return copy

    @property
    def two_terminal(self) -> bool:
        return tuple(pin for pin, _ in self.pins) == ("from", "to")


@dataclass(frozen=True)
class Netlist:
    """One case of one circuit: the fitted parts with the case's overrides applied. `starts`
    holds (net, volts) from `NET starts at VALUE`: the case keeps the stable state nearest them."""

    circuit: str
    case: str
    ambient: float  # K
    ground: str
    parts: tuple[Part, ...]
    case_location: Location | None = field(default=None, compare=False)
    starts: tuple[tuple[str, float], ...] = ()

    @cached_property
    def nets(self) -> tuple[str, ...]:
        """Every net, ground first, then in order of first appearance (computed once: frozen)."""
        seen = {self.ground: None}
        for part in self.parts:
            for net in part.nets:
                seen.setdefault(net, None)
        return tuple(seen)

    def part(self, name: str) -> Part:
        for part in self.parts:
            if part.name == name:
                return part
        raise KeyError(name)

    @cached_property
    def part_map(self) -> Mapping[str, Part]:
        """The case's parts by name (computed once: frozen)."""
        return {part.name: part for part in self.parts}


@dataclass(frozen=True)
class Design:
    """An elaborated circuit file: its declared parts and one netlist per case.

    `parts` are the declared (nominal) parts, including those some case marks
    absent; `netlists` are in the order the cases are declared (one named
    `default` when the file declares none).
    """

    name: str
    title: str
    path: str
    ground: str
    parts: tuple[Part, ...]
    netlists: tuple[Netlist, ...]
    location: Location | None = field(default=None, compare=False)

    @property
    def cases(self) -> tuple[str, ...]:
        return tuple(n.case for n in self.netlists)

    @cached_property
    def all_nets(self) -> frozenset[str]:
        """Every net of every case, ground included (computed once: frozen)."""
        return frozenset(net for netlist in self.netlists for net in netlist.nets) | {self.ground}

    @cached_property
    def part_map(self) -> Mapping[str, Part]:
        """The declared parts by name (computed once: frozen)."""
        return {part.name: part for part in self.parts}

    def netlist(self, case: str) -> Netlist:
        for netlist in self.netlists:
            if netlist.case == case:
                return netlist
        raise KeyError(case)


@dataclass(frozen=True)
class PartResult:
    """A part at the operating point.

    Two-terminal parts: `voltage` (from minus to), `current` (from -> to through
    the part), `power` = voltage x current (positive: absorbed). Every part:
    `pins`, the current flowing into each pin from its net, and `power`, the
    power it absorbs (sum over pins of pin voltage x pin current).
    """

    power: float
    pins: Mapping[str, float]
    voltage: float | None = None
    current: float | None = None


@dataclass(frozen=True)
class OperatingPoint:
    """The DC solution of one netlist.

    `strategy` is how it was reached: "linear" (one direct solve), "newton",
    "gain stepping", "shunt stepping", "source stepping", or "state search" for a further
    stable state found by searching (`checker.solver.states`). `state` tells which stable
    state of its case this is (`1 of 2`) when the case has more than one (docs/models.md,
    "Stability and several states"); empty when it has one.
    """

    netlist: Netlist
    nets: Mapping[str, float]
    parts: Mapping[str, PartResult]
    iterations: int = 1
    strategy: str = "linear"
    state: str = ""
    self_check: Any = field(default=None, compare=False)  # checker.solver.selfcheck.SelfCheck: the answer checked

    @property
    def case(self) -> str:
        return self.netlist.case

    @property
    def ambient(self) -> float:
        return self.netlist.ambient
