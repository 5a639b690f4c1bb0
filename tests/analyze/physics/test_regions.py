"""The graph side of the topology-aware final voltage (analyze.physics.regions).

worst_opening's branch-and-bound is checked against plain enumeration of
every set of high nodes, written out here (networkx for the joined set);
regions and pools against hand-drawn small graphs.
"""

from __future__ import annotations

import itertools

import networkx as nx
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from analyze.physics.regions import SearchLimit, adjacency, pools, regions, worst_opening


@st.composite
def graphs(draw):
    n = draw(st.integers(2, 9))
    edges = [(i, draw(st.integers(0, i - 1))) for i in range(1, n)]
    edges += draw(st.lists(st.tuples(st.integers(0, n - 1), st.integers(0, n - 1)), max_size=4))
    low = [False] + [draw(st.booleans()) for _ in range(n - 1)]
    need = [-draw(st.floats(0.0, 30.0))]
    need += [draw(st.floats(0.0, 30.0)) if low[i] else -draw(st.floats(0.0, 30.0)) for i in range(1, n)]
    return n, edges, low, need


def _bill_by_enumeration(n, edges, low, need):
    """The largest bill over every set of high nodes (not X), by enumeration."""
    g = nx.Graph()
    g.add_nodes_from(range(n))
    g.add_edges_from((a, b) for a, b in edges if a != b)
    high = [i for i in range(1, n) if not low[i]]
    best = -float("inf")
    for k in range(len(high) + 1):
        for taken in itertools.combinations(high, k):
            keep = [i for i in range(n) if i == 0 or low[i] or i in taken]
            comp = nx.node_connected_component(g.subgraph(keep), 0)
            best = max(best, sum(need[i] for i in comp if i))
    return best


@settings(max_examples=300, deadline=None)
@given(graphs())
def test_worst_opening_is_the_largest_bill(case):
    n, edges, low, need = case
    adj = adjacency(n, edges)
    taken, bill = worst_opening(adj, low, need, limit=10_000)
    assert bill == pytest.approx(_bill_by_enumeration(n, edges, low, need), abs=1e-9)
    # The returned set gives that bill.
    g = nx.Graph([(a, b) for a, b in edges if a != b])
    g.add_node(0)
    keep = [i for i in range(n) if i == 0 or low[i] or i in taken]
    comp = nx.node_connected_component(g.subgraph(keep), 0)
    assert sum(need[i] for i in comp if i) == pytest.approx(bill, abs=1e-9)


def test_worst_opening_limit():
    # Eight legs X – high 2k+1 – low 2k+2, each low node needing 10 and its
    # high node able to give 1: opening every leg is worst, 8·(10 − 1).
    n = 1 + 2 * 8
    edges = [(0, 2 * k + 1) for k in range(8)] + [(2 * k + 1, 2 * k + 2) for k in range(8)]
    low = [False] + [k % 2 == 0 for k in range(1, n)]
    need = [-100.0] + [10.0 if k % 2 == 0 else -1.0 for k in range(1, n)]
    adj = adjacency(n, edges)
    with pytest.raises(SearchLimit):
        worst_opening(adj, low, need, limit=5)
    taken, bill = worst_opening(adj, low, need, limit=10_000)
    assert (taken, bill) == (list(range(1, n, 2)), 8 * (10.0 - 1.0))


def test_regions_and_pools_by_hand():
    # X – 1 – 2 – 3 – 4, and 2 – 5, with 1 and 4 high: region {2, 3, 5}
    # between the high nodes 1 and 4, one pool {1, 4} for its need.
    adj = adjacency(6, [(0, 1), (1, 2), (2, 3), (3, 4), (2, 5)])
    low = [False, False, True, True, False, True]
    root, high = regions(adj, low)
    assert root == [0, 1, 2, 2, 4, 2]
    assert high == {2: {1, 4}}
    need = [-5.0, -3.0, 2.0, 4.0, -7.0, 1.0]
    assert pools(adj, low, need) == [([1, 4], 7.0)]
    assert pools(adj, low, need, skip={2, 3, 5}) == []


def test_adjacency_errors():
    with pytest.raises(ValueError, match="outside"):
        adjacency(2, [(0, 5)])
    with pytest.raises(ValueError, match="join every node"):
        adjacency(3, [(0, 1)])
