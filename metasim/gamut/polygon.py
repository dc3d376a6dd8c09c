"""Plane-geometry kernels on stacks of small convex polygons (pure numpy, vectorised over a leading axis).

* :func:`convex_hull` — the convex hull of N points per item by the edge test (an ordered pair
  (i, j) is a counter-clockwise hull edge when no point lies to its right and collinear points lie
  within the segment), O(N³) per item but one array expression for all items: the right tool for the
  3-12 primaries of a display. Collinear and duplicate points are never hull vertices.
* :func:`polygon_area` — shoelace formula over the hull edges.
* :func:`intersection_area` — area of the intersection of two convex polygons from Green's theorem:
  the intersection's boundary is the part of each polygon's boundary that lies inside the other, and
  each edge clipped to a convex polygon is one segment (Cyrus & Beck 1978 parametric clipping), so
  ``area = ½ Σ (x₀y₁ − x₁y₀)`` over the clipped edges of both polygons. Edges that lie on the other
  polygon's boundary are counted once (from the first polygon, when both run the same way).
* :func:`points_hull` — many points (a spectrum locus), one item at a time, with Qhull (scipy).

References
----------
Cyrus, M. & Beck, J. (1978) Generalized two- and three-dimensional clipping. Computers & Graphics 3.
O'Rourke, J. (1998) Computational Geometry in C, 2nd ed., §1.3 (area), §3 (convex hulls).
"""

from __future__ import annotations

import numpy as np

#: Relative tolerance for collinearity and coincidence tests (times the squared item size).
TOLERANCE = 1e-12


def convex_hull(points: np.ndarray):
    """Hull of ``points`` (M, N, 2).

    Returns ``(next_vertex, on_hull)``: ``next_vertex`` (M, N) int, the index of the next hull vertex
    counter-clockwise from each hull vertex (-1 for points that are not hull vertices); ``on_hull``
    (M, N) bool.
    """
    p = np.asarray(points, dtype=float)
    m, n, _ = p.shape
    centre = np.nanmean(p, axis=1, keepdims=True)
    q = p - centre
    size2 = np.nanmax(np.sum(q * q, axis=-1), axis=1)[:, None, None, None]
    size2 = np.where(size2 > 0, size2, 1.0)
    d = q[:, None, :, :] - q[:, :, None, :]  # d[m, i, j] = q_j - q_i
    # cross[m, i, j, k] = (q_j - q_i) x (q_k - q_i)
    cross = d[:, :, :, None, 0] * d[:, :, None, :, 1] - d[:, :, :, None, 1] * d[:, :, None, :, 0]
    dot = d[:, :, :, None, 0] * d[:, :, None, :, 0] + d[:, :, :, None, 1] * d[:, :, None, :, 1]
    length2 = np.sum(d * d, axis=-1)[:, :, :, None]
    tol = TOLERANCE * size2
    collinear = np.abs(cross) <= tol
    within = (dot >= -tol) & (dot <= length2 + tol)
    left_or_on = (cross > tol) | (collinear & within)
    edge = left_or_on.all(axis=-1) & (length2[..., 0] > tol[..., 0])
    # a point equal (within tolerance) to an earlier one is a duplicate and never a vertex
    duplicate = np.triu(np.ones((n, n), dtype=bool), 1)[None] & (length2[..., 0] <= tol[..., 0])
    shadowed = duplicate.any(axis=1)
    bad = ~np.isfinite(p).all(axis=-1) | shadowed
    edge &= ~bad[:, :, None] & ~bad[:, None, :]
    on_hull = edge.any(axis=2)
    next_vertex = np.where(on_hull, np.argmax(edge, axis=2), -1)
    return next_vertex, on_hull


def polygon_area(points: np.ndarray, next_vertex: np.ndarray) -> np.ndarray:
    """Area (M,) enclosed by the hull edges ``i -> next_vertex[i]`` (shoelace formula)."""
    p = np.asarray(points, dtype=float)
    valid = next_vertex >= 0
    # reference point from the hull vertices only, so points inside the hull change nothing
    count = np.maximum(valid.sum(axis=1), 1)[:, None, None]
    centre = np.sum(np.where(valid[..., None], np.nan_to_num(p), 0.0), axis=1, keepdims=True) / count
    q = np.nan_to_num(p - centre)
    nxt = np.take_along_axis(q, np.where(valid, next_vertex, 0)[..., None], axis=1)
    twice = q[..., 0] * nxt[..., 1] - q[..., 1] * nxt[..., 0]
    return 0.5 * np.sum(np.where(valid, twice, 0.0), axis=1)


def ordered_vertices(next_vertex: np.ndarray, on_hull: np.ndarray) -> np.ndarray:
    """Hull vertex indices (M, N) in counter-clockwise order from the lowest index, -1 padded."""
    m, n = next_vertex.shape
    order = np.full((m, n), -1, dtype=int)
    current = np.where(on_hull.any(axis=1), np.argmax(on_hull, axis=1), -1)
    start = current.copy()
    rows = np.arange(m)
    for step in range(n):  # at most N hull vertices: a walk of N steps, vectorised over items
        alive = current >= 0
        order[alive, step] = current[alive]
        nxt = np.where(alive, next_vertex[rows, np.maximum(current, 0)], -1)
        current = np.where(nxt == start, -1, nxt)
    return order


def hull_edges(points: np.ndarray, next_vertex: np.ndarray):
    """Edges (M, N, 2, 2) = (start, end) × (x, y) with validity mask (M, N)."""
    p = np.nan_to_num(np.asarray(points, dtype=float))
    valid = next_vertex >= 0
    end = np.take_along_axis(p, np.where(valid, next_vertex, 0)[..., None], axis=1)
    return np.stack([p, end], axis=2), valid


def _clipped_twice_area(edges, valid, clip_edges, clip_valid, *, keep_same_direction: bool):
    """Σ over ``edges`` of (x₀y₁ − x₁y₀) for the part of each edge inside the clip polygon.

    ``edges`` (M, E, 2, 2), ``clip_edges`` (M, C, 2, 2) counter-clockwise. An edge lying on a clip
    edge's line counts as inside only with ``keep_same_direction`` and when both run the same way.
    """
    a = edges[:, :, None, 0, :]  # (M, E, 1, 2)
    b = edges[:, :, None, 1, :]
    q0 = clip_edges[:, None, :, 0, :]  # (M, 1, C, 2)
    e = clip_edges[:, None, :, 1, :] - q0
    seg = b - a
    f0 = e[..., 0] * (a - q0)[..., 1] - e[..., 1] * (a - q0)[..., 0]  # >= 0 inside
    df = e[..., 0] * seg[..., 1] - e[..., 1] * seg[..., 0]
    scale = np.sqrt(np.sum(e * e, axis=-1)) * (
        np.sqrt(np.sum(seg * seg, axis=-1)) + np.sqrt(np.sum((a - q0) ** 2, axis=-1))
    )
    tol = 1e-10 * scale
    parallel = np.abs(df) <= tol
    on_line = parallel & (np.abs(f0) <= tol)
    same_direction = np.sum(e * seg, axis=-1) > 0
    inside_parallel = np.where(on_line, keep_same_direction & same_direction, f0 > 0)
    with np.errstate(divide="ignore", invalid="ignore"):
        t_cross = np.where(parallel, 0.0, -f0 / np.where(parallel, 1.0, df))
    lower = np.where(~parallel & (df > 0), t_cross, 0.0)
    upper = np.where(~parallel & (df < 0), t_cross, 1.0)
    upper = np.where(parallel & ~inside_parallel, -1.0, upper)
    active = clip_valid[:, None, :]
    t0 = np.max(np.where(active, lower, 0.0), axis=2)
    t1 = np.min(np.where(active, upper, 1.0), axis=2)
    t0 = np.clip(t0, 0.0, 1.0)
    t1 = np.clip(t1, 0.0, 1.0)
    keep = valid & (t1 > t0)
    a2, seg2 = edges[:, :, 0, :], edges[:, :, 1, :] - edges[:, :, 0, :]
    p0 = a2 + t0[..., None] * seg2
    p1 = a2 + t1[..., None] * seg2
    twice = p0[..., 0] * p1[..., 1] - p1[..., 0] * p0[..., 1]
    return np.sum(np.where(keep, twice, 0.0), axis=1)


def intersection_area(edges_a, valid_a, edges_b, valid_b) -> np.ndarray:
    """Area (M,) of the intersection of two stacks of convex counter-clockwise polygons given by edges."""
    origin = 0.5 * (_edge_mean(edges_a, valid_a) + _edge_mean(edges_b, valid_b))[:, None, None, :]
    ea, eb = edges_a - origin, edges_b - origin  # better conditioned cross products
    twice = _clipped_twice_area(ea, valid_a, eb, valid_b, keep_same_direction=True)
    twice += _clipped_twice_area(eb, valid_b, ea, valid_a, keep_same_direction=False)
    return np.maximum(0.5 * twice, 0.0)


def _edge_mean(edges, valid):
    starts = edges[:, :, 0, :]
    count = np.maximum(valid.sum(axis=1), 1)[:, None]
    return np.sum(np.where(valid[..., None], starts, 0.0), axis=1) / count


def points_hull(points: np.ndarray) -> np.ndarray:
    """Counter-clockwise hull vertices (K, 2) of many points (P, 2) by Qhull (scipy.spatial.ConvexHull)."""
    from scipy.spatial import ConvexHull

    p = np.asarray(points, dtype=float)
    p = p[np.isfinite(p).all(axis=1)]
    hull = ConvexHull(p)
    return p[hull.vertices]  # Qhull returns 2-D hull vertices counter-clockwise
