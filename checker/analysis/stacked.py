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

from checker.design import OperatingPoint


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


def stack_points(points: Sequence[OperatingPoint]) -> Stacked:
    """Operating points of one case (same parts fitted, values moved) side by side."""
    first = points[0]

    def net(name: str) -> np.ndarray:
        return np.array([p.nets[name] for p in points])

    def result(name: str) -> PartArrays:
        found = [p.parts[name] for p in points]
        pins = {pin: np.array([r.pins[pin] for r in found]) for pin in found[0].pins}
        power = np.array([r.power for r in found])
        if found[0].voltage is None:
            return PartArrays(power, pins)
        return PartArrays(power, pins, np.array([r.voltage for r in found]), np.array([r.current for r in found]))

    lookups = [{part.name: part for part in p.netlist.parts} for p in points]

    def part(name: str) -> PartValues:
        parts = [lookup[name] for lookup in lookups]
        value = None if parts[0].value is None else np.array([p.value for p in parts])
        props = {key: np.array([p.props[key] for p in parts]) for key in parts[0].props}
        return PartValues(value, props)

    return Stacked(first.case, first.ambient, len(points), LazyMap(net, first.nets.__contains__),
                   LazyMap(result, first.parts.__contains__), LazyMap(part, lookups[0].__contains__))
