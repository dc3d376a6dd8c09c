"""CIELAB volume of the intersection of two colour solids: how much of a reference solid a design covers.

Both colour solids are zonotopes in XYZ, hence convex, so their intersection is a convex polytope in
XYZ. It is computed exactly as an intersection of half-spaces (each zonotope is bounded by the
planes ``n·x = max`` and ``n·x = min`` over its drives, for every pair normal n = Pᵢ × Pⱼ), with an
interior point from the Chebyshev centre (a linear programme). Qhull returns its vertices and a
triangulated surface. The surface triangles are then treated like the zonotope faces in
:mod:`metasim.gamut.volume`: subdivided (graded towards each triangle's darkest corner), mapped to
CIELAB, volume by the divergence theorem, extrapolated and refined until the change is below
``rtol``. Because CIELAB is a bijection of XYZ, the CIELAB image of the intersection is the
intersection of the CIELAB solids.

The polytope construction runs per item (a Python loop around scipy's Qhull and HiGHS, about a
millisecond each); the CIELAB mapping and volume sums run on all items at once.

References
----------
Barber, Dobkin & Huhdanpaa (1996) The Quickhull algorithm for convex hulls, ACM TOMS 22
(scipy.spatial.HalfspaceIntersection, ConvexHull); Boyd & Vandenberghe (2004) Convex Optimization
§8.5.1 (Chebyshev centre); CIE 15:2004 §8.2.1 (CIELAB).
"""

from __future__ import annotations

import numpy as np
import xarray as xr

from metasim.errors import GamutError
from metasim.gamut._inputs import (
    flatten,
    gamut_inputs,
    is_reference,
    lead_array,
    primaries_xyz,
    reference_name,
    reference_xyz,
    white_xyz,
)
from metasim.gamut.volume import (
    BLOCK_NODES,
    GRADING,
    MAX_CELLS,
    START_CELLS,
    VOLUME_UNITS,
    _check_solid,
    _mesh_volume,
    _to_lab,
    zonotope_lab_volume,
)


def zonotope_halfspaces(primaries: np.ndarray):
    """(A, b) with the zonotope of ``primaries`` (N, 3) = {x : A x <= b}; A rows are unit normals."""
    p = np.asarray(primaries, dtype=float)
    i, j = np.triu_indices(p.shape[0], 1)
    normal = np.cross(p[i], p[j])
    length = np.linalg.norm(normal, axis=1)
    keep = length > 1e-12 * np.max(length)
    normal = normal[keep] / length[keep, None]
    side = normal @ p.T
    upper = np.sum(np.maximum(side, 0.0), axis=1)
    lower = np.sum(np.minimum(side, 0.0), axis=1)
    return np.vstack([normal, -normal]), np.concatenate([upper, -lower])


def _chebyshev_centre(a: np.ndarray, b: np.ndarray):
    """Centre and radius of the largest ball inside {x : A x <= b} (unit rows), or (None, 0)."""
    from scipy.optimize import linprog

    cost = np.array([0.0, 0.0, 0.0, -1.0])
    result = linprog(cost, A_ub=np.hstack([a, np.ones((a.shape[0], 1))]), b_ub=b,
                     bounds=[(None, None)] * 3 + [(0, None)], method="highs")
    if result.status != 0:
        return None, 0.0
    return result.x[:3], float(result.x[3])


def intersection_triangles(first: np.ndarray, second: np.ndarray) -> tuple[np.ndarray, np.ndarray | None]:
    """Outward-oriented surface triangles (T, 3, 3) of the intersection of two zonotopes in XYZ.

    Returns (triangles, interior point); no triangles and None when the intersection has no volume.
    """
    from scipy.spatial import ConvexHull, HalfspaceIntersection

    a1, b1 = zonotope_halfspaces(first)
    a2, b2 = zonotope_halfspaces(second)
    a, b = np.vstack([a1, a2]), np.concatenate([b1, b2])
    centre, radius = _chebyshev_centre(a, b)
    scale = max(np.abs(first).max(), np.abs(second).max())
    if centre is None or radius <= 1e-9 * scale:
        return np.zeros((0, 3, 3)), None
    vertices = HalfspaceIntersection(np.hstack([a, -b[:, None]]), centre).intersections
    vertices = np.unique(np.round(vertices / scale, 12), axis=0) * scale
    hull = ConvexHull(vertices)
    tri = vertices[hull.simplices]
    normal = np.cross(tri[:, 1] - tri[:, 0], tri[:, 2] - tri[:, 0])
    flip = np.einsum("tc,tc->t", normal, hull.equations[:, :3]) < 0
    tri[flip] = tri[flip][:, [0, 2, 1]]
    # start each triangle at its darkest corner (lowest Y), keeping the orientation
    roll = np.argmin(tri[:, :, 1], axis=1)
    index = (np.arange(3)[None, :] + roll[:, None]) % 3
    tri = np.take_along_axis(tri, index[:, :, None], axis=1)
    return tri, centre


def _triangle_nodes_lab(tri, white, centre, cells: int) -> np.ndarray:
    """CIELAB (minus centre) of graded nodes a + s³ [(b − a) + t (c − b)], (M, T, k + 1, k + 1, 3)."""
    s = np.linspace(0.0, 1.0, cells + 1) ** GRADING
    t = np.linspace(0.0, 1.0, cells + 1)
    a, b, c = tri[:, :, 0], tri[:, :, 1], tri[:, :, 2]
    ray = (b - a)[:, :, None, :] + t[None, None, :, None] * (c - b)[:, :, None, :]
    nodes = a[:, :, None, None, :] + s[None, None, :, None, None] * ray[:, :, None, :, :]
    return _to_lab(nodes, white) - centre[:, None, None, None, :]


def triangles_lab_volume(tri: np.ndarray, white: np.ndarray, centre: np.ndarray, rtol: float = 1e-3):
    """CIELAB volume (M,) enclosed by closed XYZ triangle meshes (M, T, 3, 3), refined to ``rtol``.

    Padding triangles of zeros enclose nothing. Returns (volume, cells, change) as
    :func:`metasim.gamut.volume.zonotope_lab_volume` does.
    """
    m, n_tri = tri.shape[:2]
    volume, cells_used, change = np.zeros(m), np.zeros(m, dtype=int), np.zeros(m)
    centre_lab = _to_lab(centre, white)
    todo = np.flatnonzero(np.abs(tri).reshape(m, -1).max(axis=1) > 0) if n_tri else np.arange(0)
    cells = START_CELLS
    while todo.size:
        chunk = max(1, BLOCK_NODES // (max(n_tri, 1) * (cells + 1) ** 2))
        fine, half = [], []
        for start in range(0, todo.size, chunk):
            part = todo[start: start + chunk]
            lab = _triangle_nodes_lab(tri[part], white[part], centre_lab[part], cells)
            v = [_mesh_volume(lab[:, :, ::step, ::step]) for step in (1, 2, 4)]
            fine.append(v[0] + (v[0] - v[1]) / 3.0)
            half.append(v[1] + (v[1] - v[2]) / 3.0)
        fine, half = np.concatenate(fine), np.concatenate(half)
        rel = np.abs(fine - half) / np.maximum(np.abs(fine), 1e-300)
        done = (rel <= rtol) | (cells >= MAX_CELLS)
        volume[todo[done]], cells_used[todo[done]], change[todo[done]] = fine[done], cells, rel[done]
        todo = todo[~done]
        cells *= 2
    return volume, cells_used, change


def lab_coverage_volume(design, reference="bt2020", observer=None, white=None, *, rtol: float = 1e-3) -> xr.Dataset:
    """Share of a reference colour solid's CIELAB volume that a design's colour solid covers.

    Parameters
    ----------
    design
        Primaries as for :func:`metasim.gamut.lab_gamut_volume` (XYZ, spectra with ``observer``, or a
        display), with any leading dims.
    reference
        A reference name (``"bt709"``, ``"display_p3"``, ``"dci_p3"``, ``"bt2020"``: primaries from
        colour-science, scaled so that the reference's own white has the Y of the CIELAB white) or
        primaries on the design's scale.
    white : optional
        The CIELAB white for both solids (default the design white, the sum of its primaries).
    rtol : float
        Convergence of each volume, default 0.1 %; the share is then good to about 0.2 %.

    Returns
    -------
    Dataset
        ``coverage`` (0..1), ``intersection_volume``, ``reference_volume`` and ``design_volume``
        in CIELAB units³, over the leading dims.

    Examples
    --------
    >>> import metasim
    >>> from metasim.emitters import laser_line
    >>> lasers = metasim.make_display(laser_line([465, 532, 638], 1.0, name=["B", "G", "R"]))
    >>> coverage = metasim.lab_coverage_volume(lasers, "bt709", metasim.standard_observer("cie1931_2"))["coverage"]
    >>> round(float(coverage), 2)
    0.93
    """
    if not 0 < rtol < 0.1:
        raise GamutError(f"rtol={rtol!r} is not allowed; need 0 < rtol < 0.1")
    design, observer = gamut_inputs(design, observer)
    xyz = primaries_xyz(design, observer)
    white_da = white_xyz(white, xyz, observer)
    if is_reference(reference):
        ref = reference_xyz(reference) * white_da.sel(xyz="Y", drop=True)
        ref_name = reference_name(reference)
    else:
        ref = primaries_xyz(reference, observer)
        ref_name = "reference"
    template = xr.broadcast(xyz.isel(primary=0, xyz=0, drop=True),
                            ref.isel(primary=0, xyz=0, drop=True), white_da.isel(xyz=0, drop=True))[0]
    lead = list(template.dims)
    d_values, _, shape, coords = flatten(xyz.broadcast_like(template).transpose(*lead, "primary", "xyz"),
                                         ("primary", "xyz"))
    r_values, _, _, _ = flatten(ref.broadcast_like(template).transpose(*lead, "primary", "xyz"), ("primary", "xyz"))
    whites = np.asarray(white_da.broadcast_like(template).transpose(*lead, "xyz").values, dtype=float).reshape(-1, 3)
    _check_solid(d_values, lead, shape, coords)
    _check_solid(r_values, lead, shape, coords)
    meshes = [intersection_triangles(d, r) for d, r in zip(d_values, r_values)]  # Qhull per item
    n_tri = max(len(t) for t, _ in meshes)
    tri = np.zeros((len(meshes), n_tri, 3, 3))
    centres = np.zeros((len(meshes), 3))
    for row, (t, centre) in enumerate(meshes):
        tri[row, : len(t)] = t
        if centre is not None:
            centres[row] = centre
    inter, _, _ = triangles_lab_volume(tri, whites, centres, rtol)
    ref_volume, _, _ = zonotope_lab_volume(r_values, whites, rtol)
    design_volume, _, _ = zonotope_lab_volume(d_values, whites, rtol)
    share = np.clip(inter / ref_volume, 0.0, 1.0)

    def wrap(values, long_name, units=VOLUME_UNITS):
        return lead_array(values, lead, shape, coords, attrs={"units": units, "long_name": long_name})

    return xr.Dataset(
        {
            "coverage": wrap(share, f"share of the {ref_name} CIELAB volume covered by the design", "1"),
            "intersection_volume": wrap(inter, "CIELAB volume of the intersection of the colour solids"),
            "reference_volume": wrap(ref_volume, f"CIELAB volume of the {ref_name} colour solid"),
            "design_volume": wrap(design_volume, "CIELAB volume of the design colour solid"),
        },
        attrs={"reference": ref_name, "rtol": rtol,
               "white": "sum of the design primaries" if white is None else "stated white",
               "method": "half-space intersection in XYZ (Qhull), surface refined in CIELAB, divergence theorem"},
    )
