"""Many operating points of one case side by side, as the limits' side functions read them.

The side functions of `checker.limits.sides` read `values.nets[NET]`,
`values.results[PART].voltage` (`.current`, `.power`, `.pins[PIN]`),
`values.parts[PART].value` (`.props[NAME]`) and `values.ambient`, exactly as the
scalar closures read one `CaseValues`. Here each of those is a numpy array with one
entry per point, built on first use, so a limit that reads two nets of a large board
costs two columns, not the whole board.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable, Mapping, Sequence

import numpy as np

from checker.design import Netlist, OperatingPoint


class LazyMap(Mapping):
    """name -> array built by `make(name)` on first use; KeyError where `known(name)` is false."""

    def __init__(self, make: Callable[[str], object], known: Callable[[str], bool]):
        self._make, self._known, self._built = make, known, {}

    def __getitem__(self, name: str):
        if name not in self._built:
            if not self._known(name):
                raise KeyError(name)
            self._built[name] = self._make(name)
        return self._built[name]

    def __iter__(self):
        return iter(self._built)

    def __len__(self) -> int:
        return len(self._built)


@dataclass(frozen=True)
class PartArrays:
    """A part's result at every point: `voltage`/`current` (two-terminal), `pins`, `power`."""

    power: np.ndarray
    pins: Mapping[str, np.ndarray]
    voltage: np.ndarray | None = None
    current: np.ndarray | None = None


@dataclass(frozen=True)
class PartValues:
    """A part's primary value and properties at every point (arrays where a tolerance moves them)."""

    value: object
    props: Mapping[str, object]


class Stacked:
    """The values the side functions read, for `size` points of one case."""

    def __init__(self, case: str, ambient: float, size: int, nets: Mapping, results: Mapping, parts: Mapping):
        self.case, self.ambient, self.size = case, ambient, size
        self.nets, self.results, self.parts = nets, results, parts


Located = tuple[OperatingPoint, int]
"""An operating point and which block of it one variant is: -1 when the point is the variant's
own, n for block n of a joint solve (`checker.analysis.blocks`: parts block-major)."""


def stack_points(solved: Sequence[Located], netlists: Sequence[Netlist]) -> Stacked:
    """The values of solved variants of one case (same parts fitted, values moved) side by side."""
    first = netlists[0]
    ground, count = first.ground, len(first.parts)
    position = {part.name: m for m, part in enumerate(first.parts)}
    runs = _runs(solved)

    def net(name: str) -> np.ndarray:
        if name == ground:
            return np.zeros(len(solved))
        return np.array([point.nets[name if block < 0 else f"{name}#{block}"] for point, block in solved])

    def result(name: str) -> PartArrays:
        pieces = [point.parts.columns(np.maximum(blocks, 0) * count + position[name]) for point, blocks in runs]
        pins = pieces[0][0]
        currents = np.concatenate([piece[1] for piece in pieces])
        power = np.concatenate([piece[3] for piece in pieces])
        by_pin = {pin: currents[:, n] for n, pin in enumerate(pins)}
        if pieces[0][2] is None:
            return PartArrays(power, by_pin)
        return PartArrays(power, by_pin, np.concatenate([piece[2] for piece in pieces]), currents[:, 0])

    lookups = [{part.name: part for part in netlist.parts} for netlist in netlists]

    def part(name: str) -> PartValues:
        parts = [lookup[name] for lookup in lookups]
        value = None if parts[0].value is None else np.array([p.value for p in parts])
        return PartValues(value, {key: np.array([p.props[key] for p in parts]) for key in parts[0].props})

    nets = set(first.nets)
    return Stacked(first.case, first.ambient, len(solved), LazyMap(net, nets.__contains__),
                   LazyMap(result, position.__contains__), LazyMap(part, position.__contains__))


def joined(pieces: Sequence[tuple[np.ndarray, Stacked]]) -> Stacked:
    """Stacks of one case at disjoint sets of points (the point numbers of each, in order) as one
    stack over all of them in the order of their numbers."""
    if len(pieces) == 1:
        return pieces[0][1]
    order = np.argsort(np.concatenate([rows for rows, _ in pieces]), kind="stable")
    stacks = [stack for _, stack in pieces]
    first = stacks[0]
    size = sum(stack.size for stack in stacks)

    def cat(arrays) -> np.ndarray:
        return np.concatenate([np.broadcast_to(np.asarray(a), (s.size,)) for a, s in zip(arrays, stacks)])[order]

    def net(name: str) -> np.ndarray:
        return cat([stack.nets[name] for stack in stacks])

    def result(name: str) -> PartArrays:
        found = [stack.results[name] for stack in stacks]
        pins = {pin: cat([r.pins[pin] for r in found]) for pin in found[0].pins}
        if found[0].voltage is None:
            return PartArrays(cat([r.power for r in found]), pins)
        return PartArrays(cat([r.power for r in found]), pins, cat([r.voltage for r in found]),
                          cat([r.current for r in found]))

    def part(name: str) -> PartValues:
        found = [stack.parts[name] for stack in stacks]
        value = None if found[0].value is None else cat([p.value for p in found])
        return PartValues(value, {key: cat([p.props[key] for p in found]) for key in found[0].props})

    return Stacked(first.case, first.ambient, size, LazyMap(net, first.nets._known),
                   LazyMap(result, first.results._known), LazyMap(part, first.parts._known))


def _runs(solved: Sequence[Located]) -> list[tuple[OperatingPoint, np.ndarray]]:
    """Consecutive variants from the same operating point, with their block numbers."""
    runs: list[tuple[OperatingPoint, list[int]]] = []
    for point, block in solved:
        if runs and runs[-1][0] is point:
            runs[-1][1].append(block)
        else:
            runs.append((point, [block]))
    return [(point, np.array(blocks)) for point, blocks in runs]


def stack_point(point: OperatingPoint) -> Stacked:
    """One operating point as a stack of one."""
    return stack_points([(point, -1)], [point.netlist])


class PointView:
    """Point `index` of a Stacked as the scalar closures of a compiled check read it (a CaseValues
    look-alike): for checks whose ranking the side formula cannot reproduce (mixed units)."""

    def __init__(self, stacked: Stacked, index: int):
        self.case, self.ambient = stacked.case, stacked.ambient
        pick = _picker(index)
        self.nets = _Mapped(stacked.nets, pick)
        self.results = _Mapped(stacked.results, lambda r: _ScalarResult(r, pick))
        self.parts = _Mapped(stacked.parts, lambda p: PartValues(pick(p.value), {k: pick(v) for k, v in p.props.items()}))


def _picker(index: int) -> Callable:
    return lambda array: float(array[index]) if np.ndim(array) else array


class _Mapped:
    """A read-only view of a mapping with every value passed through `convert`."""

    def __init__(self, source: Mapping, convert: Callable):
        self._source, self._convert = source, convert

    def __getitem__(self, name: str):
        return self._convert(self._source[name])

    def __contains__(self, name: object) -> bool:
        return name in self._source


class _ScalarResult:
    def __init__(self, arrays: PartArrays, pick: Callable):
        self.power = pick(arrays.power)
        self.pins = {pin: pick(current) for pin, current in arrays.pins.items()}
        self.voltage = None if arrays.voltage is None else pick(arrays.voltage)
        self.current = None if arrays.current is None else pick(arrays.current)
