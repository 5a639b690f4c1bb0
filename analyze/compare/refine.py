"""Colour refinement and individualisation: isomorphism of two labelled graphs.

Used by :mod:`analyze.compare.match` on the device–net graphs of a schematic and a
layout.  :class:`Refiner` holds the disjoint union of the two graphs as
numpy arrays; :meth:`Refiner.stable` refines a colouring until it stops
getting finer, and :meth:`Refiner.isomorphism` searches for a mapping by
individualisation–refinement.

Notes
-----
Colour refinement (1-dimensional Weisfeiler–Leman; e.g. Grohe, Kersting,
Mladenov & Schweitzer, "Color refinement and its applications", 2017,
from memory): a node's new colour is its old colour together with the
multiset of (edge kind, neighbour colour).  The multiset is summed as
64-bit splitmix64 hashes (Steele, Lea & Flood, 2014) and hashed with the
old colour, so one round is a few numpy passes over the edges and a sort
of one integer per node.  Equal neighbourhoods always get equal colours,
on both sides alike, so no isomorphism is ever lost; a hash collision
(odds about n²/2⁶⁴) could only merge two colours, which weakens pruning
but never gives a wrong answer, since every mapping is checked edge by
edge.

Individualisation: when refinement leaves a colour class with several
nodes, one layout node of the smallest such class is paired with each
schematic node of the class in turn (both get a fresh colour) and the
colouring is refined again.  For classes that are symmetric (legs of a
gate that are exact copies) the first choice succeeds, so the search is
a handful of refinements deep.  Sizes prune it: within a colour class the
sorted W (and L) of the two sides must agree within tolerance, which any
mapping that respects sizes needs.  A search-node budget bounds the rare
cases where refinement cannot tell nodes apart that no isomorphism
exchanges.
"""

from __future__ import annotations

import networkx as nx
import numpy as np

__all__ = ["Refiner", "SearchBudgetExceeded"]

_U64 = np.uint64


class SearchBudgetExceeded(RuntimeError):
    """The individualisation search tried more branches than allowed."""


def _mix(x: np.ndarray) -> np.ndarray:
    """splitmix64 (Steele, Lea & Flood, 2014): a well-spread 64-bit hash."""
    x = x + _U64(0x9E3779B97F4A7C15)
    x = (x ^ (x >> _U64(30))) * _U64(0xBF58476D1CE4E5B9)
    x = (x ^ (x >> _U64(27))) * _U64(0x94D049BB133111EB)
    return x ^ (x >> _U64(31))


class Refiner:
    """Two (or more) graphs as one disjoint union, ready for refinement.

    Parameters
    ----------
    graphs : list of networkx.Graph
        Node attribute ``label`` (hashable) gives the starting colour;
        optional node attributes ``w`` and ``l`` are sizes; edge attribute
        ``kind`` (hashable) is part of each neighbour's contribution.

    Examples
    --------
    >>> a, b = nx.path_graph(3), nx.path_graph(["x", "y", "z"])
    >>> for g in (a, b):
    ...     nx.set_node_attributes(g, "n", "label"); nx.set_edge_attributes(g, 0, "kind")
    >>> r = Refiner([a, b])
    >>> m = r.isomorphism()
    >>> m[1], {m[0], m[2]} == {"x", "z"}
    ('y', True)
    """

    def __init__(self, graphs: list[nx.Graph]):
        self.graphs = graphs
        self.nodes = [list(g) for g in graphs]
        self.offset = np.cumsum([0] + [len(n) for n in self.nodes])
        index = [{n: int(self.offset[k]) + i for i, n in enumerate(ns)} for k, ns in enumerate(self.nodes)]
        labels: dict = {}
        self.start = np.array([labels.setdefault(g.nodes[n]["label"], len(labels))
                               for g, ns in zip(graphs, self.nodes) for n in ns], dtype=np.int64)
        kinds: dict = {}
        u: list[int] = []
        v: list[int] = []
        kind: list[int] = []
        for g, idx in zip(graphs, index):
            for a, b, k in g.edges(data="kind"):
                kid = kinds.setdefault(k, len(kinds))
                u += [idx[a], idx[b]]
                v += [idx[b], idx[a]]
                kind += [kid, kid]
        self.u = np.array(u, dtype=np.int64)
        self.v = np.array(v, dtype=np.int64)
        self.kind = np.array(kind, dtype=np.uint64)
        self.side = np.repeat(np.arange(len(graphs)), [len(n) for n in self.nodes])
        nan = float("nan")
        self.w = np.array([g.nodes[n].get("w", nan) for g, ns in zip(graphs, self.nodes) for n in ns])
        self.l = np.array([g.nodes[n].get("l", nan) for g, ns in zip(graphs, self.nodes) for n in ns])
        self.steps = 0

    def split(self, col: np.ndarray) -> list[dict]:
        """A union colouring as one dict (node -> colour) per graph."""
        return [dict(zip(ns, col[self.offset[k]:self.offset[k + 1]].tolist()))
                for k, ns in enumerate(self.nodes)]

    def rounds(self, col: np.ndarray | None = None):
        """Yield the colouring after each round that made it finer
        (the starting colouring first); the last one is stable."""
        col = self.start if col is None else col
        _, col = np.unique(col, return_inverse=True)
        col = col.reshape(-1).astype(np.int64)
        count = int(col.max()) + 1 if len(col) else 0
        yield col
        n = len(col)
        for _ in range(n + 1):
            acc = np.zeros(n, dtype=np.uint64)
            if len(self.u):
                np.add.at(acc, self.u, _mix(self.kind * _U64(n + 1) + col[self.v].astype(np.uint64)))
            key = _mix(acc ^ _mix(col.astype(np.uint64) + _U64(0x5DEECE66D)))
            _, new = np.unique(key, return_inverse=True)
            new = new.reshape(-1).astype(np.int64)
            new_count = int(new.max()) + 1 if n else 0
            if new_count == count:
                return
            col, count = new, new_count
            yield col

    def stable(self, col: np.ndarray | None = None) -> np.ndarray:
        """The stable refinement of ``col`` (default: the starting labels)."""
        last = None
        for last in self.rounds(col):
            pass
        return last

    def balanced(self, col: np.ndarray) -> bool:
        """Whether graphs 0 and 1 have the same number of nodes of each colour."""
        k = int(col.max()) + 1 if len(col) else 0
        return np.array_equal(np.bincount(col[self.side == 0], minlength=k),
                              np.bincount(col[self.side == 1], minlength=k))

    def sizes_fit(self, col: np.ndarray, w_tol: float, l_tol: float) -> bool:
        """Necessary condition for a size-respecting mapping: per colour class,
        the sorted sizes of graph 0 are within tolerance of those of graph 1
        (the tolerance relative to graph 1).  Assumes :meth:`balanced`."""
        dev = ~np.isnan(self.w)
        for size, tol in ((self.w, w_tol), (self.l, l_tol)):
            a = dev & (self.side == 0)
            b = dev & (self.side == 1)
            sa = size[a][np.lexsort((size[a], col[a]))]
            sb = size[b][np.lexsort((size[b], col[b]))]
            if not np.all(np.abs(sa - sb) <= tol * np.abs(sb) + 1e-9):
                return False
        return True

    def _leaf(self, col: np.ndarray) -> dict | None:
        a = np.flatnonzero(self.side == 0)
        b = np.flatnonzero(self.side == 1)
        pair = np.empty(int(col.max()) + 1 if len(col) else 0, dtype=np.int64)
        pair[col[b]] = b
        mapped = pair[col[a]]
        g0, g1 = self.graphs[0], self.graphs[1]
        name0, name1 = self.nodes[0], self.nodes[1]
        mapping = {name0[i]: name1[j - self.offset[1]] for i, j in zip(a, mapped)}
        if g0.number_of_edges() != g1.number_of_edges():
            return None
        for x, y, k in g0.edges(data="kind"):
            mx, my = mapping[x], mapping[y]
            if not g1.has_edge(mx, my) or g1.edges[mx, my]["kind"] != k:
                return None
        return mapping

    def _search(self, col, sized, w_tol, l_tol, budget) -> dict | None:
        self.steps += 1
        if self.steps > budget:
            raise SearchBudgetExceeded(f"more than {budget} search steps")
        if not self.balanced(col):
            return None
        if sized and not self.sizes_fit(col, w_tol, l_tol):
            return None
        counts = np.bincount(col[self.side == 0])
        multi = np.flatnonzero(counts > 1)
        if len(multi) == 0:
            return self._leaf(col)
        c = multi[np.argmin(counts[multi])]
        u = int(np.flatnonzero((col == c) & (self.side == 0))[0])
        cands = np.flatnonzero((col == c) & (self.side == 1))
        if sized and not np.isnan(self.w[u]):
            cands = cands[np.argsort(np.abs(self.w[cands] - self.w[u]) + np.abs(self.l[cands] - self.l[u]),
                                     kind="stable")]
        fresh = int(col.max()) + 1
        for v in cands:
            trial = col.copy()
            trial[u] = trial[v] = fresh
            found = self._search(self.stable(trial), sized, w_tol, l_tol, budget)
            if found is not None:
                return found
        return None

    def isomorphism(self, sized: bool = False, w_tol: float = 0.0, l_tol: float = 0.0,
                    budget: int = 20_000) -> dict | None:
        """A mapping graph 0 -> graph 1 that keeps labels and edge kinds.

        Parameters
        ----------
        sized : bool
            Also keep ``w``/``l`` within ``w_tol``/``l_tol`` (relative to
            graph 1).
        w_tol, l_tol : float
        budget : int
            Largest number of search nodes.

        Returns
        -------
        dict or None
            None when there is none.

        Raises
        ------
        SearchBudgetExceeded
        """
        self.steps = 0
        return self._search(self.stable(), sized, w_tol, l_tol, budget)
