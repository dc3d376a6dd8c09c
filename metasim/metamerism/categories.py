"""Observer categories: a few representative observers that stand for a large population.

Method (metasim's own):

1. A fixed stimulus set, evaluated on the population's wavelength grid: the 14 CIE 13.3 test colour
   samples under CIE illuminant D65 (:func:`metasim.metamerism.cie_13_3_samples`: broadband surface
   colours), plus 9 narrow-band stimuli (:func:`metasim.emitters.gaussian`, 20 nm full width at half
   maximum, peaks 450-650 nm every 25 nm; the spectra where observers disagree most, as with laser,
   quantum-dot and micro-LED primaries).
2. For every observer, CIELAB of every stimulus (:func:`metasim.colorimetry.cielab.xyz_to_lab_array`),
   from that observer's own XYZ functions, relative to that observer's own XYZ of D65 (Y of the
   white = 100): each observer is adapted to the white. The D65 white is scaled so the
   population-mean observer has Y = 100, each narrow-band stimulus so the population-mean observer
   has Y = 20.
3. The observers' concatenated CIELAB vectors are clustered by k-means
   (:func:`scipy.cluster.vq.kmeans2`: k-means++ seeding, Lloyd iterations), the best of several
   seeded restarts by within-cluster sum of squares. The squared Euclidean distance between two
   observers is the sum over stimuli of ΔE*ab², so observers in one category see the stimulus set
   alike. For speed the vectors are first expressed in their principal axes, dropping only axes
   that together hold less than 1e-5 of the variance.
4. Each category is represented by its member nearest the cluster mean: an actual population
   member, so physiologically valid, not an average of functions. Its ``weight`` is the share of
   the population in its category.

References
----------
CIE 13.3-1995 (test colour samples); CIE 15:2004 (CIELAB, illuminant D65); Lloyd, S. P. (1982)
IEEE Trans. Inf. Theory 28, 129-137 (k-means); Arthur, D. & Vassilvitskii, S. (2007) k-means++,
Proc. SODA 2007, 1027-1035.
"""

from __future__ import annotations

import warnings

import numpy as np
import xarray as xr

from metasim._version import __version__
from metasim.checks import seed_generator, whole_number
from metasim.colorimetry.cielab import LAB, xyz_to_lab_array
from metasim.colorimetry.integration import spectral_products
from metasim.emitters import gaussian
from metasim.errors import ObserverError
from metasim.metamerism.stimuli import cie_13_3_samples, illuminant_spectrum
from metasim.spectra import check_wavelengths
from metasim.units import DELTA_E_AB

NARROW_BAND_PEAKS_NM = tuple(range(450, 651, 25))
NARROW_BAND_FWHM_NM = 20.0
NARROW_BAND_Y = 20.0
RESTARTS = 4
#: Lloyd iterations of each k-means run (scipy's kmeans2 runs them all).
MAX_ITERATIONS = 100
#: Share of the feature variance the clustering may ignore (principal axes beyond it are dropped).
DISCARDED_VARIANCE = 1e-5


def category_stimuli(wavelengths) -> tuple[np.ndarray, np.ndarray, list[str]]:
    """White (D65) and stimulus spectra (stimulus × wavelength) on ``wavelengths``, with labels.

    References
    ----------
    CIE 13.3-1995; CIE 15:2004 (illuminant D65).
    """
    white = illuminant_spectrum("D65", wavelengths).values
    samples = cie_13_3_samples(wavelengths=wavelengths)
    surfaces = samples["reflectance"].transpose("stimulus", "wavelength").values * white
    bands = gaussian(list(NARROW_BAND_PEAKS_NM), NARROW_BAND_FWHM_NM, wavelengths, normalise="peak",
                     allow_outside_grid=True).transpose("primary", "wavelength").values
    labels = [str(v) for v in samples["stimulus"].values] + [f"narrow band {p} nm" for p in NARROW_BAND_PEAKS_NM]
    return white, np.concatenate([surfaces, bands]), labels


def observer_features(population: xr.Dataset) -> xr.DataArray:
    """CIELAB of the category stimulus set for every observer (``observer`` × ``stimulus`` × ``lab``).

    See the module docstring for the stimulus set and the adaptation to each observer's own white.

    Parameters
    ----------
    population : xarray.Dataset
        Observers with ``cmf`` (observer, xyz, wavelength) on a uniform grid, e.g. from
        :func:`metasim.observer_population`.

    Returns
    -------
    xarray.DataArray (observer, stimulus, lab)
        CIELAB L*, a*, b* (CIELAB units) of the 14 CIE 13.3 samples and 9 narrow bands
        (``narrow band 450 nm`` ... ``650 nm``) for every observer.

    Raises
    ------
    ObserverError
        ``population`` without a ``cmf`` variable of those dims.
    SpectrumError
        A grid that is not uniform.

    References
    ----------
    CIE 13.3-1995; CIE 15:2004.

    Examples
    --------
    >>> import metasim
    >>> from metasim.metamerism import observer_features
    >>> features = observer_features(metasim.observer_population(3, seed=1))
    >>> features.dims, features.shape
    (('observer', 'stimulus', 'lab'), (3, 23, 3))
    >>> features.sel(observer=0, stimulus="TCS01").round(1).values.tolist()
    [61.3, 21.6, 11.5]
    """
    cmf = _population_cmf(population)
    wl = check_wavelengths(population["wavelength"], where="population grid", uniform=True)
    step = wl[1] - wl[0]
    white, stimuli, labels = category_stimuli(wl)
    functions = cmf.transpose("observer", "xyz", "wavelength").values
    white_xyz = spectral_products(functions.reshape(-1, wl.size), white[None]).reshape(-1, 3) * step  # n × 3
    n_obs = functions.shape[0]
    stimulus_xyz = spectral_products(functions.reshape(-1, wl.size), stimuli).reshape(n_obs, 3, -1).transpose(0, 2, 1) * step
    white_scale = 100.0 / white_xyz[:, 1].mean()
    n_surfaces = len(labels) - len(NARROW_BAND_PEAKS_NM)
    band_scale = np.ones(len(labels))
    band_scale[n_surfaces:] = NARROW_BAND_Y / (stimulus_xyz[:, n_surfaces:, 1].mean(axis=0) * white_scale)
    lab = xyz_to_lab_array(stimulus_xyz * white_scale * band_scale[None, :, None], (white_xyz * white_scale)[:, None, :])
    return xr.DataArray(
        lab,
        dims=("observer", "stimulus", "lab"),
        coords={"observer": population["observer"].values, "stimulus": labels, "lab": list(LAB)},
        attrs={"units": "1", "long_name": "CIELAB of the category stimuli, each observer adapted to its own D65 white"},
    )


def _population_cmf(population) -> xr.DataArray:
    if not isinstance(population, xr.Dataset) or "cmf" not in population:
        raise ObserverError(
            f"population must be an xarray Dataset with a 'cmf' variable (from observer_population), "
            f"got {type(population).__name__}"
        )
    cmf = population["cmf"]
    if set(cmf.dims) != {"observer", "xyz", "wavelength"}:
        raise ObserverError(f"population 'cmf' needs dims (observer, xyz, wavelength), got {cmf.dims}")
    return cmf


def _squared_distances(points: np.ndarray, centres: np.ndarray) -> np.ndarray:
    d = (points**2).sum(1)[:, None] - 2.0 * points @ centres.T + (centres**2).sum(1)[None, :]
    return np.maximum(d, 0.0)


def _principal_components(points: np.ndarray) -> np.ndarray:
    """Centred points in the principal axes that hold all but :data:`DISCARDED_VARIANCE` of the variance.

    Distances change by at most that share of the total variance; the k-means work shrinks from
    3 × (number of stimuli) coordinates to about as many as there are observer parameters.
    """
    _, singular, axes = np.linalg.svd(points, full_matrices=False)
    share = np.cumsum(singular**2) / max(float((singular**2).sum()), np.finfo(float).tiny)
    keep = int(np.searchsorted(share, 1.0 - DISCARDED_VARIANCE) + 1)
    return points @ axes[:keep].T


def _kmeans(points: np.ndarray, k: int, rng: np.random.Generator) -> tuple[np.ndarray, np.ndarray]:
    """Labels and centres of the best of :data:`RESTARTS` k-means++ runs by within-cluster sum of squares.

    A run that leaves a cluster empty (possible only when observers coincide) does not count; if
    every run does, the points are fewer than ``k`` distinct ones and each becomes its own category
    first, the remaining categories taking the worst-fitting points.
    """
    from scipy.cluster.vq import kmeans2

    best, best_distortion = None, np.inf
    for _ in range(RESTARTS):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # an empty cluster: the run is not counted below
            centres, labels = kmeans2(points, k, iter=MAX_ITERATIONS, minit="++", missing="warn", seed=rng)
        if (np.bincount(labels, minlength=k) == 0).any():
            continue
        distortion = float(((points - centres[labels]) ** 2).sum())
        if distortion < best_distortion:
            best, best_distortion = (labels, centres), distortion
    if best is None:
        _, first, labels = np.unique(points, axis=0, return_index=True, return_inverse=True)
        labels = labels.reshape(-1)
        spare = np.setdiff1d(np.arange(len(points)), first)[: k - first.size]
        labels[spare] = first.size + np.arange(spare.size)
        centres = np.stack([points[labels == j].mean(0) for j in range(k)])
        best = (labels, centres)
    return best


def observer_categories(population: xr.Dataset, k: int, *, seed) -> xr.Dataset:
    """k representative observers of a population, chosen by clustering what they see.

    Parameters
    ----------
    population : xarray.Dataset
        From :func:`metasim.observer_population` (needs ``cmf`` with an ``observer`` dim).
    k : int
        Number of categories, 1 <= k <= number of observers.
    seed : int or numpy.random.Generator
        Seeds the k-means++ initialisation and restarts.

    Returns
    -------
    xarray.Dataset
        The k representative members (``observer`` dim, sorted by decreasing weight) with all of the
        population's variables and coordinates, plus ``observer`` coordinates ``weight`` (share of
        the population in the category) and ``category_rms_delta_e`` (mean over the category's
        members of the RMS over stimuli of ΔE*ab to the representative).

    References
    ----------
    Lloyd (1982); Arthur & Vassilvitskii (2007); CIE 13.3-1995; CIE 15:2004.

    Examples
    --------
    >>> import metasim
    >>> population = metasim.observer_population(30, seed=1, age_years=(20, 70))
    >>> categories = metasim.observer_categories(population, 3, seed=1)
    >>> categories.sizes["observer"], round(float(categories["weight"].sum()), 6)
    (3, 1.0)
    """
    n = _population_cmf(population).sizes["observer"]
    k = whole_number(k, "k", error=ObserverError, minimum=1, maximum=n,
                     note="the number of categories, at most the population size")
    rng, seed_attr = seed_generator(seed, error=ObserverError)
    features = observer_features(population)
    points = features.values.reshape(n, -1)
    points = points - points.mean(0)
    projected = _principal_components(points)
    labels, centres = _kmeans(projected, int(k), rng)
    distance = _squared_distances(projected, centres)[np.arange(n), labels]
    counts = np.bincount(labels, minlength=k)
    representatives = np.empty(k, dtype=int)
    spread = np.empty(k)
    n_stimuli = features.sizes["stimulus"]
    for j in range(k):  # k categories, not observers: a handful of small reductions
        members = np.flatnonzero(labels == j)
        representatives[j] = members[distance[members].argmin()]
        to_rep = ((points[members] - points[representatives[j]]) ** 2).sum(1) / n_stimuli
        spread[j] = np.sqrt(to_rep).mean()
    order = np.lexsort((representatives, -counts))
    chosen = population.isel(observer=representatives[order])
    chosen = chosen.assign_coords(
        weight=("observer", counts[order] / n, {"units": "1", "long_name": "share of the population in the category"}),
        category_rms_delta_e=("observer", spread[order], {
            "units": DELTA_E_AB, "long_name": "mean RMS CIELAB ΔE*ab of category members to their representative"}),
    )
    chosen.attrs.update({
        "categories": int(k),
        "category_seed": seed_attr,
        "category_method": f"k-means (scipy kmeans2, k-means++, best of {RESTARTS} restarts) on per-observer CIELAB "
                           "of a stimulus set; member nearest each cluster mean",
        "category_stimuli": "CIE 13.3 test colour samples 1-14 under D65; 9 Gaussian narrow bands 450-650 nm, 20 nm FWHM",
        "population_size": int(n),
        "metasim_version": __version__,
    })
    return chosen


__all__ = ["observer_categories", "observer_features", "category_stimuli", "NARROW_BAND_PEAKS_NM",
           "NARROW_BAND_FWHM_NM", "NARROW_BAND_Y", "RESTARTS"]
