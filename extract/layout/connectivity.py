"""Connectivity: which conductor shapes form one net, and the net names.

Conductors are the source/drain pieces of every diffusion layer and the
merged shapes of every poly and metal layer.  A ``cut`` shape joins every
conductor of its ``joins`` layers that it overlaps (with positive area).
Nets are the connected components of that conductor–cut graph.

Naming: text labels on a layer listed in that layer's ``labels`` name the
conductor they sit on (a point on the boundary counts).  Rules, all
deterministic:

- Two different label texts on one net: the net keeps the one that sorts
  first (supply, ground and clock names from the tech file are preferred
  over signal names) and a finding names both.
- The same text on unconnected nets: supply, ground and clock nets with
  the same name are one net (they are joined outside the cell); any other
  repeated name keeps the bare name on the net whose point comes first
  (lowest y, then x) and ``NAME_2``, ``NAME_3``, ... on the others, with
  one finding.
- Unlabelled nets are called ``net1``, ``net2``, ... in order of their
  point (lowest y, then x), skipping names already used.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import shapely
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import connected_components

from extract.errors import Finding
from extract.layout.reader import FlatLabel

__all__ = ["Conductors", "connect", "label_hits", "names_from_texts", "name_nets"]


@dataclass
class Conductors:
    """All conductor shapes of a cell, in one indexable array.

    Attributes
    ----------
    geoms : ndarray of Polygon
    layer : ndarray of str
        The tech layer each shape is on.
    points : ndarray (n, 2)
        A point inside each shape.
    """

    geoms: np.ndarray
    layer: np.ndarray
    points: np.ndarray

    def of_layer(self, name: str) -> np.ndarray:
        return np.flatnonzero(self.layer == name)


def connect(conductors: Conductors, cuts: list[tuple[np.ndarray, tuple[str, ...]]]) -> np.ndarray:
    """Net index of every conductor.

    Parameters
    ----------
    conductors : Conductors
    cuts : list of (ndarray of Polygon, tuple of str)
        Each cut layer's shapes and the layers it joins.

    Returns
    -------
    ndarray of int
        ``net[i]`` for conductor ``i``; numbers are 0..k-1 in order of
        first appearance.

    Notes
    -----
    One STR-tree of each cut layer, queried with the prepared conductors
    of each layer it joins, finds the pairs whose boxes and shapes meet (a
    conductor of many vertices, a rail, is prepared once and not walked
    again per cut); a pair joins when the interiors meet (intersects and
    not ``touches``, the DE-9IM test, so no intersection polygon is
    built); a sparse connected-components pass gives the nets:
    O((n + c) log(n + c)).

    Examples
    --------
    >>> import numpy as np
    >>> from shapely import box
    >>> c = Conductors(np.array([box(0, 0, 1, 1), box(0, 0, 1, 1), box(5, 5, 6, 6)]),
    ...                np.array(["m1", "m2", "m1"]), np.zeros((3, 2)))
    >>> connect(c, [(np.array([box(0.2, 0.2, 0.4, 0.4)]), ("m1", "m2"))]).tolist()
    [0, 0, 1]
    >>> connect(c, []).tolist()
    [0, 1, 2]

    A cut that only touches a conductor's edge joins nothing:

    >>> connect(c, [(np.array([box(1, 0, 2, 1)]), ("m1", "m2"))]).tolist()
    [0, 1, 2]
    """
    n = len(conductors.geoms)
    rows: list[np.ndarray] = []
    cols: list[np.ndarray] = []
    offset = n
    for cut_geoms, joins in cuts:
        if len(cut_geoms) == 0:
            continue
        tree = shapely.STRtree(cut_geoms)
        for layer in joins:
            idx = conductors.of_layer(layer)
            if len(idx) == 0:
                continue
            # the conductors are the prepared side: a long rail is tested
            # against each small cut through its own index
            geoms = conductors.geoms[idx]
            shapely.prepare(geoms)
            gi, ci = tree.query(geoms, predicate="intersects")
            # positive-area overlap = the interiors meet = intersects and
            # does not merely touch (DE-9IM), tested without building the
            # intersection geometry
            keep = ~shapely.touches(geoms[gi], cut_geoms[ci])
            shapely.destroy_prepared(geoms)
            rows.append(ci[keep] + offset)
            cols.append(idx[gi[keep]])
        offset += len(cut_geoms)
    size = offset
    if rows:
        r = np.concatenate(rows)
        c = np.concatenate(cols)
    else:
        r = c = np.empty(0, dtype=np.intp)
    graph = coo_matrix((np.ones(len(r)), (r, c)), shape=(size, size))
    _, labels = connected_components(graph, directed=False)
    labels = labels[:n]
    # renumber in order of first appearance for determinism
    _, first = np.unique(labels, return_index=True)
    order = np.argsort(first)
    remap = np.empty(len(order), dtype=np.intp)
    remap[np.unique(labels)[order]] = np.arange(len(order))
    return remap[labels] if n else labels


def label_hits(conductors, labels, label_layers):
    """``(conductor index, text)`` for each label on a conductor of its
    layer (a point on the boundary counts), plus a finding per label on
    no such shape.  One STR-tree query per labelled layer."""
    hits: list[tuple[int, str]] = []
    findings: list[Finding] = []
    by_layer: dict[str, list[FlatLabel]] = {}
    for lab in labels:
        for layer_name, pairs in label_layers.items():
            if lab.layer in pairs:
                by_layer.setdefault(layer_name, []).append(lab)
    for layer_name, labs in by_layer.items():
        idx = conductors.of_layer(layer_name)
        pts = shapely.points([(lab.x, lab.y) for lab in labs])
        if len(idx):
            tree = shapely.STRtree(conductors.geoms[idx])
            li, gi = tree.query(pts, predicate="intersects")
        else:
            li = gi = np.empty(0, dtype=np.intp)
        found = np.zeros(len(labs), dtype=bool)
        found[li] = True
        for k, g in zip(li.tolist(), gi.tolist()):
            hits.append((int(idx[g]), labs[k].text))
        for k in np.flatnonzero(~found):
            lab = labs[k]
            findings.append(Finding(f"label {lab.text!r} is not on a {layer_name} shape; ignored", (lab.x, lab.y)))
    return hits, findings


def name_nets(net_of, conductors, labels, label_layers, role_of, net_points):
    """Name every net.

    Parameters
    ----------
    net_of : ndarray of int
        From :func:`connect`.
    conductors : Conductors
    labels : list of FlatLabel
    label_layers : dict of str to set of (int, int)
        Tech layer name -> the label ``(layer, texttype)`` pairs it takes.
    role_of : callable
        Net name -> role ("power", "ground", "clock", "signal").
    net_points : ndarray (k, 2)
        A point per net, for ordering and messages.

    Returns
    -------
    names : list of str
        ``names[k]`` for net ``k``; nets that share a name are one net.
    label_texts : list of tuple of str
        Every label text seen on net ``k``.
    findings : list of Finding
    """
    k_nets = len(net_points)
    hits, findings = label_hits(conductors, labels, label_layers)
    texts: list[set[str]] = [set() for _ in range(k_nets)]
    for cond, text in hits:
        texts[net_of[cond]].add(text)
    names, more = names_from_texts(texts, net_points, role_of)
    return names, [tuple(sorted(t)) for t in texts], findings + more


def names_from_texts(texts, net_points, role_of):
    """Names of nets from the label texts on each (the module's rules).

    Parameters
    ----------
    texts : list of set of str
        Label texts on net ``k``.
    net_points : ndarray (k, 2)
    role_of : callable

    Returns
    -------
    names : list of str
    findings : list of Finding
        Label conflicts and repeated signal labels.

    Notes
    -----
    Sorting by point and by text: O(k log k).

    Examples
    --------
    >>> import numpy as np
    >>> role = lambda t: "power" if t == "VDD" else "signal"
    >>> names, f = names_from_texts([{"A"}, set(), {"A"}, {"VDD"}], np.array([[0, 1], [0, 0], [0, 2], [0, 3]]), role)
    >>> names, len(f)
    (['A', 'net1', 'A_2', 'VDD'], 1)
    """
    k_nets = len(net_points)
    findings: list[Finding] = []

    def preference(text):
        return (role_of(text) == "signal", text)

    chosen: list[str | None] = [None] * k_nets
    for k, tx in enumerate(texts):
        if not tx:
            continue
        if len(tx) == 1:  # most nets: one text, nothing to choose
            (chosen[k],) = tx
        else:
            ordered = sorted(tx, key=preference)
            chosen[k] = ordered[0]
            x, y = net_points[k]
            findings.append(
                Finding(
                    "labels " + ", ".join(repr(t) for t in ordered) + f" are on one net; it is named {ordered[0]!r}",
                    (float(x), float(y)),
                )
            )
    # by point rounded to 1e-6 µm (y, then x), then k; numpy's rounding, as
    # round() of the array's numpy floats gives
    pts = np.asarray(net_points, dtype=float).reshape(-1, 2)
    order = np.lexsort((np.round(pts[:, 0], 6), np.round(pts[:, 1], 6))).tolist() if k_nets else []
    names: list[str] = [""] * k_nets
    used: set[str] = set()
    by_text: dict[str, list[int]] = {}
    for k in order:
        if chosen[k] is not None:
            by_text.setdefault(chosen[k], []).append(k)
    for text, nets in sorted(by_text.items()):
        if role_of(text) != "signal" or len(nets) == 1:
            for k in nets:
                names[k] = text
            used.add(text)
            continue
        names[nets[0]] = text
        used.add(text)
        suffix = 2
        for k in nets[1:]:
            name = f"{text}_{suffix}"
            while name in used or name in by_text:
                suffix += 1
                name = f"{text}_{suffix}"
            names[k] = name
            used.add(name)
            suffix += 1
        x, y = net_points[nets[0]]
        findings.append(
            Finding(f"label {text!r} names {len(nets)} unconnected nets; the others are {text}_2 onwards", (float(x), float(y)))
        )
    counter = 1
    for k in order:
        if names[k]:
            continue
        name = f"net{counter}"
        while name in used or name in by_text:
            counter += 1
            name = f"net{counter}"
        names[k] = name
        used.add(name)
        counter += 1
    return names, findings
