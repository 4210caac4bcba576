"""Many samples of one nonlinear case solved by Newton-Raphson on all of them at once.

The case's assembled system is tiled `count` times (`Tiled`): every device object holds
the parts of all blocks, so one `evaluate` call linearises every sample, and the unknowns
are block-major (unknown k of block b is b x size + k), so the Jacobian of the batch is
block-diagonal and is kept as `count` dense size x size blocks, solved by one stacked
LAPACK call (`numpy.linalg.solve`). A tolerance moves a value array of a device (a
conductance, a source value, a regulator's `vout`), never a part object; that each moved
value lands where the device's own constructor would put it is checked once per case
against an assembled perturbed netlist (`Tiled.of` returns None otherwise, and the
caller solves sample by sample).

Each sample is Newton-Raphson from the case's nominal operating point (a warm start) with
the ordinary solver's damping (the devices' junction limiting), convergence test and
iteration limit (`WARM_ITERATIONS`); a converged sample leaves the stacked solve. Every
converged sample is then checked as `checker.solver.selfcheck` checks an ordinary solve
(each net's KCL sum, each branch equation, the power balance, against the same
tolerances), all samples at once. For a circuit that could have several stable states, each
sample is screened for stability (`stable_screen`): the determinant of D J and the finite
modes of the nets' charge, as `checker.solver.stability.assess` judges them, with margins
so that the screen passes only points that `assess` would call stable. A sample that does
not converge, fails its self-check or is not surely stable is `left` for the ordinary
solver (`checker.analysis.blocks.solve_each`: full fallback, `stable_near`, the solver's own
message when there is no operating point).
"""

from __future__ import annotations

import copy as copy_module
import dataclasses
from typing import Sequence

import numpy as np

from checker.analysis.stacked import LazyMap, PartArrays, PartValues, Stacked
from checker.analysis.tolerances import Tolerance, perturbed
from checker.design import Netlist, OperatingPoint
from checker.devices.base import GROUND, LinearTwoTerminal
from checker.solver import Cache
from checker.solver.assembly import System, assemble
from checker.solver.newton import (CURRENT_FLOOR, DIVERGED, RELATIVE_TOLERANCE, VOLTAGE_FLOOR,
                                   WARM_ITERATIONS)
from checker.solver.results import warm_start
from checker.solver.selfcheck import KCL_RELATIVE, KCL_RELATIVE_FLOOR
from checker.solver.stability import FOLD, GROWTH, branch_flips
from checker.solver.states import may_have_several

DENSE_SIZE = 400  # unknowns: above this a sample's dense Jacobian costs more than the ordinary sparse solve
SCREEN_MARGIN = 0.5  # the stability screen's growth bound is this share of `assess`'s
FOLD_MARGIN = 2.0  # ... and its fold bound this multiple of it
SHIFT = 0.618  # the shift of the pencil's eigenvalue problem, of the largest conductance at a net
INFINITE = 1e-13  # a shifted eigenvalue below this share of the largest is an infinite mode (a branch) ...
CLEAR = 1e-7  # ... and one up to this share is not told apart from a fast mode: the sample asks the solver


@dataclasses.dataclass
class Solved:
    """A batch: unknowns (count, size), which samples are solved and checked (`ok`), and the
    devices' pin currents at every sample (for the limits' part results)."""

    x: np.ndarray
    ok: np.ndarray
    currents: list[np.ndarray]


class Tiled:
    """`count` copies of one case's system, unknowns block-major, with movable toleranced values."""

    def __init__(self, system: System, tolerances: Sequence[Tolerance], count: int, built: bool = False):
        self.system, self.tolerances, self.count = system, tuple(tolerances), count
        self.size, self.nodes = system.size, system.n_nodes
        offsets = np.arange(count) * self.size
        self.devices = [(_built if built else _tiled)(device, count, offsets) for device in system.devices]
        # What a fresh device leaves unset may be a cache it fills on first use (from its values): cleared
        # whenever the values move.
        self._lazy = [[name for name, value in vars(device).items() if value is None] for device in self.devices]
        topology = system.topology
        positions = {part.name: m for m, part in enumerate(system.netlist.parts)}
        self._where = {name: (int(topology.group_of[m]), int(topology.row_of[m])) for name, m in positions.items()}
        self._moves = []  # per tolerance: device index, attribute, row, nominal value, inverse law
        for t in self.tolerances:
            group, row = self._where[t.part]
            device = system.devices[group]
            part = system.netlist.parts[positions[t.part]]
            attribute = "vout" if t.prop == "vout" else "value"
            inverse = attribute == "value" and part.value_unit == "ohm"
            self._moves.append((group, attribute, row, float(getattr(device, attribute)[row]), inverse))

    @classmethod
    def of(cls, netlist: Netlist, tolerances: Sequence[Tolerance], cache: Cache, count: int) -> "Tiled | None":
        """The tiled system of a nonlinear case whose toleranced values move device arrays as `move` does
        (checked at +tol against the assembled perturbed netlist); None otherwise."""
        system = assemble(netlist, cache.topology(netlist))
        if not system.nonlinear_devices or system.size > DENSE_SIZE or not all(_movable(system, t) for t in tolerances):
            return None
        if not all(_same(vars(a), vars(b)) for a, b in zip(cls(system, (), 2).devices,
                                                           cls(system, (), 2, built=True).devices)):
            return None  # some device keeps state that is not one entry per part: build it, part by part
        probe = cls(system, tolerances, 1)
        fractions = np.array([[t.fraction for t in tolerances]])
        probe.move(fractions)
        moved = perturbed(netlist, {t.part: t.fraction for t in tolerances})
        expected = assemble(moved, cache.topology(moved))
        if not all(_same(vars(a), vars(b)) for a, b in zip(probe.devices, expected.devices)):
            return None
        return cls(system, tolerances, count)

    def move(self, deviations: np.ndarray) -> None:
        """Set every block's toleranced values: row b of `deviations` (count, k) is block b's."""
        rows = np.arange(self.count)
        for device, lazy in zip(self.devices, self._lazy):
            for name in lazy:
                setattr(device, name, None)
        for j, (group, attribute, row, nominal, inverse) in enumerate(self._moves):
            device = self.devices[group]
            factor = 1.0 + deviations[:, j]
            parts = len(self.system.devices[group].parts)
            getattr(device, attribute)[rows * parts + row] = nominal / factor if inverse else nominal * factor

    def _constant(self) -> tuple[np.ndarray, np.ndarray]:
        """The linear stamps of every block as dense (count, size, size) matrices and (count, size) sources."""
        n, count = self.size, self.count
        entries, values, rows, injected = [], [], [], []
        for device in self.devices:
            stamp = device.matrix()
            keep = (stamp.rows >= 0) & (stamp.cols >= 0)
            entries.append(_flat(stamp.rows[keep], stamp.cols[keep], n))
            values.append(stamp.values[keep])
            injection = device.sources()
            keep = injection.rows >= 0
            rows.append(injection.rows[keep])
            injected.append(injection.values[keep])
        matrix = np.bincount(np.concatenate(entries), np.concatenate(values), count * n * n)
        rhs = np.bincount(np.concatenate(rows), np.concatenate(injected), count * n)
        return matrix.reshape(count, n, n), rhs.reshape(count, n)

    def linearise(self, x: np.ndarray, matrix: np.ndarray, rhs: np.ndarray, magnitude: np.ndarray):
        """F, J (dense blocks) and each row's scale at every block's x, as `Equations.linearise`."""
        n, count = self.size, self.count
        x_ext = np.append(x.ravel(), 0.0)
        residual = np.einsum("bij,bj->bi", matrix, x) - rhs
        row_scale = np.einsum("bij,bj->bi", magnitude, np.abs(x)) + np.abs(rhs)
        rows, currents, entries, values = [], [], [], []
        for device in self.devices:
            if not device.nonlinear:
                continue
            s = device.evaluate(x_ext)
            keep = s.rows >= 0
            rows.append(s.rows[keep])
            currents.append(s.currents[keep])
            keep = (s.jacobian.rows >= 0) & (s.jacobian.cols >= 0)
            entries.append(_flat(s.jacobian.rows[keep], s.jacobian.cols[keep], n))
            values.append(s.jacobian.values[keep])
        residual, row_scale = residual.ravel(), row_scale.ravel()
        jacobian = matrix.ravel()
        if rows:  # every device's entries in one pass
            rows_all, currents_all = np.concatenate(rows), np.concatenate(currents)
            residual += np.bincount(rows_all, currents_all, count * n)
            row_scale += np.bincount(rows_all, np.abs(currents_all), count * n)
            jacobian = jacobian + np.bincount(np.concatenate(entries), np.concatenate(values), count * n * n)
        return residual.reshape(count, n), jacobian.reshape(count, n, n), row_scale.reshape(count, n)

    def limit(self, new: np.ndarray, old: np.ndarray) -> np.ndarray:
        a, b = np.append(new.ravel(), 0.0), np.append(old.ravel(), 0.0)
        for device in self.devices:
            if device.nonlinear:
                a = device.limit(a, b)
        return a[:-1].reshape(new.shape)

    def solve(self, deviations: np.ndarray, start: np.ndarray) -> Solved:
        """Newton-Raphson on every block from `start` (the nominal unknowns), then the self-check and,
        where the circuit could have several states, the stability screen."""
        self.move(deviations)
        matrix, rhs = self._constant()
        magnitude = np.abs(matrix)
        count, n = self.count, self.size
        x = np.tile(start, (count, 1))
        active = np.ones(count, bool)
        converged = np.zeros(count, bool)
        is_node = np.arange(n) < self.nodes
        step_tol = np.where(is_node, VOLTAGE_FLOOR, CURRENT_FLOOR)
        residual_tol = np.where(is_node, CURRENT_FLOOR, VOLTAGE_FLOOR)
        with np.errstate(all="ignore"):
            for _ in range(WARM_ITERATIONS):
                residual, jacobian, row_scale = self.linearise(x, matrix, rhs, magnitude)
                active &= np.all(np.isfinite(residual), axis=1)
                rows = np.flatnonzero(active)
                if not rows.size:
                    break
                step, solvable = _stacked_solve(jacobian[rows], -residual[rows])
                target = x.copy()
                target[rows] += step
                new = self.limit(target, x)
                fine = solvable & np.all(np.isfinite(new[rows]), axis=1) & (np.max(np.abs(new[rows]), axis=1) <= DIVERGED)
                done = fine & np.all(np.abs(new[rows] - x[rows]) <= step_tol + RELATIVE_TOLERANCE * np.abs(new[rows]), axis=1)
                done &= np.all(np.abs(residual[rows]) <= residual_tol + RELATIVE_TOLERANCE * row_scale[rows], axis=1)
                x[rows[fine]] = new[rows[fine]]
                converged[rows[done]] = True
                active[rows[~fine | done]] = False
                if not active.any():
                    break
            currents = [device.pin_currents(np.append(x.ravel(), 0.0)) for device in self.devices]
            ok = converged & self.self_check(x, matrix, rhs, magnitude, currents)
            if may_have_several(self.system.netlist) and ok.any():
                _, jacobian, _ = self.linearise(x, matrix, rhs, magnitude)
                ok &= stable_screen(self.system, jacobian)
        return Solved(x, ok, currents)

    def self_check(self, x: np.ndarray, matrix: np.ndarray, rhs: np.ndarray, magnitude: np.ndarray,
                   currents: list[np.ndarray]) -> np.ndarray:
        """Per block, what `selfcheck.check` requires of an ordinary solve: every net's KCL sum, every
        branch equation and the power balance within their tolerances."""
        count, n, nodes = self.count, self.size, self.nodes
        x_ext = np.append(x.ravel(), 0.0)
        linear_terms = np.einsum("bij,bj->bi", magnitude, np.abs(x)) + np.abs(rhs)
        slots, flows, nonlinear = [], [], []
        power, scale = np.zeros(count), np.zeros(count)
        for device in self.devices:
            parts = len(device.parts) // count
            block = np.repeat(np.arange(count), parts)[:, None] * np.ones(device.nodes.shape[1], int)
            local = np.where(device.nodes < 0, nodes, device.nodes - block * n)
            slot = (block * (nodes + 1) + local).ravel()
            flow = currents[len(slots)].ravel()
            slots.append(slot)
            flows.append(flow)
            nonlinear.append(device.nonlinear)
            pin_power = x_ext[device.nodes.ravel()] * flow
            power += np.bincount(block.ravel(), pin_power, count)
            scale += np.bincount(block.ravel(), np.abs(pin_power), count)
        slot, flow = np.concatenate(slots), np.concatenate(flows)
        sums = np.bincount(slot, flow, count * (nodes + 1)).reshape(count, nodes + 1)
        size = np.zeros((count, nodes + 1))
        size[:, :nodes] = linear_terms[:, :nodes]
        if any(nonlinear):
            picked = np.concatenate([np.full(s.size, k) for k, s in zip(nonlinear, slots)]).astype(bool)
            size += np.bincount(slot[picked], np.abs(flow[picked]), count * (nodes + 1)).reshape(count, nodes + 1)
        ground = np.bincount(slot, np.abs(flow), count * (nodes + 1)).reshape(count, nodes + 1)[:, nodes]
        size[:, nodes] = ground
        tolerance = KCL_RELATIVE * size + KCL_RELATIVE_FLOOR * np.max(size, axis=1, initial=0.0)[:, None]
        tolerance[:, nodes] += tolerance[:, :nodes].sum(axis=1)
        ok = np.all(np.abs(sums) <= tolerance, axis=1)
        power_tolerance = KCL_RELATIVE * scale + np.einsum("bk,bk->b", np.abs(x[:, :nodes]), tolerance[:, :nodes])
        ok &= np.abs(power) <= power_tolerance
        if n > nodes:  # branch equations
            residual, _, _ = self.linearise(x, matrix, rhs, magnitude)
            terms = linear_terms.ravel().copy()
            for device in self.devices:
                if device.nonlinear and device.n_branches:
                    s = device.evaluate(x_ext)
                    keep = s.rows >= 0
                    terms += np.bincount(s.rows[keep], np.abs(s.currents[keep]), count * n)
            terms = terms.reshape(count, n)[:, nodes:]
            floor = KCL_RELATIVE_FLOOR * np.max(np.abs(x[:, :nodes]), axis=1, initial=0.0)
            ok &= np.all(np.abs(residual[:, nodes:]) <= KCL_RELATIVE * terms + floor[:, None], axis=1)
        return ok

    def stacked(self, solved: Solved, deviations: np.ndarray, rows: np.ndarray) -> Stacked:
        """The values the limits read at blocks `rows` of a solved batch."""
        system, count = self.system, self.count
        x = solved.x[rows]
        points = len(rows)
        x_ext = np.concatenate([x, np.zeros((points, 1))], axis=1)
        nets = {name: number for number, name in enumerate(system.nets[1:])}
        ground = system.nets[0]
        index = {t.part: j for j, t in enumerate(self.tolerances)}

        def net(name: str) -> np.ndarray:
            return np.zeros(points) if name == ground else x[:, nets[name]]

        def result(name: str) -> PartArrays:
            group, row = self._where[name]
            device = system.devices[group]
            parts = len(device.parts)
            currents = solved.currents[group].reshape(count, parts, -1)[rows, row, :]
            volts = x_ext[:, device.nodes[row]]
            by_pin = {pin: currents[:, k] for k, pin in enumerate(device.pins)}
            if device.pins == ("from", "to"):
                voltage = volts[:, 0] - volts[:, 1]
                return PartArrays(voltage * currents[:, 0] + 0.0, by_pin, voltage, currents[:, 0])
            return PartArrays((volts * currents).sum(axis=1) + 0.0, by_pin)

        declared = {part.name: part for part in system.netlist.parts}

        def part(name: str) -> PartValues:
            p = declared[name]
            j = index.get(name)
            if j is None:
                return PartValues(p.value, dict(p.props))
            factor = 1.0 + deviations[rows, j]
            if self.tolerances[j].prop == "vout":
                return PartValues(p.value, {**p.props, "vout": p.props["vout"] * factor})
            return PartValues(p.value * factor, dict(p.props))

        return Stacked(system.netlist.case, system.netlist.ambient, points, LazyMap(net, set(system.nets).__contains__),
                       LazyMap(result, self._where.__contains__), LazyMap(part, declared.__contains__))


def _built(device, count: int, offsets: np.ndarray):
    """`device` for `count` blocks, by its own constructor (the reference `_tiled` is checked against)."""
    nodes = np.where(device.nodes[None] < 0, GROUND, device.nodes[None] + offsets[:, None, None])
    copy = type(device)(device.parts * count, nodes.reshape(-1, device.nodes.shape[1]), 0, device.ambient)
    return _numbered(copy, device, offsets)


def _tiled(device, count: int, offsets: np.ndarray):
    """`device` for `count` blocks without its constructor: every per-part array repeated per block."""
    copy = copy_module.copy(device)
    parts = len(device.parts)
    for name, value in vars(device).items():
        if name != "parts":
            setattr(copy, name, _repeat(value, parts, count))
    copy.parts = device.parts * count
    copy.n_branches = device.n_branches * count
    copy.nodes = np.where(device.nodes[None] < 0, GROUND, device.nodes[None] + offsets[:, None, None]).reshape(
        -1, device.nodes.shape[1])
    return _numbered(copy, device, offsets)


def _numbered(copy, device, offsets: np.ndarray):
    """Branch unknowns renumbered block-major, as the nets are."""
    branch = getattr(device, "branch", None)
    if branch is not None:
        copy.branch = np.where(branch[None] < 0, GROUND, branch[None] + offsets[:, None]).ravel()
    return copy


def _repeat(value, parts: int, count: int):
    if isinstance(value, np.ndarray):
        return np.tile(value, (count,) + (1,) * (value.ndim - 1)) if value.ndim and len(value) == parts else value
    if isinstance(value, (list, tuple)) and not isinstance(value, str):
        return type(value)(_repeat(v, parts, count) for v in value)
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        return dataclasses.replace(value, **{f.name: _repeat(getattr(value, f.name), parts, count)
                                             for f in dataclasses.fields(value) if f.init})
    return value


def start_of(tiled: Tiled, point: OperatingPoint) -> np.ndarray:
    """Where every block's Newton-Raphson starts: the case's nominal unknowns."""
    return warm_start(tiled.system, point)


def stable_screen(system: System, jacobian: np.ndarray) -> np.ndarray:
    """Per block: surely stable by `stability.assess`'s tests (determinant of D J positive, no mode of
    the nets' charge growing, no fold), with margins; False means "ask the ordinary solver"."""
    flips = branch_flips(system)
    passive = flips[None, :, None] * jacobian
    count, size, nodes = len(jacobian), system.size, system.n_nodes
    masses = (np.arange(size) < nodes).astype(float)
    with np.errstate(all="ignore"):
        sign, _ = np.linalg.slogdet(passive)
        diagonal = np.abs(np.diagonal(passive, axis1=1, axis2=2)[:, :nodes])
        scale = 1.0 + np.max(diagonal, axis=1, initial=0.0)
        # Finite eigenvalues λ of the pencil (−D J, M) by a shift: μ = eig((−D J − σM)⁻¹ M), λ = σ + 1/μ,
        # an infinite λ (a branch row) giving μ = 0.
        shift = -SHIFT * scale
        shifted = -passive - shift[:, None, None] * masses[None, None, :] * np.eye(size)[None]
        inverse, solvable = _stacked_solve(shifted, np.broadcast_to(np.diag(masses), (count, size, size)), columns=True)
        mu = np.linalg.eigvals(np.where(solvable[:, None, None], inverse, 0.0))
        size_mu = np.max(np.abs(mu), axis=1, initial=0.0)
        small = np.abs(mu) <= INFINITE * size_mu[:, None]
        unclear = (np.abs(mu) > INFINITE * size_mu[:, None]) & (np.abs(mu) <= CLEAR * size_mu[:, None])
        finite = np.where(small, np.nan, shift[:, None] + 1.0 / np.where(small, 1.0, mu))
        magnitude = np.where(small, np.nan, np.abs(finite))
        largest = np.maximum(np.nanmax(np.where(small, 0.0, magnitude), axis=1, initial=0.0),
                             np.max(diagonal, axis=1, initial=0.0))
        growth = np.nanmax(np.where(small, -np.inf, finite.real), axis=1, initial=-np.inf)
        slowest = np.nanmin(np.where(small, np.inf, magnitude), axis=1, initial=np.inf)
    return (solvable & (sign > 0) & ~unclear.any(axis=1) & (growth <= SCREEN_MARGIN * GROWTH * largest)
            & (slowest > FOLD_MARGIN * FOLD * largest) & np.isfinite(largest) & np.all(np.isfinite(mu), axis=1))


def _flat(rows: np.ndarray, cols: np.ndarray, n: int) -> np.ndarray:
    """Index into the dense blocks (count, n, n) of an entry at block-major unknowns (rows, cols)."""
    return rows * n + cols - (rows // n) * n


def _stacked_solve(matrices: np.ndarray, rhs: np.ndarray, columns: bool = False) -> tuple[np.ndarray, np.ndarray]:
    """Every block's solution and whether it had one (a singular block gets zeros and False); `rhs`
    (blocks, n), or (blocks, n, m) with `columns`."""
    try:
        if columns:
            return np.linalg.solve(matrices, rhs), np.ones(len(rhs), bool)
        return np.linalg.solve(matrices, rhs[:, :, None])[:, :, 0], np.ones(len(rhs), bool)
    except np.linalg.LinAlgError:
        out, fine = np.zeros_like(rhs), np.ones(len(rhs), bool)
        for k in range(len(rhs)):
            try:
                out[k] = np.linalg.solve(matrices[k], rhs[k])
            except np.linalg.LinAlgError:
                fine[k] = False
        return out, fine


def _movable(system: System, tolerance: Tolerance) -> bool:
    """A tolerance this module can move in place: a linear two-terminal part's value, a `vout`."""
    for device, positions in zip(system.devices, system.positions):
        names = {device.parts[k].name for k in range(len(device.parts))}
        if tolerance.part in names:
            if tolerance.prop == "vout":
                return hasattr(device, "vout")
            return isinstance(device, LinearTwoTerminal)
    return False


def _same(a, b) -> bool:
    """Device state compared attribute by attribute (arrays to 1e-12 relative; parts not compared)."""
    if isinstance(a, dict):
        return a.keys() == b.keys() and all(_same(a[k], b[k]) for k in a if k not in ("parts", "first_branch"))
    if isinstance(a, np.ndarray) or isinstance(b, np.ndarray):
        a, b = np.asarray(a), np.asarray(b)
        if a.shape != b.shape:
            return False
        if a.dtype.kind in "fc":
            return bool(np.allclose(a, b, rtol=1e-12, atol=0.0, equal_nan=True))
        return bool(np.array_equal(a, b))
    if isinstance(a, (list, tuple)):
        return len(a) == len(b) and all(_same(x, y) for x, y in zip(a, b))
    if dataclasses.is_dataclass(a) and not isinstance(a, type):
        return _same(vars(a), vars(b))
    return bool(a == b) or (a != a and b != b)
