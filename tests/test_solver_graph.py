"""The solvers' one graph type (service.solvers.graph) against outside references.

References: networkx (descendants, strongly/weakly connected components, shortest
path lengths for breadth-first layers) and the definition of the residual network
(an arc with room left is residual forward; one carrying flow is residual backward).
"""

from __future__ import annotations

import dataclasses

import networkx as nx
import numpy as np
import pytest

from service.kinds.base import graph_of
from service.model.arcs import read_network
from service.solvers.graph import (
    BACKWARD, FORWARD, Graph, bfs_depth, bfs_predecessors, bfs_tree, components, max_degree, node_balance, reach,
    residual_arcs, residual_network, residual_reach,
)


def random_arcs(seed: int, n: int = 40, m: int = 120):
    rng = np.random.default_rng(seed)
    tail, head = rng.integers(0, n, m), rng.integers(0, n, m)  # parallel arcs and loops included
    return n, tail.astype(np.int64), head.astype(np.int64), rng


def digraph(n, src, dst) -> nx.MultiDiGraph:
    g = nx.MultiDiGraph()
    g.add_nodes_from(range(n))
    g.add_edges_from(zip(src.tolist(), dst.tolist()))
    return g


@pytest.mark.parametrize("seed", range(6))
def test_reach_and_both_searches_agree_with_networkx(seed):
    n, tail, head, _ = random_arcs(seed)
    g = digraph(n, tail, head)
    expected = {0} | nx.descendants(g, 0)
    assert set(np.flatnonzero(reach(n, tail, head, 0)).tolist()) == expected
    parent, reached = bfs_tree(n, tail, head, 0)
    assert set(np.flatnonzero(reached).tolist()) == expected
    depth = nx.single_source_shortest_path_length(g, 0)
    for v in expected - {0}:  # each tree arc ends at v and starts one layer closer
        k = int(parent[v])
        assert head[k] == v and depth[int(tail[k])] == depth[v] - 1
    pred = bfs_predecessors(n, tail, head, 0)
    for v in expected - {0}:
        assert depth[int(pred[v])] == depth[v] - 1 and g.has_edge(int(pred[v]), v)
    assert all(pred[v] < 0 for v in set(range(n)) - expected)


@pytest.mark.parametrize("seed", range(6))
def test_bfs_depth_from_several_starts_agrees_with_networkx(seed):
    # networkx: multi_source_dijkstra_path_length with unit weights is the breadth-first
    # distance from the nearest start.
    n, tail, head, rng = random_arcs(seed, m=70)
    starts = [int(v) for v in rng.integers(0, n, 3)] + [0, 0]  # repeats allowed
    g = nx.DiGraph()
    g.add_nodes_from(range(n))
    g.add_edges_from(zip(tail.tolist(), head.tolist()))
    expected = nx.multi_source_dijkstra_path_length(g, set(starts), weight=lambda u, v, d: 1)
    depth = bfs_depth(n, tail, head, starts)
    assert {v: int(depth[v]) for v in range(n) if depth[v] >= 0} == expected
    assert (depth >= -1).all() and Graph(n, tail, head).depth(starts).tolist() == depth.tolist()
    assert bfs_depth(n, tail, head, []).tolist() == [-1] * n


def test_bfs_tree_stops_at_its_target():
    tail, head = np.array([0, 1, 2]), np.array([1, 2, 3])
    _, reached = bfs_tree(4, tail, head, 0, target=1)
    assert reached.tolist() == [True, True, False, False]


@pytest.mark.parametrize("seed", range(4))
def test_components_agree_with_networkx(seed):
    n, tail, head, _ = random_arcs(seed, m=60)
    g = digraph(n, tail, head)
    for strong, reference in ((True, nx.strongly_connected_components(g)), (False, nx.weakly_connected_components(g))):
        count, labels = components(n, tail, head, strong=strong)
        groups = {frozenset(np.flatnonzero(labels == c).tolist()) for c in range(count)}
        assert groups == {frozenset(c) for c in reference}


def test_node_balance_and_degree_by_hand():
    # 0 -> 1 carries 3, 1 -> 2 carries 2, 0 -> 2 carries 1: node 1 keeps 1, node 2 gets 3.
    tail, head, flows = np.array([0, 1, 0]), np.array([1, 2, 2]), np.array([3, 2, 1])
    assert node_balance(3, tail, head, flows).tolist() == [-4, 1, 3]
    big = np.array([2**70, 2**70, 0], dtype=object)  # exact beyond int64
    assert node_balance(3, tail, head, big).tolist() == [-2**70, 0, 2**70]
    assert max_degree(3, tail, head) == 2 and max_degree(3, tail[:0], head[:0]) == 0
    g = Graph(3, tail, head, np.array([3, 5, 1]), np.array([False, False, True]))
    assert g.balance(flows).tolist() == [-4, 1, 3] and g.max_degree() == 2 and g.limited.tolist() == [0, 1]


@pytest.mark.parametrize("seed", range(4))
def test_residual_network_follows_its_definition(seed):
    n, tail, head, rng = random_arcs(seed)
    capacity = rng.integers(0, 5, tail.size)
    flows = np.minimum(capacity, rng.integers(0, 5, tail.size))
    unlimited = rng.random(tail.size) < 0.1
    res, _ = residual_network(tail, head, capacity, unlimited, None, flows)
    expected = {(e, FORWARD) for e in range(tail.size) if flows[e] < capacity[e] or unlimited[e]}
    expected |= {(e, BACKWARD) for e in range(tail.size) if flows[e] > 0}
    assert set(zip(res.arc.tolist(), res.direction.tolist())) == expected
    forward = res.direction == FORWARD
    assert (res.src[forward] == tail[res.arc[forward]]).all() and (res.src[~forward] == head[res.arc[~forward]]).all()
    assert np.isinf(res.room[forward & unlimited[res.arc]]).all()
    src, dst = residual_arcs(tail, head, capacity, unlimited, flows)
    assert sorted(zip(src.tolist(), dst.tolist())) == sorted(zip(res.src.tolist(), res.dst.tolist()))
    g = Graph(n, tail, head, capacity, unlimited)
    assert (g.residual_reach(flows, 0) == reach(n, res.src, res.dst, 0)).all()
    assert (g.residual(flows).arc == res.arc).all()
    assert (residual_reach(n, tail, head, flows, capacity, unlimited, 0) == g.residual_reach(flows, 0)).all()


def test_graph_residual_takes_its_lower_bounds():
    # Definition of the residual network with lower bounds: flow above the lower bound
    # can be taken back, so an arc at its lower bound has no backward residual arc.
    tail, head = np.array([0, 1]), np.array([1, 2])
    capacity, lower, flows = np.array([5, 5]), np.array([2, 0]), np.array([2, 2])
    g = Graph(3, tail, head, capacity, lower=lower)
    pairs = set(zip(g.residual(flows).arc.tolist(), g.residual(flows).direction.tolist()))
    assert pairs == {(0, FORWARD), (1, FORWARD), (1, BACKWARD)}
    assert set(zip(g.replace(lower=None).residual(flows).arc.tolist(),
                   g.replace(lower=None).residual(flows).direction.tolist())) == pairs | {(0, BACKWARD)}


def test_graph_shares_arrays_and_stays_frozen():
    # Building or replacing a Graph copies no array (a 1M-arc solve pays nothing for it),
    # and a Graph cannot be changed in place.
    net, _ = read_network([{"from": "a", "to": "b", "capacity": 3, "cost": 2},
                           {"from": "b", "to": "c", "capacity": 4, "lower": 1}], None, max_arcs=10, max_nodes=10)
    g = graph_of(net)
    assert g.num_nodes == net.num_nodes == 3
    for name in ("tail", "head", "capacity", "unlimited", "cost", "lower"):
        assert getattr(g, name) is getattr(net, name)
    doubled = g.replace(capacity=g.capacity * 2)
    assert doubled.tail is g.tail and doubled.cost is g.cost and doubled.capacity.tolist() == [6, 8]
    assert g.capacity.tolist() == [3, 4]
    with pytest.raises(dataclasses.FrozenInstanceError):
        g.tail = g.head
