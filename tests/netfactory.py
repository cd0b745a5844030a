"""Small street networks for the Eulerization tests, built straight from arrays.

Lengths are whole metres or centimetres; with the profile from :func:`metre_profile`
one deadhead minute equals one metre, so costs compare to the metre.
"""
from __future__ import annotations

import networkx as nx
import numpy as np

from crewcut.solve.network.model import SERVICE_BOTH_SIDES, SERVICE_NONE, SERVICE_ONE_PASS, Network
from crewcut.solve.profile import Profile


def metre_profile(ignore_oneway: bool = False) -> Profile:
    """Deadhead at 0.06 km/h (1 minute per metre); service at 0.03 km/h (2 minutes per metre)."""
    return Profile(ignore_oneway=ignore_oneway, service_speed_kmh={"default": 0.03},
                   deadhead_speed_kmh={"default": 0.06})


def make_network(n_nodes: int, u, v, length, *, oneway=None, service=None, closed=None) -> Network:
    u = np.asarray(u, np.int64)
    v = np.asarray(v, np.int64)
    m = u.size
    nan = np.full(n_nodes, np.nan)
    return Network(
        node_lon=nan, node_lat=nan.copy(), node_x=np.zeros(n_nodes), node_y=np.zeros(n_nodes),
        node_label=[str(i) for i in range(n_nodes)], seg_source=[f"s{i}" for i in range(m)],
        seg_u=u, seg_v=v, seg_length=np.asarray(length, np.float64),
        seg_oneway=np.zeros(m, bool) if oneway is None else np.asarray(oneway, bool),
        seg_service=np.full(m, SERVICE_ONE_PASS, np.int8) if service is None else np.asarray(service, np.int8),
        seg_class=["residential"] * m, seg_name=[f"Street {i}" for i in range(m)],
        seg_speed_kmh=np.full(m, np.nan), seg_closed=np.zeros(m, bool) if closed is None else np.asarray(closed, bool),
        seg_coords=[None] * m, has_geometry=False)


def random_connected(rng: np.random.Generator, n: int, extra: float = 0.6) -> tuple[np.ndarray, np.ndarray]:
    """A random connected multigraph: a random spanning tree plus extra edges (parallels possible)."""
    perm = rng.permutation(n)
    parent = perm[rng.integers(0, np.maximum(np.arange(1, n), 1))]
    u = list(perm[1:])
    v = list(parent)
    k = int(extra * n)
    a = rng.integers(0, n, k)
    b = rng.integers(0, n, k)
    keep = a != b
    return np.array(u + a[keep].tolist(), np.int64), np.array(v + b[keep].tolist(), np.int64)


def random_strong(rng: np.random.Generator, n: int, extra: float = 1.0) -> tuple[np.ndarray, np.ndarray]:
    """A random strongly connected digraph: a Hamiltonian cycle plus random arcs."""
    perm = rng.permutation(n)
    u = perm.tolist()
    v = np.roll(perm, -1).tolist()
    k = int(extra * n)
    a = rng.integers(0, n, k)
    b = rng.integers(0, n, k)
    keep = a != b
    return np.array(u + a[keep].tolist(), np.int64), np.array(v + b[keep].tolist(), np.int64)


def augmented_multigraph(tasks, arcs, aug, directed: bool = True):
    """The oriented tasks plus the added arcs as a networkx multigraph."""
    o = np.asarray(aug.orientation, bool)
    t = np.concatenate([np.where(o, tasks.tail, tasks.head), arcs.tail[aug.arcs]])
    h = np.concatenate([np.where(o, tasks.head, tasks.tail), arcs.head[aug.arcs]])
    g = nx.MultiDiGraph() if directed else nx.MultiGraph()
    g.add_edges_from(zip(t.tolist(), h.tolist()))
    return g


def assert_valid(tasks, arcs, aug, depot: int) -> None:
    """The invariant of every Eulerization: balanced, connected, contains the depot, legal arcs."""
    assert aug.orientation.shape == (len(tasks),)
    assert np.all(aug.orientation[tasks.directed]), "a directed task was flipped"
    assert np.all((aug.arcs >= 0) & (aug.arcs < len(arcs)))
    assert abs(aug.cost - float(arcs.minutes[aug.arcs].sum())) < 1e-6 * max(1.0, aug.cost)
    assert aug.lower_bound <= aug.cost + 1e-9
    if len(tasks) == 0:
        return
    g = augmented_multigraph(tasks, arcs, aug)
    g.add_node(depot)
    # networkx's own test: connected and every in-degree equals its out-degree
    assert nx.is_eulerian(g), "augmented multigraph is not Eulerian (or not connected with the depot)"


__all__ = ["SERVICE_BOTH_SIDES", "SERVICE_NONE", "SERVICE_ONE_PASS", "metre_profile", "make_network",
           "random_connected", "random_strong", "augmented_multigraph", "assert_valid"]
