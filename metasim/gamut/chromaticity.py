"""Chromaticity gamut of N primaries: hull polygon, area, coverage of reference gamuts, locus share.

The gamut of a display in a chromaticity diagram is the convex hull of its primaries' chromaticities
(additive mixtures of lights lie on the segments between them: Grassmann's laws, CIE 15:2004 §7.3).
Areas are in chromaticity units² of the chosen diagram: CIE 1931 xy or CIE 1976 u'v'
(CIE 15:2004 §8.1). Coverage of a reference is the share of the reference area that the design's
hull covers (intersection area / reference area). The spectrum locus of an observer is the convex
hull of the chromaticities of its own monochromatic stimuli (its ``cmf`` at each wavelength), so the
same functions serve the standard observer and each individual observer's own diagram.

Everything is vectorised over leading dims (``design``, ``observer``, ...): hulls and intersection
areas are single array expressions (see :mod:`metasim.gamut.polygon`); only the spectrum-locus hull
(hundreds of points) is computed per observer with Qhull, a fraction of a millisecond each.
"""

from __future__ import annotations

import functools

import numpy as np
import xarray as xr

from metasim.colorimetry import xyz_to_uv, xyz_to_xy
from metasim.checks import warn_renamed
from metasim.errors import DeprecatedNameWarning, GamutError
from metasim.gamut import polygon as geometry
from metasim.observers.convert import as_observer
from metasim.gamut._inputs import (
    REFERENCE_GAMUTS,
    check_space,
    describe_item,
    flatten,
    gamut_inputs,
    is_reference,
    lead_array,
    reference_name,
    primaries_xyz as as_primaries_xyz,
)

_LABELS = {"xy": ["x", "y"], "uv": ["u'", "v'"]}
_NAMES = {"xy": "CIE 1931 xy", "uv": "CIE 1976 u'v'"}
#: A hull smaller than this share of its points' squared extent is degenerate (collinear points).
DEGENERATE_AREA = 1e-9


def chromaticities(xyz: xr.DataArray, space: str) -> xr.DataArray:
    """Chromaticity (``chromaticity`` dim) of tristimulus values in ``space`` ("xy" or "uv")."""
    check_space(space)
    return xyz_to_xy(xyz) if space == "xy" else xyz_to_uv(xyz)


def _hull(points: np.ndarray, lead, shape, coords, space: str):
    """Hull of (M, N, 2) with the degenerate-input checks; returns next_vertex, on_hull, area."""
    bad = ~np.isfinite(points).all(axis=(1, 2))
    if bad.any():
        item = describe_item(lead, shape, coords, int(np.argmax(bad)))
        raise GamutError(f"{item}: a primary has no chromaticity (X + Y + Z = 0); primaries must not be black")
    next_vertex, on_hull = geometry.convex_hull(points)
    area = geometry.polygon_area(points, next_vertex)
    extent = np.max(np.ptp(points, axis=1), axis=1)
    degenerate = ~(area > DEGENERATE_AREA * extent**2) | (on_hull.sum(axis=1) < 3)
    if degenerate.any():
        i = int(np.argmax(degenerate))
        item = describe_item(lead, shape, coords, i)
        values = ", ".join(f"({a:.4g}, {b:.4g})" for a, b in points[i])
        raise GamutError(
            f"{item}: primaries {values} are collinear or coincide in {space} (hull area {area[i]:.3g}); "
            "a gamut needs at least 3 primaries not on one line"
        )
    return next_vertex, on_hull, area


def chromaticity_gamut(primaries_xyz, space: str = "xy", observer=None) -> xr.Dataset:
    """Chromaticity gamut (convex hull) of N primaries.

    Parameters
    ----------
    primaries_xyz : DataArray
        Tristimulus values with dims ``primary`` and ``xyz`` and any leading dims (``design``,
        ``observer`` ...); or primary spectra (``primary`` × ``wavelength``, or a display with a
        ``spectra`` attribute) together with ``observer``; or xy chromaticities (``chromaticity``
        dim), or a reference name (``"bt709"``, ``"display_p3"``, ``"dci_p3"``, ``"bt2020"``).
        Also colour-science display primaries (``RGB_DisplayPrimaries`` or any
        ``MultiSpectralDistributions``, with ``observer``), a colour-science ``RGB_Colourspace``, or
        a plain (N, 3) array of primary XYZ (rows = primaries) or (N, 2) of xy.
    space : {"xy", "uv"}
        CIE 1931 xy or CIE 1976 u'v'.
    observer : Dataset, optional
        Observer(s) to integrate spectra with (variable ``cmf``; a leading ``observer`` dim gives
        each observer's own diagram), or colour-science ``XYZ_ColourMatchingFunctions``.

    Returns
    -------
    Dataset
        ``area`` (leading dims), ``polygon`` (leading dims × ``vertex`` × ``chromaticity``,
        counter-clockwise, NaN padded), ``vertex_primary`` (index of the primary at each vertex, -1
        padded), ``on_hull`` (leading dims × ``primary``) and ``chromaticity_of_primary``.

    Raises
    ------
    GamutError
        Fewer than 3 primaries, a black primary, or primaries on one line (zero area).

    References
    ----------
    CIE 15:2004 Colorimetry §7.3, §8.1 (chromaticity diagrams); O'Rourke (1998) Computational
    Geometry in C (convex hull, shoelace area).

    Examples
    --------
    >>> import metasim
    >>> gamut = metasim.chromaticity_gamut("bt709")
    >>> round(float(gamut["area"]), 4)  # the BT.709 triangle in CIE 1931 xy (ITU-R BT.709-6 primaries)
    0.1121
    """
    check_space(space)
    xyz = as_primaries_xyz(primaries_xyz, observer, allow_chromaticity=True)
    chroma = chromaticities(xyz, space)
    points, lead, shape, coords = flatten(chroma, ("primary", "chromaticity"))
    next_vertex, on_hull, area = _hull(points, lead, shape, coords, space)
    order = geometry.ordered_vertices(next_vertex, on_hull)
    polygon = np.take_along_axis(points, np.maximum(order, 0)[..., None], axis=1)
    polygon = np.where(order[..., None] >= 0, polygon, np.nan)
    labels = _LABELS[space]
    n = points.shape[1]
    primary_coords = {k: v for k, v in xyz.coords.items() if v.dims == ("primary",)}
    unit = "1"
    out = xr.Dataset(
        {
            "area": lead_array(area, lead, shape, coords, attrs={
                "units": unit, "long_name": f"{_NAMES[space]} gamut area (convex hull of the primaries)"}),
            "polygon": lead_array(polygon, lead, shape, coords, extra_dims=("vertex", "chromaticity"),
                                  extra_coords={"chromaticity": labels, "vertex": np.arange(n)},
                                  attrs={"units": unit, "long_name": f"{_NAMES[space]} gamut polygon "
                                         "(counter-clockwise hull vertices, NaN padded)"}),
            "vertex_primary": lead_array(order, lead, shape, coords, extra_dims=("vertex",),
                                         extra_coords={"vertex": np.arange(n)},
                                         attrs={"units": "1", "long_name": "index along 'primary' of each "
                                                "hull vertex (-1 padded)"}),
            "on_hull": lead_array(on_hull, lead, shape, coords, extra_dims=("primary",),
                                  extra_coords=primary_coords,
                                  attrs={"units": "1", "long_name": "primary is a vertex of the gamut hull"}),
            "chromaticity_of_primary": lead_array(points, lead, shape, coords,
                                                  extra_dims=("primary", "chromaticity"),
                                                  extra_coords={**primary_coords, "chromaticity": labels},
                                                  attrs={"units": unit, "long_name": f"{_NAMES[space]} "
                                                         "chromaticity of each primary"}),
        },
        attrs={"space": space, "method": "convex hull by the edge test; shoelace area"},
    )
    return out


def _edges_of(polygon: xr.DataArray, lead: list[str], vertex_dim: str):
    """Edges (M, K, 2, 2) and mask (M, K) of NaN-padded counter-clockwise polygons."""
    points = np.asarray(polygon.transpose(*lead, vertex_dim, "chromaticity").values, dtype=float)
    points = points.reshape((-1,) + points.shape[len(lead):])
    valid = np.isfinite(points).all(axis=-1)
    count = valid.sum(axis=1)[:, None]
    index = np.arange(points.shape[1])[None, :]
    following = np.where(index + 1 < count, index + 1, 0)
    end = np.take_along_axis(points, following[..., None], axis=1)
    edges = np.nan_to_num(np.stack([points, end], axis=2))
    return edges, valid


def _as_gamut(value, space: str, observer=None) -> xr.Dataset:
    if isinstance(value, xr.Dataset) and "polygon" in value:
        if value.attrs.get("space", space) != space:
            raise GamutError(f"gamut is in space {value.attrs.get('space')!r} but space={space!r} was asked for")
        return value
    return chromaticity_gamut(value, space, observer)


def gamut_coverage(design, reference="bt709", space: str = "xy", observer=None) -> xr.DataArray:
    """Share (0..1) of a reference gamut's chromaticity area covered by the design's gamut.

    Parameters
    ----------
    design
        Anything :func:`chromaticity_gamut` accepts, or its result.
    reference
        A reference name (``"bt709"``, ``"display_p3"``, ``"dci_p3"``, ``"bt2020"``; primaries from
        colour-science ``colour.RGB_COLOURSPACES``), a colour-science ``RGB_Colourspace``, primaries
        (XYZ, xy, spectra with ``observer``, plain arrays as for :func:`chromaticity_gamut`) or a
        :func:`chromaticity_gamut` result; it may carry its own leading dims.
    space : {"xy", "uv"}

    Returns
    -------
    DataArray
        Intersection area / reference area, over the broadcast leading dims.

    References
    ----------
    Intersection of convex polygons by Green's theorem with Cyrus & Beck (1978) edge clipping;
    reference primaries ITU-R BT.709-6, SMPTE EG 432-1, SMPTE RP 431-2, ITU-R BT.2020-2.

    Examples
    --------
    >>> import metasim
    >>> float(metasim.gamut_coverage("bt2020", "bt709")), round(float(metasim.gamut_coverage("bt709", "bt2020")), 3)
    (1.0, 0.529)
    """
    check_space(space)
    if not (isinstance(design, xr.Dataset) and "polygon" in design):
        design, observer = gamut_inputs(design, observer)
    gamut = _as_gamut(design, space, observer)
    ref = _as_gamut(reference, space, observer)
    ref_name = reference_name(reference) if is_reference(reference) else "reference"
    poly_d = gamut["polygon"]
    poly_r = ref["polygon"].rename(vertex="vertex_reference")
    template = xr.broadcast(gamut["area"], ref["area"])[0]
    lead = list(template.dims)
    shape = tuple(template.shape)
    coords = {k: v for k, v in template.coords.items()}
    ea, ma = _edges_of(poly_d.broadcast_like(template), lead, "vertex")
    eb, mb = _edges_of(poly_r.broadcast_like(template), lead, "vertex_reference")
    inter = geometry.intersection_area(ea, ma, eb, mb)
    reference_area = np.asarray(ref["area"].broadcast_like(template).transpose(*lead).values, dtype=float)
    share = np.clip(inter / reference_area.reshape(-1), 0.0, 1.0)
    return lead_array(share, lead, shape, coords, attrs={
        "units": "1",
        "long_name": f"share of the {ref_name} {_NAMES[space]} area covered by the design gamut",
        "reference": ref_name,
        "space": space,
    }, name="coverage")


def _polygon_edges(polygon: np.ndarray):
    """Edges (M, K, 2, 2) and mask (M, K) of NaN-padded counter-clockwise polygons (M, K, 2)."""
    valid = np.isfinite(polygon).all(axis=-1)
    count = valid.sum(axis=1)[:, None]
    index = np.arange(polygon.shape[1])[None, :]
    following = np.where(index + 1 < count, index + 1, 0)
    end = np.take_along_axis(polygon, following[..., None], axis=1)
    return np.nan_to_num(np.stack([polygon, end], axis=2)), valid


def xy_gamut_numbers(xyz: np.ndarray, references=("bt709",), *, labels=None):
    """CIE 1931 xy gamut area, coverage of reference gamuts and primary chromaticities on numpy values.

    The numbers of :func:`chromaticity_gamut` (``space="xy"``) and :func:`gamut_coverage` for many
    items at once, without labelled arrays (the same arithmetic, so the same values): a sweep's
    per-chunk gamut figures.

    Parameters
    ----------
    xyz : (M, N, 3) array
        Tristimulus values of each item's N primaries (any scale: chromaticities are scale-free).
    references : sequence of str
        Reference gamut names (:data:`metasim.gamut.REFERENCE_GAMUTS`).
    labels : sequence, optional
        A label per item for error messages (default: the item index).

    Returns
    -------
    area (M,), coverage (M, len(references)), xy (M, N, 2)

    Raises
    ------
    GamutError
        A black primary, or primaries on one line (as :func:`chromaticity_gamut`).
    """
    xyz = np.asarray(xyz, dtype=float)
    x, y, z = xyz[..., 0], xyz[..., 1], xyz[..., 2]
    total = x + y + z
    with np.errstate(invalid="ignore", divide="ignore"):
        points = np.stack([x / total, y / total], axis=-1)
    count = points.shape[0]
    names = np.arange(count) if labels is None else np.asarray(labels)
    coords = {"design": xr.Variable("design", names)}
    next_vertex, on_hull, area = _hull(points, ["design"], (count,), coords, "xy")
    order = geometry.ordered_vertices(next_vertex, on_hull)
    polygon = np.take_along_axis(points, np.maximum(order, 0)[..., None], axis=1)
    polygon = np.where(order[..., None] >= 0, polygon, np.nan)
    ea, ma = _polygon_edges(polygon)
    coverage = np.empty((count, len(references)))
    for j, name in enumerate(references):
        eb, mb, reference_area = _reference_edges(name)
        inter = geometry.intersection_area(ea, ma, np.broadcast_to(eb, (count, *eb.shape[1:])),
                                           np.broadcast_to(mb, (count, mb.shape[1])))
        coverage[:, j] = np.clip(inter / reference_area, 0.0, 1.0)
    return area, coverage, points


@functools.lru_cache(maxsize=None)
def _reference_edges(name: str):
    """Edges, mask and area of a named reference gamut in CIE 1931 xy (made once per process)."""
    reference = chromaticity_gamut(name, "xy")
    edges, valid = _polygon_edges(np.asarray(reference["polygon"].values, dtype=float)[None])
    edges.flags.writeable = valid.flags.writeable = False
    return edges, valid, float(reference["area"].values)


def spectrum_locus(observer, space: str = "xy") -> xr.Dataset:
    """An observer's spectrum locus as a convex polygon (its own monochromatic chromaticities).

    Parameters
    ----------
    observer : xarray.Dataset or colour.XYZ_ColourMatchingFunctions
        Variable ``cmf`` (``xyz`` × ``wavelength``) with an optional leading ``observer`` dim.
        Wavelengths where X + Y + Z is below 1e-9 of its maximum are left out (no defined chromaticity).
    space : {"xy", "uv"}
        CIE 1931 x, y or CIE 1976 u', v'.

    Returns
    -------
    xarray.Dataset
        ``area`` (unit 1, chromaticity-diagram area) and ``polygon`` (``vertex`` × ``chromaticity``,
        counter-clockwise, NaN padded), per observer.

    Raises
    ------
    GamutError
        An unknown ``space`` or an observer without ``cmf``.

    References
    ----------
    CIE 15:2004 §7.3: the spectrum locus bounds the chromaticities of all real (non-negative) stimuli;
    hull by Qhull (Barber, Dobkin & Huhdanpaa 1996, doi:10.1145/235815.235821, via
    scipy.spatial.ConvexHull).

    Examples
    --------
    >>> import metasim
    >>> from metasim.gamut import spectrum_locus
    >>> from metasim.spectra import wavelength_grid
    >>> observer = metasim.standard_observer("cie1931_2", wavelength_grid(360, 830, 5))
    >>> round(float(spectrum_locus(observer)["area"]), 4), round(float(spectrum_locus(observer, "uv")["area"]), 4)
    (0.3334, 0.1953)
    """
    check_space(space)
    observer = as_observer(observer)
    if not isinstance(observer, xr.Dataset) or "cmf" not in observer:
        raise GamutError("observer must be a Dataset with a 'cmf' variable (xyz x wavelength) or colour-science "
                         "XYZ_ColourMatchingFunctions")
    cmf = observer["cmf"]
    chroma = chromaticities(cmf, space)
    total = cmf.sum("xyz")
    chroma = chroma.where(total > 1e-9 * total.max("wavelength"))
    points, lead, shape, coords = flatten(chroma, ("wavelength", "chromaticity"))
    hulls = [geometry.points_hull(p) for p in points]  # one Qhull call per observer
    size = max(len(h) for h in hulls)
    polygon = np.full((len(hulls), size, 2), np.nan)
    area = np.empty(len(hulls))
    for i, h in enumerate(hulls):
        polygon[i, : len(h)] = h
        x, y = h[:, 0] - h[:, 0].mean(), h[:, 1] - h[:, 1].mean()
        area[i] = 0.5 * np.sum(x * np.roll(y, -1) - np.roll(x, -1) * y)
    return xr.Dataset(
        {
            "area": lead_array(area, lead, shape, coords, attrs={
                "units": "1", "long_name": f"{_NAMES[space]} area inside the spectrum locus (convex hull)"}),
            "polygon": lead_array(polygon, lead, shape, coords, extra_dims=("vertex", "chromaticity"),
                                  extra_coords={"vertex": np.arange(size), "chromaticity": _LABELS[space]},
                                  attrs={"units": "1", "long_name": f"{_NAMES[space]} spectrum locus "
                                         "(convex hull, counter-clockwise, NaN padded)"}),
        },
        attrs={"space": space, "method": "convex hull of the monochromatic chromaticities (Qhull)"},
    )


def spectrum_locus_coverage(design, observer, space: str = "xy") -> xr.DataArray:
    """Share (0..1) of the observer's spectrum-locus area (every chromaticity it can see) covered by
    the design's gamut (was ``locus_share``, still importable for one release with a warning).

    ``design`` is anything :func:`chromaticity_gamut` accepts; spectra are integrated with the same
    ``observer``, so each individual observer's gamut is compared with that observer's own locus.

    Parameters
    ----------
    design : DataArray, Display or chromaticities
        Primaries (``primary`` × ``wavelength``, optional ``design``), a display, or what
        :func:`chromaticity_gamut` takes.
    observer : Dataset
        Colour-matching functions (one observer or a population with an ``observer`` dim).
    space : {"xy", "uv"}
        CIE 1931 xy or CIE 1976 u'v'.

    Returns
    -------
    xarray.DataArray
        The share covered (units 1), per design and observer when given.

    Raises
    ------
    metasim.errors.GamutError
        Inputs :func:`chromaticity_gamut` refuses, or an unknown ``space``.

    References
    ----------
    CIE 15:2004 (chromaticity diagrams, the spectrum locus); the area share of the convex hulls is
    common practice, no source.

    Examples
    --------
    >>> import metasim
    >>> from metasim.emitters import laser_line
    >>> lasers = laser_line([630, 532, 465], 1.0, name=["R", "G", "B"])
    >>> share = spectrum_locus_coverage(lasers, metasim.standard_observer("cie1931_2"))
    >>> share.attrs["units"], round(float(share), 2)
    ('1', 0.63)
    """
    design, observer = gamut_inputs(design, observer)
    observer = as_observer(observer)
    locus = spectrum_locus(observer, space)
    share = gamut_coverage(design, locus, space, observer)
    share.attrs["long_name"] = f"share of the spectrum-locus {_NAMES[space]} area covered by the design gamut"
    share.attrs["reference"] = "spectrum locus"
    return share


def locus_share(design, observer, space: str = "xy") -> xr.DataArray:
    """The old name of :func:`spectrum_locus_coverage` (works for one release, with a warning)."""
    warn_renamed("locus_share()", "spectrum_locus_coverage()", DeprecatedNameWarning)
    return spectrum_locus_coverage(design, observer, space)


def observer_gamut(spectra, observer, space: str = "xy", references=tuple(REFERENCE_GAMUTS)) -> xr.Dataset:
    """The gamut of primaries in each observer's own chromaticity diagram.

    Parameters
    ----------
    spectra
        Primary spectra (``primary`` × ``wavelength``, optional ``design``) or a display.
    observer : xarray.Dataset or colour.XYZ_ColourMatchingFunctions
        ``cmf`` (xyz, wavelength) with a leading ``observer`` dim (a population) or a single observer.
    space : {"xy", "uv"}
        CIE 1931 x, y or CIE 1976 u', v'.
    references : sequence of names
        Reference gamuts whose coverage to report. They are defined by CIE 1931 chromaticities, so
        their coverage is meaningful for the CIE 1931 observer only; it is reported for every
        observer as the share of the standard reference area, stated in the attributes.

    Returns
    -------
    Dataset
        The :func:`chromaticity_gamut` variables plus ``locus_area``, ``spectrum_locus_coverage`` and
        ``coverage`` (``reference`` dim), per observer.

    Raises
    ------
    GamutError
        Primaries or an observer the gamut functions refuse (see :func:`chromaticity_gamut`), an
        unknown ``space`` or reference name.

    References
    ----------
    CIE 15:2004 §7.3 (chromaticity diagrams, the spectrum locus); CIE 170-1:2006 (individual
    observers); reference primaries ITU-R BT.709-6, SMPTE EG 432-1, SMPTE RP 431-2, ITU-R BT.2020-2.

    Examples
    --------
    Three laser primaries in the diagrams of three individual observers:

    >>> import metasim
    >>> from metasim.emitters import laser_line
    >>> from metasim.gamut import observer_gamut
    >>> from metasim.spectra import wavelength_grid
    >>> grid = wavelength_grid(390, 830, 5)
    >>> lasers = laser_line([638, 532, 465], 1.0, grid, name=["R", "G", "B"])
    >>> gamut = observer_gamut(lasers, metasim.observer_population(3, seed=1, wavelengths=grid),
    ...                        references=["bt709", "bt2020"])
    >>> gamut["area"].round(4).values.tolist(), gamut["locus_area"].round(4).values.tolist()
    ([0.2182, 0.2128, 0.2042], [0.3932, 0.3169, 0.3095])
    >>> gamut["coverage"].sel(reference="bt709").round(3).values.tolist()
    [0.971, 1.0, 1.0]
    """
    spectra, observer = gamut_inputs(spectra, observer)
    observer = as_observer(observer)
    gamut = chromaticity_gamut(spectra, space, observer)
    locus = spectrum_locus(observer, space)
    gamut["locus_area"] = locus["area"]
    gamut["spectrum_locus_coverage"] = gamut_coverage(gamut, locus, space)
    gamut["spectrum_locus_coverage"].attrs.update(long_name="share of the observer's own spectrum-locus area covered",
                                      reference="spectrum locus")
    if references:
        cover = xr.concat([gamut_coverage(gamut, name, space) for name in references], dim="reference")
        cover = cover.assign_coords(reference=list(references))
        cover.attrs = {"units": "1", "long_name": "share of each reference gamut area covered",
                       "note": "references are CIE 1931 chromaticities, compared as given in each diagram"}
        gamut["coverage"] = cover
    gamut.attrs["observers"] = int(observer.sizes.get("observer", 1))
    return gamut
