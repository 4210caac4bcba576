"""Find why a circuit has no DC operating point, from its graph, before any factorisation.

A network of positive resistances and independent sources has exactly one solution
when it has no loop made only of voltage sources (and shorts) and no cut set made
only of current sources; every net also needs a DC path to ground (Chua, Desoer &
Kuh, "Linear and Nonlinear Circuits", 1987, on the uniqueness of resistive network
solutions — chapter and wording from memory). Each check names the nets and parts
at fault in plain words.
"""

from __future__ import annotations

from collections import deque

import numpy as np
import scipy.sparse as sp
from scipy.sparse.csgraph import connected_components

from checker.design import Part
from checker.devices import DEVICES
from checker.devices.base import EdgeKind
from checker.errors import Location, NoSolutionError
from checker.solver.assembly import System

MAX_NAMED = 6  # parts or nets named in one message before "and N more"


def diagnose(system: System) -> None:
    """Raise NoSolutionError for floating nets, current-source cut sets or voltage loops.

    The verdict depends only on the edges, so an edge set that passed once for the
    system's topology is not examined again.
    """
    edges = _edges(system)
    if system.topology.diagnosed(edges):
        return
    a, b, kind, part = edges
    _check_floating(system, a, b, kind, part)
    voltage = kind == EdgeKind.VOLTAGE
    _check_loops(system, a[voltage], b[voltage], part[voltage])
    system.topology.remember_passed(edges)


def _edges(system: System) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Every device's edges between graph vertices (ground is vertex n_nodes), and each
    edge's part as a position in `system.netlist.parts`."""
    a, b, kind, part = ([np.empty(0, np.int64)] for _ in range(4))
    for device, positions in zip(system.devices, system.positions):
        edges = device.edges()
        a.append(edges.a)
        b.append(edges.b)
        kind.append(edges.kind)
        part.append(positions[edges.part])
    a_all, b_all = np.concatenate(a).astype(np.int64), np.concatenate(b).astype(np.int64)
    a_all[a_all < 0] = system.n_nodes
    b_all[b_all < 0] = system.n_nodes
    return a_all, b_all, np.concatenate(kind).astype(np.int64), np.concatenate(part).astype(np.int64)


def _components(a: np.ndarray, b: np.ndarray, vertices: int) -> tuple[int, np.ndarray]:
    graph = sp.coo_matrix((np.ones(a.size), (a, b)), shape=(vertices, vertices))
    return connected_components(graph, directed=False)


def _check_floating(system: System, a: np.ndarray, b: np.ndarray, kind: np.ndarray, part: np.ndarray) -> None:
    """Nets with no DC path to ground; a current pushed into such nets is a cut set."""
    path = kind != EdgeKind.CURRENT
    _, labels = _components(a[path], b[path], system.n_nodes + 1)
    floating = np.flatnonzero(labels != labels[system.n_nodes])
    if floating.size == 0:
        return
    group = set(np.flatnonzero(labels == labels[floating[0]]).tolist())
    nets = [system.nets[v + 1] for v in sorted(group)]
    drivers = [system.netlist.parts[part[i]] for i in np.flatnonzero(kind == EdgeKind.CURRENT)
               if (int(a[i]) in group) != (int(b[i]) in group)]
    if drivers:
        raise _cut_set_error(system, nets, drivers)
    named = set(nets)
    touching = [p for p in system.netlist.parts if not named.isdisjoint(p.nets)]
    raise _floating_error(system, nets, touching)


def _floating_error(system: System, nets: list[str], touching: list[Part]) -> NoSolutionError:
    things = _join([_describe(p) for p in touching])
    if len(nets) == 1:
        message = f"net `{nets[0]}` is connected to nothing but {things}: it floats at DC"
    else:
        message = (f"nets {_join([f'`{n}`' for n in nets])} have no DC path to ground: "
                   f"they touch only {things}, so they float at DC")
    return _error(system, message, touching)


def _cut_set_error(system: System, nets: list[str], drivers: list[Part]) -> NoSolutionError:
    which = _join([_describe(p) for p in drivers])
    verb = "drives" if len(drivers) == 1 else "drive"
    where = (f"net `{nets[0]}`, which has" if len(nets) == 1
             else f"nets {_join([f'`{n}`' for n in nets])}, which have")
    message = f"{which} {verb} {where} no other DC path to ground: the current has nowhere to go"
    return _error(system, message, drivers)


def _check_loops(system: System, a: np.ndarray, b: np.ndarray, part: np.ndarray) -> None:
    """A loop of voltage sources and shorts: a forest on V vertices in c trees has V - c edges."""
    if a.size == 0:
        return
    count, _ = _components(a, b, system.n_nodes + 1)
    if a.size <= system.n_nodes + 1 - count:
        return
    loop, loop_nets = _find_loop(a.tolist(), b.tolist())
    members = [system.netlist.parts[p] for p in sorted(int(part[i]) for i in loop)]  # netlist order
    verb = "forms" if len(members) == 1 else "form"
    names = [system.nets[(v + 1) % len(system.nets)] for v in loop_nets]
    through = f"net `{names[0]}`" if len(names) == 1 else f"nets {_join([f'`{n}`' for n in names])}"
    message = (f"{_join([_describe(p) for p in members])} {verb} a loop through {through}: "
               f"a loop of voltage sources and shorts fixes its voltages twice and leaves "
               f"the current around it undetermined")
    raise _error(system, message, members)


def _find_loop(a: list[int], b: list[int]) -> tuple[list[int], list[int]]:
    """The edges and vertices of the first loop closed while growing a spanning forest."""
    root: dict[int, int] = {}
    adjacency: dict[int, list[tuple[int, int]]] = {}
    for edge, (u, v) in enumerate(zip(a, b)):
        if _find(root, u) == _find(root, v):
            path = _path(adjacency, u, v)
            return [e for e, _ in path] + [edge], sorted({u, *(w for _, w in path)})
        root[_find(root, u)] = _find(root, v)
        adjacency.setdefault(u, []).append((edge, v))
        adjacency.setdefault(v, []).append((edge, u))
    raise AssertionError("a loop was counted but not found")


def _find(root: dict[int, int], vertex: int) -> int:
    """Union-find root of `vertex`, halving paths as it goes."""
    while root.get(vertex, vertex) != vertex:
        root[vertex] = root.get(root[vertex], root[vertex])
        vertex = root[vertex]
    return vertex


def _path(adjacency: dict[int, list[tuple[int, int]]], start: int, goal: int) -> list[tuple[int, int]]:
    """Edges (edge, vertex reached) from `start` to `goal`, which the forest connects."""
    if start == goal:
        return []
    came: dict[int, tuple[int, int]] = {start: (-1, -1)}
    queue = deque([start])
    while queue:
        here = queue.popleft()
        for edge, there in adjacency.get(here, ()):
            if there not in came:
                came[there] = (edge, here)
                if there == goal:
                    return _walk_back(came, goal)
                queue.append(there)
    raise AssertionError("the forest does not connect the two ends")


def _walk_back(came: dict[int, tuple[int, int]], goal: int) -> list[tuple[int, int]]:
    steps, here = [], goal
    while came[here][0] >= 0:
        edge, before = came[here]
        steps.append((edge, here))
        here = before
    return steps[::-1]


def _describe(part: Part) -> str:
    return DEVICES[part.kind].describe(part)


def _join(words: list[str]) -> str:
    """`a`, `a and b`, `a, b and c`, cut after MAX_NAMED with `and N more`."""
    if len(words) > MAX_NAMED:
        words = words[:MAX_NAMED - 1] + [f"{len(words) - MAX_NAMED + 1} more"]
    return words[0] if len(words) == 1 else f"{', '.join(words[:-1])} and {words[-1]}"


def _error(system: System, message: str, parts: list[Part]) -> NoSolutionError:
    netlist = system.netlist
    location: Location | None = next((p.location for p in parts if p.location is not None),
                                     netlist.case_location)
    note = f"in case `{netlist.case}` of circuit `{netlist.circuit}`"
    return NoSolutionError(message, location, (note,))
