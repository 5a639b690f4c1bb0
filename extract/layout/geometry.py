"""Small vectorised helpers over arrays of shapely geometries.

Everything here works on whole arrays at once (shapely 2 ufuncs), so the
extractor never loops over shapes in Python for the heavy work.
"""

from __future__ import annotations

import numpy as np
import shapely

__all__ = [
    "polygons_from_arrays",
    "merge",
    "merge_parts",
    "parts",
    "representative_points",
    "inside",
    "inside_any",
    "grouped",
    "subtract_overlapping",
]

_EMPTY = np.empty(0, dtype=object)


def polygons_from_arrays(arrays) -> np.ndarray:
    """Build shapely polygons from (n, 2) coordinate arrays, repaired.

    Parameters
    ----------
    arrays : list of ndarray
        One (n, 2) array per polygon, n >= 3; need not be closed.

    Returns
    -------
    ndarray of shapely Polygon
        Self-intersecting input is repaired with ``make_valid``;
        degenerate (zero-area) polygons are dropped.

    Examples
    --------
    >>> import numpy as np
    >>> sq = np.array([[0, 0], [2, 0], [2, 1], [0, 1]], float)
    >>> line = np.array([[0, 0], [1, 0], [2, 0]], float)
    >>> [p.area for p in polygons_from_arrays([sq, line])]
    [2.0]
    >>> len(polygons_from_arrays([]))
    0
    """
    if not arrays:
        return _EMPTY
    counts = np.fromiter((len(a) for a in arrays), dtype=np.intp, count=len(arrays))
    coords = np.concatenate(arrays)
    index = np.repeat(np.arange(len(arrays)), counts)
    rings = shapely.linearrings(coords, indices=index)
    polys = shapely.polygons(rings)
    bad = ~shapely.is_valid(polys)
    if bad.any():
        polys[bad] = shapely.make_valid(polys[bad])
        polys = np.concatenate([shapely.get_parts(p) if not isinstance(p, shapely.Polygon) else [p] for p in polys])
        polys = polys[shapely.get_type_id(polys) == 3]
    return polys[shapely.area(polys) > 0]


def merge(geoms, grid: float = 0.0):
    """Union of ``geoms`` as one geometry (empty polygon for no input).

    >>> from shapely import box
    >>> merge([box(0, 0, 1, 1), box(1, 0, 2, 1)]).area
    2.0
    >>> merge([]).is_empty
    True
    """
    if len(geoms) == 0:
        return shapely.Polygon()
    return shapely.union_all(np.asarray(geoms, dtype=object), grid_size=grid or None)


def parts(geom) -> np.ndarray:
    """The polygons of ``geom`` (lines and points from overlays dropped).

    >>> from shapely import box
    >>> g = box(0, 0, 1, 1).union(box(2, 0, 3, 1))
    >>> len(parts(g)), len(parts(shapely.Polygon()))
    (2, 0)
    """
    if geom is None or geom.is_empty:
        return _EMPTY
    out = shapely.get_parts(geom)
    if not all(isinstance(p, shapely.Polygon) for p in out):
        flat = []
        for p in out:
            if isinstance(p, shapely.Polygon):
                flat.append(p)
            elif hasattr(p, "geoms"):
                flat.extend(q for q in shapely.get_parts(p) if isinstance(q, shapely.Polygon))
        out = np.asarray(flat, dtype=object)
    return out[shapely.area(out) > 0] if len(out) else _EMPTY


def representative_points(geoms) -> np.ndarray:
    """An (n, 2) array with one point inside each geometry.

    >>> from shapely import box
    >>> representative_points([box(0, 0, 2, 2)]).tolist()
    [[1.0, 1.0]]
    >>> representative_points([]).shape
    (0, 2)
    """
    if len(geoms) == 0:
        return np.empty((0, 2))
    return shapely.get_coordinates(shapely.point_on_surface(np.asarray(geoms, dtype=object)))


def inside(region, points: np.ndarray) -> np.ndarray:
    """Boolean mask: which ``points`` (n, 2) lie in ``region`` (boundary counts).

    >>> import numpy as np
    >>> from shapely import box
    >>> inside(box(0, 0, 1, 1), np.array([[0.5, 0.5], [2, 2], [1, 0.5]])).tolist()
    [True, False, True]
    >>> inside(shapely.Polygon(), np.array([[0.0, 0.0]])).tolist()
    [False]
    """
    if region is None or region.is_empty or len(points) == 0:
        return np.zeros(len(points), dtype=bool)
    shapely.prepare(region)
    return shapely.intersects_xy(region, points[:, 0], points[:, 1])


def merge_parts(geoms) -> np.ndarray:
    """Merge overlapping or touching polygons; return the merged parts.

    Parameters
    ----------
    geoms : array of Polygon

    Returns
    -------
    ndarray of Polygon
        Disjoint polygons covering the same area.

    Notes
    -----
    One STR-tree self-query finds touching pairs; their connected
    components (scipy) are unioned one cluster at a time, so the cost is
    O(n log n) plus the size of each cluster's own union — far cheaper
    than one overlay over the whole layer when the layer has many
    separate shapes.

    Examples
    --------
    >>> from shapely import box
    >>> m = merge_parts(np.array([box(0, 0, 1, 1), box(1, 0, 2, 1), box(5, 5, 6, 6)]))
    >>> sorted(round(p.area, 6) for p in m)
    [1.0, 2.0]
    >>> len(merge_parts(np.array([], dtype=object)))
    0
    """
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import connected_components

    geoms = np.asarray(geoms, dtype=object)
    n = len(geoms)
    if n == 0:
        return _EMPTY
    tree = shapely.STRtree(geoms)
    i, j = tree.query(geoms, predicate="intersects")
    _, label = connected_components(coo_matrix((np.ones(len(i)), (i, j)), shape=(n, n)), directed=False)
    counts = np.bincount(label)
    single = counts[label] == 1
    out = list(geoms[single])
    multi = np.flatnonzero(~single)
    if len(multi):
        order = multi[np.argsort(label[multi], kind="stable")]
        cuts = np.flatnonzero(np.diff(label[order])) + 1
        for group in np.split(order, cuts):
            out.extend(parts(shapely.union_all(geoms[group])))
    return np.asarray(out, dtype=object)


def inside_any(regions, points: np.ndarray) -> np.ndarray:
    """Boolean mask: which ``points`` lie in any of ``regions`` (an array).

    ``points`` is an (n, 2) array of coordinates or an array of shapely
    points (made once when several region sets are asked about).

    >>> from shapely import box
    >>> inside_any(np.array([box(0, 0, 1, 1), box(5, 5, 6, 6)]), np.array([[5.5, 5.5], [3, 3]])).tolist()
    [True, False]
    >>> inside_any(np.array([], dtype=object), np.array([[0.0, 0.0]])).tolist()
    [False]
    """
    mask = np.zeros(len(points), dtype=bool)
    if len(regions) == 0 or len(points) == 0:
        return mask
    tree = shapely.STRtree(regions)
    geoms = points if points.dtype == object else shapely.points(points)
    pi, _ = tree.query(geoms, predicate="intersects")
    mask[pi] = True
    return mask


def grouped(geoms, groups: np.ndarray, n: int) -> np.ndarray:
    """For each group 0..n-1, a MultiPolygon of its members (empty if none).

    ``geoms[k]`` belongs to group ``groups[k]``; members must not overlap.

    >>> from shapely import box
    >>> g = grouped(np.array([box(0, 0, 1, 1), box(2, 0, 3, 1)]), np.array([2, 2]), 3)
    >>> [round(x.area, 6) for x in g]
    [0.0, 0.0, 2.0]
    """
    out = np.array([shapely.MultiPolygon()] * n, dtype=object)
    if len(geoms) == 0:
        return out
    order = np.argsort(groups, kind="stable")
    ids, compact = np.unique(groups[order], return_inverse=True)
    out[ids] = shapely.multipolygons(np.asarray(geoms, dtype=object)[order], indices=compact)
    return out


def subtract_overlapping(a, b, what=shapely.difference):
    """``what(a[k], union of the b that meet a[k])`` for every k, vectorised.

    Parameters
    ----------
    a : array of geometry
    b : array of Polygon (disjoint: merged parts)
    what : shapely binary ufunc
        ``shapely.difference`` (default) or ``shapely.intersection``.

    Returns
    -------
    ndarray of geometry, one per ``a``.

    Examples
    --------
    >>> from shapely import box
    >>> r = subtract_overlapping(np.array([box(0, 0, 3, 1)]), np.array([box(1, -1, 2, 2), box(9, 9, 10, 10)]))
    >>> round(r[0].area, 6)
    2.0
    """
    a = np.asarray(a, dtype=object)
    if len(a) == 0:
        return _EMPTY
    b = np.asarray(b, dtype=object)
    if len(b) == 0:
        return a.copy() if what is shapely.difference else np.array([shapely.Polygon()] * len(a), dtype=object)
    tree = shapely.STRtree(b)
    ai, bi = tree.query(a, predicate="intersects")
    cover = grouped(b[bi], ai, len(a))
    return what(a, cover)
