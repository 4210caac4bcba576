"""Random connected linear networks (seeded) against an independent dense solve.

The reference solve in this file does not use modified nodal analysis: it takes
the node voltages as unknowns, meets the voltage-source constraints C v = e with
a null-space basis (v = v_p + N z), and solves the reduced nodal equations
N^T G N z = N^T (s - G v_p) with numpy.linalg; source currents then follow from
Kirchhoff's current law by least squares.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pytest
from scipy.linalg import null_space

from checker.design import Netlist, Part
from checker.solver import solve

SEEDS = range(30)


def two(name, kind, a, b, value=None, unit=None, flags=()):
    return Part(name, kind, (("from", a), ("to", b)), value, unit, frozenset(flags))


@dataclass
class Network:
    nets: list[str]  # nets[0] is ground
    resistors: list[tuple[int, int, float]]
    voltages: list[tuple[int, int, float, str]]  # (a, b, volts, kind): kind source/inductor/switch
    currents: list[tuple[int, int, float]]


def random_network(seed: int) -> Network:
    """A resistor spanning tree plus extra resistors, a forest of voltage sources and shorts, current sources."""
    rng = np.random.default_rng(seed)
    n = int(rng.integers(3, 25))
    order = rng.permutation(n)
    resistors = [(int(order[k]), int(order[rng.integers(0, k)]), 0.0) for k in range(1, n)]
    resistors += [(int(a), int(b), 0.0) for a, b in rng.integers(0, n, size=(int(rng.integers(0, 2 * n)), 2))]
    resistors = [(a, b, float(10 ** rng.uniform(0, 6))) for a, b, _ in resistors]
    root = list(range(n))

    def find(v):
        while root[v] != v:
            v = root[v]
        return v

    voltages = []
    for a, b in rng.integers(0, n, size=(int(rng.integers(0, n)), 2)):
        if find(a) != find(b):
            root[find(a)] = find(b)
            kind = str(rng.choice(["source", "source", "inductor", "switch"]))
            voltages.append((int(a), int(b), float(rng.uniform(-10, 10)) if kind == "source" else 0.0, kind))
    currents = [(int(a), int(b), float(rng.uniform(-1e-2, 1e-2)))
                for a, b in rng.integers(0, n, size=(int(rng.integers(0, 4)), 2))]
    return Network([f"n{k}" if k else "gnd" for k in range(n)], resistors, voltages, currents)


def to_netlist(network: Network) -> Netlist:
    name = network.nets
    parts = [two(f"R{k}", "resistor", name[a], name[b], r, "ohm") for k, (a, b, r) in enumerate(network.resistors)]
    for k, (a, b, e, kind) in enumerate(network.voltages):
        if kind == "source":
            parts.append(two(f"V{k}", "source", name[a], name[b], e, "V"))
        elif kind == "inductor":
            parts.append(two(f"V{k}", "inductor", name[a], name[b], 1e-6, "H"))
        else:
            parts.append(two(f"V{k}", "switch", name[a], name[b], flags={"closed"}))
    parts += [two(f"I{k}", "source", name[a], name[b], i, "A") for k, (a, b, i) in enumerate(network.currents)]
    return Netlist("random", "default", 298.15, "gnd", tuple(parts))


def dense_reference(network: Network) -> tuple[np.ndarray, np.ndarray]:
    """Node voltages (index 0 = ground) and voltage-branch currents, from → to."""
    n = len(network.nets)
    g = np.zeros((n, n))
    for a, b, r in network.resistors:
        g[a, a] += 1 / r
        g[b, b] += 1 / r
        g[a, b] -= 1 / r
        g[b, a] -= 1 / r
    s = np.zeros(n)  # currents pushed into each node by the current sources
    for a, b, i in network.currents:
        s[a] -= i
        s[b] += i
    c = np.zeros((len(network.voltages) + 1, n))
    e = np.zeros(len(network.voltages) + 1)
    for k, (a, b, volts, _) in enumerate(network.voltages):
        c[k, a] += 1
        c[k, b] -= 1
        e[k] = volts
    c[-1, 0] = 1.0  # ground at 0 V
    v_p = np.linalg.lstsq(c, e, rcond=None)[0]
    basis = null_space(c)
    z = np.linalg.solve(basis.T @ g @ basis, basis.T @ (s - g @ v_p))
    v = v_p + basis @ z
    # KCL: G v + C^T j = s; the last multiplier is ground's current, discarded.
    j = np.linalg.lstsq(c.T, s - g @ v, rcond=None)[0]
    return v, j[:-1]


@pytest.mark.parametrize("seed", SEEDS)
def test_random_network_matches_dense_null_space_solve(seed):
    network = random_network(seed)
    op = solve(to_netlist(network))
    v, j = dense_reference(network)
    scale = max(1.0, float(np.max(np.abs(v))))
    got = np.array([op.nets[name] for name in network.nets])
    assert got == pytest.approx(v, abs=1e-9 * scale)
    for k, (a, b, r) in enumerate(network.resistors):
        assert op.parts[f"R{k}"].current == pytest.approx((v[a] - v[b]) / r, abs=1e-9 * scale / r)
    currents = np.array([op.parts[f"V{k}"].current for k in range(len(network.voltages))])
    assert currents == pytest.approx(j, abs=1e-9 * max(1.0, float(np.max(np.abs(j), initial=0))))


@pytest.mark.parametrize("seed", SEEDS)
def test_tellegen_power_sums_to_zero(seed):
    # Tellegen's theorem: sum over branches of v_k i_k = 0 for any network obeying
    # KCL and KVL (B. D. H. Tellegen, Philips Research Reports, 1952).
    op = solve(to_netlist(random_network(seed)))
    powers = np.array([result.power for result in op.parts.values()])
    assert abs(powers.sum()) <= 1e-12 * max(np.abs(powers).sum(), 1e-30)


def _with_only(network: Network, keep: tuple[str, int]) -> Network:
    """The same network with every independent source but one set to zero (shorts stay shorts)."""
    voltages = [(a, b, e if ("v", k) == keep else 0.0, kind) for k, (a, b, e, kind) in enumerate(network.voltages)]
    currents = [(a, b, i if ("i", k) == keep else 0.0) for k, (a, b, i) in enumerate(network.currents)]
    return Network(network.nets, network.resistors, voltages, currents)


@pytest.mark.parametrize("seed", range(12))
def test_superposition(seed):
    # Superposition: the response to all sources is the sum of the responses to
    # each source alone (Hayt, Kemmerly & Durbin, "Engineering Circuit Analysis",
    # 8th ed., 2012, linearity and superposition; chapter from memory).
    network = random_network(seed)
    whole = solve(to_netlist(network)).nets
    keys = [("v", k) for k, item in enumerate(network.voltages) if item[3] == "source"]
    keys += [("i", k) for k in range(len(network.currents))]
    total = np.zeros(len(network.nets))
    for key in keys:
        alone = solve(to_netlist(_with_only(network, key))).nets
        total += np.array([alone[name] for name in network.nets])
    got = np.array([whole[name] for name in network.nets])
    assert got == pytest.approx(total, abs=1e-9 * max(1.0, float(np.max(np.abs(got)))))


@pytest.mark.parametrize("seed", range(12))
def test_reciprocity_of_transfer_resistance(seed):
    # Reciprocity: in a network of resistors, a current injected at node a gives the
    # same voltage at node b as the same current injected at b gives at a (Alexander
    # & Sadiku, "Fundamentals of Electric Circuits", 5th ed., 2013; from memory).
    network = random_network(seed)
    bare = Network(network.nets, network.resistors, [], [])
    a, b = 1, len(network.nets) - 1

    def voltage_at(target: int, inject: int) -> float:
        driven = Network(bare.nets, bare.resistors, [], [(0, inject, 1e-3)])
        return solve(to_netlist(driven)).nets[network.nets[target]]

    assert voltage_at(b, a) == pytest.approx(voltage_at(a, b), rel=1e-10)
