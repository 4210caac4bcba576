"""The device interface the solver assembles from, and the base for linear two-terminal kinds.

A device object stands for *all* the parts of one kind in a netlist, so that its
stamp is built with a few numpy calls instead of one Python call per part.

Unknowns are indexed as in modified nodal analysis (Vlach & Singhal, "Computer
Methods for Circuit Analysis and Design", 1983, ch. 4 — chapter from memory): first
the voltage of every net except ground, then one current per extra branch. Ground
is index -1 everywhere: entries in row or column -1 are dropped by the assembler,
and the vectors `x` handed to devices carry one extra trailing 0.0 so that
`x[-1]` reads ground's 0 V.
"""

from __future__ import annotations

import math
from itertools import compress, count
from operator import attrgetter
from dataclasses import dataclass
from enum import IntEnum
from typing import ClassVar, Sequence

import numpy as np

from checker.design import Part
from checker.errors import DesignError

GROUND = -1
_PROPS = attrgetter("props")


class EdgeKind(IntEnum):
    """What a device offers between two nets at DC, for the diagnosis of the graph."""

    CONDUCTIVE = 0  # a DC path whose current follows the voltage (resistor, diode)
    VOLTAGE = 1  # a DC path with its voltage fixed (voltage source, zero-ohm short)
    CURRENT = 2  # no DC path, but a fixed current is pushed through (current source)


@dataclass(frozen=True)
class Edges:
    """Graph edges between unknown indices `a` and `b` (-1 is ground); `part` is the row in `Device.parts`."""

    a: np.ndarray
    b: np.ndarray
    kind: np.ndarray
    part: np.ndarray


@dataclass(frozen=True)
class Triplets:
    """Sparse matrix entries in coordinate form; duplicates add up."""

    rows: np.ndarray
    cols: np.ndarray
    values: np.ndarray


@dataclass(frozen=True)
class Injection:
    """Right-hand-side entries: currents into node rows (A), or branch values (V)."""

    rows: np.ndarray
    values: np.ndarray


@dataclass(frozen=True)
class NonlinearStamp:
    """A nonlinear device at a guess: its residual entries and their derivatives.

    `currents[k]` adds to row `rows[k]` of the residual: for a node row, the current
    (A) flowing from that net into the device; for a branch row, the device's branch
    equation written in volts. `jacobian` holds d(residual)/d(unknown).
    """

    rows: np.ndarray
    currents: np.ndarray
    jacobian: Triplets


def empty_triplets() -> Triplets:
    return Triplets(np.empty(0, int), np.empty(0, int), np.empty(0))


def empty_injection() -> Injection:
    return Injection(np.empty(0, int), np.empty(0))


def reject(bad: np.ndarray, parts: Sequence[Part], message) -> None:
    """Raise a DesignError at the first part where `bad` is true; `message(part)` words it."""
    hits = np.flatnonzero(bad)
    if hits.size:
        part = parts[int(hits[0])]
        raise DesignError(message(part), part.location)


def prop_array(parts: Sequence[Part], name: str, default: float) -> np.ndarray:
    """One property of every part as a float array, `default` where it is not given.

    Only the parts with any properties are visited in Python: a grid's half-million bare
    resistors cost one pass in C."""
    values = np.full(len(parts), default, dtype=float)
    props = list(map(_PROPS, parts))
    for k in compress(count(), props):
        values[k] = props[k].get(name, default)
    return values


def value_array(parts: Sequence[Part]) -> np.ndarray:
    """The primary values as a float array, NaN where a part has none."""
    return np.array([np.nan if part.value is None else part.value for part in parts], dtype=float)


class Device:
    """All the parts of one kind in one netlist.

    `nodes` has one row per part and one column per pin (unknown index, -1 for
    ground). A device needing extra unknowns (branch currents) sets `n_branches`
    in its constructor and numbers them from `first_branch`.
    """

    kind: ClassVar[str]
    pins: ClassVar[tuple[str, ...]] = ("from", "to")
    nonlinear: ClassVar[bool] = False
    rhs_units: ClassVar[frozenset[str]] = frozenset()
    """Units of primary values that enter only `sources()` (the right-hand side), never the matrix,
    the branch numbering or a nonlinear law: netlists differing only in such values share one
    assembled system and factorisation (`checker.solver`)."""

    def __init__(self, parts: Sequence[Part], nodes: np.ndarray, first_branch: int, ambient: float):
        self.parts = tuple(parts)
        self.nodes = nodes
        self.first_branch = first_branch
        self.ambient = ambient  # K
        self.n_branches = 0
        self.scale = 1.0  # source stepping: fraction of built-in setpoints (V, A; W as its square) applied
        self.gain_cap = math.inf  # gain stepping: ceiling (V/V) on amplifiers' open-loop gains

    @classmethod
    def describe(cls, part: Part) -> str:
        """The part in plain words for diagnosis messages, e.g. `the capacitor C3`."""
        return f"the {part.kind} {part.name}"

    def edges(self) -> Edges:
        """The DC paths this device offers between its nets (see EdgeKind)."""
        raise NotImplementedError

    def matrix(self) -> Triplets:
        """Constant entries of the system matrix: conductances (S) and branch incidences."""
        return empty_triplets()

    def sources(self) -> Injection:
        """Constant right-hand-side entries: fixed currents and branch voltages."""
        return empty_injection()

    def evaluate(self, x: np.ndarray) -> NonlinearStamp:
        """Nonlinear kinds only: residual entries and Jacobian at the guess `x`."""
        raise NotImplementedError

    def first_guess(self, x: np.ndarray) -> NonlinearStamp:
        """The stamp for the first linear solve, which sets Newton's starting point.

        By default the device at `x` (all zeros); a kind whose behaviour at 0 V would
        lead Newton to a non-physical root (a constant-power load) stands aside here.
        """
        return self.evaluate(x)

    def trouble(self, x: np.ndarray) -> list[tuple[Part, str]]:
        """Parts whose converged state lies outside what their model describes, each with a
        plain-words reason; the solver turns the first into NoSolutionError."""
        return []

    def open_loop_gains(self) -> np.ndarray:
        """The declared open-loop gains (V/V) that gain stepping raises `gain_cap` towards; none
        for kinds that do not amplify."""
        return np.empty(0)

    def limit(self, x_new: np.ndarray, x_old: np.ndarray) -> np.ndarray:
        """Nonlinear kinds may shorten a Newton step here (junction-voltage limiting).

        Both vectors carry the trailing ground 0.0; return the step's end point.
        """
        return x_new

    def pin_currents(self, x: np.ndarray) -> np.ndarray:
        """The current (A) flowing into each pin at solution `x`: shape (parts, pins)."""
        raise NotImplementedError


class Role(IntEnum):
    """The ideal DC element a linear two-terminal part reduces to."""

    OPEN = 0
    CONDUCTANCE = 1  # value in S
    VOLTAGE = 2  # value in V, from minus to; a short is 0 V; adds a branch current
    CURRENT = 3  # value in A, through the part from `from` to `to`


_EDGE_OF_ROLE = np.array([-1, EdgeKind.CONDUCTIVE, EdgeKind.VOLTAGE, EdgeKind.CURRENT])


class LinearTwoTerminal(Device):
    """A linear two-terminal kind: each part is an open, a conductance, a voltage or a current.

    Stamps follow modified nodal analysis (Ho, Ruehli & Brennan, "The modified nodal
    approach to network analysis", IEEE Trans. Circuits and Systems, 1975 — from
    memory). A voltage branch's unknown is the current through the part from `from`
    to `to`, so zero-ohm shorts are exact and report their current.
    """

    def __init__(self, parts: Sequence[Part], nodes: np.ndarray, first_branch: int, ambient: float):
        super().__init__(parts, nodes, first_branch, ambient)
        self.role, self.value = self.elements()
        is_voltage = self.role == Role.VOLTAGE
        self.n_branches = int(is_voltage.sum())
        self.branch = np.full(len(self.parts), GROUND)
        self.branch[is_voltage] = first_branch + np.arange(self.n_branches)
        # `pin_currents`' selections (with the values they select), made on first use: code that changes
        # `value` in place sets this back to None (checker/analysis/batch.py does).
        self._roles: tuple | None = None

    def elements(self) -> tuple[np.ndarray, np.ndarray]:
        """Each part's Role and value as two arrays; raise DesignError for bad values."""
        raise NotImplementedError

    def _select(self, role: Role) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        mask = self.role == role
        return self.nodes[mask, 0], self.nodes[mask, 1], self.value[mask], self.branch[mask]

    def edges(self) -> Edges:
        present = self.role != Role.OPEN
        return Edges(self.nodes[present, 0], self.nodes[present, 1],
                     _EDGE_OF_ROLE[self.role[present]], np.flatnonzero(present))

    def matrix(self) -> Triplets:
        a, b, g, _ = self._select(Role.CONDUCTANCE)
        va, vb, _, k = self._select(Role.VOLTAGE)
        ones = np.ones(k.size)
        rows = np.concatenate([a, a, b, b, va, vb, k, k])
        cols = np.concatenate([a, b, a, b, k, k, va, vb])
        values = np.concatenate([g, -g, -g, g, ones, -ones, ones, -ones])
        return Triplets(rows, cols, values)

    def sources(self) -> Injection:
        _, _, e, k = self._select(Role.VOLTAGE)
        a, b, i, _ = self._select(Role.CURRENT)
        return Injection(np.concatenate([k, a, b]), np.concatenate([e, -i, i]))

    def pin_currents(self, x: np.ndarray) -> np.ndarray:
        if self._roles is None:  # a device shared by many cases reads the same parts each time
            conductance, voltage = self.role == Role.CONDUCTANCE, self.role == Role.VOLTAGE
            fixed = self.role == Role.CURRENT
            self._roles = (conductance, self.nodes[conductance, 0], self.nodes[conductance, 1],
                           self.value[conductance], voltage, self.branch[voltage], fixed, self.value[fixed])
        conductance, a, b, g, voltage, branch, fixed, amps = self._roles
        current = np.zeros(len(self.parts))
        current[conductance] = g * (x[a] - x[b])
        current[voltage] = x[branch]
        current[fixed] = amps
        return np.column_stack([current, -current])
