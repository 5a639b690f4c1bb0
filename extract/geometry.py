"""Small vectorised helpers over arrays of shapely geometries.

Everything here works on whole arrays at once (shapely 2 ufuncs), so the
extractor never loops over shapes in Python for the heavy work.
"""

from __future__ import annotations

import numpy as np
import shapely

__all__ = ["polygons_from_arrays", "merge", "parts", "representative_points", "inside"]

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
