"""Regions of low nodes in a network of conducting devices, and who feeds them.

The graph side of :func:`analyze.physics.redistribution.network_final_voltage`.
Nodes are numbered ``0..n-1``; node 0 is the dynamic node X.  ``adj`` is a
list of neighbour sets (:func:`adjacency`), ``low`` a list of bools (the
nodes that end at the pass limit: discharged nodes, and nodes that ran
out), ``need`` per node the charge it must receive to end at the pass
limit (positive for a discharged node, negative, the charge it can give,
for X and a precharged node).  A *region* is a connected set of low nodes;
a device between two high nodes does not conduct, so a region is fed only
by the high nodes next to it.

Every function here is pure and works on plain lists; costs are
O(nodes + edges) but for :func:`worst_opening`.
"""

from __future__ import annotations

import math

__all__ = ["SearchLimit", "adjacency", "regions", "joined", "worst_opening", "pools"]


class SearchLimit(Exception):
    """:func:`worst_opening` looked at more sets than it was allowed."""


def _find(parent: list[int], i: int) -> int:
    """Root of ``i`` in a union-find forest (path halving)."""
    while parent[i] != i:
        parent[i] = parent[parent[i]]
        i = parent[i]
    return i


def _union(parent: list[int], i: int, j: int) -> None:
    ri, rj = _find(parent, i), _find(parent, j)
    if ri != rj:
        parent[max(ri, rj)] = min(ri, rj)


def adjacency(n: int, edges) -> list[set[int]]:
    """Neighbour sets of ``n`` nodes joined by ``edges`` (loops dropped).

    Raises
    ------
    ValueError
        For an edge naming a node outside ``0..n-1``, or a node that the
        edges do not join to node 0.

    Examples
    --------
    >>> adjacency(3, [(0, 1), (1, 2), (2, 2)])
    [{1}, {0, 2}, {1}]
    """
    adj: list[set[int]] = [set() for _ in range(n)]
    for i, j in edges:
        if not (0 <= i < n and 0 <= j < n):
            raise ValueError(f"edge {(i, j)} names a node outside 0..{n - 1}")
        if i != j:
            adj[i].add(j)
            adj[j].add(i)
    if len(joined(adj, [True] * n)) != n:
        raise ValueError("the edges must join every node to node 0")
    return adj


def joined(adj, open_) -> set[int]:
    """Nodes joined to node 0 through nodes with ``open_[i]`` true.

    Examples
    --------
    >>> sorted(joined([{1}, {0, 2}, {1}], [False, True, False]))
    [0, 1]
    """
    seen, stack = {0}, [0]
    while stack:
        for j in adj[stack.pop()]:
            if open_[j] and j not in seen:
                seen.add(j)
                stack.append(j)
    return seen


def regions(adj, low) -> tuple[list[int], dict[int, set[int]]]:
    """The region of every node and the high neighbours of every region.

    Returns
    -------
    root : list of int
        Per node, the smallest node of its region (itself for a high node).
    high : dict of int to set of int
        Per region (by root), its high neighbours.

    Examples
    --------
    X – 1 – 2 – 3 with 1 high: regions {2, 3} (fed by 1) and nothing else.

    >>> regions([{1}, {0, 2}, {1, 3}, {2}], [False, False, True, True])
    ([0, 1, 2, 2], {2: {1}})
    """
    region = list(range(len(adj)))
    for i, nbrs in enumerate(adj):
        if low[i]:
            for j in nbrs:
                if low[j]:
                    _union(region, i, j)
    root = [_find(region, i) for i in range(len(adj))]
    high: dict[int, set[int]] = {}
    for i, nbrs in enumerate(adj):
        if low[i]:
            high.setdefault(root[i], set()).update(j for j in nbrs if not low[j])
    return root, high


def worst_opening(adj, low, need, limit: int) -> tuple[list[int], float]:
    """The high nodes whose running out makes X (high) pay most.

    X pays for the low nodes joined to it through low nodes.  A set S of
    high nodes (not X) that run out first, each drained by the low nodes
    behind it while the others give nothing, joins what lies behind them
    to X, less their own charge.

    Parameters
    ----------
    adj, low, need
        As in the module text; ``low[0]`` must be False.
    limit : int
        Most sets to look at.

    Returns
    -------
    S : list of int
        Sorted; the first found among equals.
    bill : float
        ``Σ need`` over the nodes other than X joined to X through low
        nodes and S, the largest over every S.

    Raises
    ------
    SearchLimit
        After ``limit`` sets.

    Notes
    -----
    A maximum-weight connected node set containing X (NP-hard in general;
    the sets here are small).  Branch-and-bound, depth first, over the
    high nodes next to the joined set, each first taken, then left out for
    good; a branch is dropped when its bill plus the positive need of the
    regions it could still join is no better than the best.  A chain of
    high nodes costs one set per node, a high node with nothing low behind
    it none.

    Examples
    --------
    X – P – D with D needing 24 and P able to give 6: X pays 18 once P has
    run out.  With P able to give 30, the best is that P never runs out.

    >>> adj = [{1}, {0, 2}, {1}]
    >>> worst_opening(adj, [False, False, True], [-30.0, -6.0, 24.0], 100)
    ([1], 18.0)
    >>> worst_opening(adj, [False, False, True], [-30.0, -30.0, 24.0], 100)
    ([], 0.0)
    """
    root, _ = regions(adj, low)
    demand = [0.0] * len(adj)
    for i, is_low in enumerate(low):
        if is_low:
            demand[root[i]] += need[i]
    best: list = [[], -math.inf]
    count = [0]

    def take(taken: set[int]) -> tuple[set[int], float]:
        seen = joined(adj, [is_low or i in taken for i, is_low in enumerate(low)])
        return seen, float(sum(need[i] for i in seen if i))

    def within_reach(seen: set[int], banned: set[int]) -> float:
        reach = joined(adj, [i not in banned for i in range(len(adj))]) - seen
        return sum(max(demand[r], 0.0) for r in {root[j] for j in reach if low[j]})

    def visit(taken: set[int], banned: set[int]) -> None:
        count[0] += 1
        if count[0] > limit:
            raise SearchLimit
        seen, bill = take(taken)
        if bill > best[1]:
            best[:] = [sorted(taken), bill]
        edge = sorted({j for i in seen for j in adj[i]} - seen - banned)
        if not edge or bill + within_reach(seen, banned) <= best[1]:
            return
        visit(taken | {edge[0]}, banned)
        visit(taken, banned | {edge[0]})

    visit(set(), set())
    return best[0], best[1]


def pools(adj, low, need, skip=frozenset()) -> list[tuple[list[int], float]]:
    """The high nodes (not X) next to each region, pooled.

    Regions with a node in ``skip`` are left out; a high node next to two
    regions joins their pools.

    Returns
    -------
    list of (feeders, demand)
        Per pool its high nodes (empty when no high node is next to it)
        and the need of its low nodes.

    Examples
    --------
    P1 – D – P2 and X – P1: one pool of P1 and P2 for D's 24.

    >>> pools([{1}, {0, 2}, {1, 3}, {2}], [False, False, True, False], [-9.0, -6.0, 24.0, -30.0])
    [([1, 3], 24.0)]
    """
    root, high = regions(adj, low)
    high = {r: nbrs - {0} for r, nbrs in high.items() if r not in skip}
    pool = list(root)
    for r, nbrs in high.items():
        for p in nbrs:
            _union(pool, p, r)
    feeding = set().union(*high.values())
    groups: dict[int, tuple[list[int], list[float]]] = {}
    for i in range(len(adj)):
        if (low[i] and root[i] not in skip) or i in feeding:
            feeders, demand = groups.setdefault(_find(pool, i), ([], [0.0]))
            if low[i]:
                demand[0] += need[i]
            else:
                feeders.append(i)
    return [(feeders, demand[0]) for feeders, demand in groups.values()]
