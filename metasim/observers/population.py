"""Seeded populations of individual CIE 170-1 observers.

Each observer is the CIE 170-1:2006 observer of its age and field size with eight individual
deviations (Asano, Fairchild & Blondé 2016) drawn independently from normal distributions with mean
0 and the configured standard deviations. Default standard deviations, quoted from memory of Asano,
Fairchild & Blondé (2016) and kept as parameters: lens density 18.7 %, macular density 36.5 %, L, M
and S peak optical density 9.0 %, 9.0 %, 7.4 %, L, M and S peak-wavelength shift 2.0, 1.5, 1.3 nm.

The drawn values are stored unchanged as ``observer`` coordinates. A density deviation below
−100 % (possible for the macula, 2.7 standard deviations) gives zero density in the model.

Ages and field sizes may be

* one number (every observer the same);
* a pair ``(lo, hi)``: uniform on [lo, hi];
* a histogram: a dict whose keys are either a value (drawn exactly) or a ``(lo, hi)`` bin (uniform
  inside) and whose values are relative frequencies; or a 1-D DataArray of relative frequencies
  whose coordinate holds the values.

Draws, in this order, from ``numpy.random.default_rng(seed)``: ages, field sizes, then the eight
deviations in the order of :data:`metasim.observers.physiological.DEVIATIONS`.

References
----------
Asano, Y., Fairchild, M. D. & Blondé, L. (2016) Individual colorimetric observer model.
PLoS ONE 11(2), e0145671. CIE 170-1:2006; CIE 170-2:2015.
"""

from __future__ import annotations

import json
from numbers import Real

import numpy as np
import xarray as xr

from metasim._memory import largest_fitting, require_memory
from metasim.checks import number, seed_attributes, seed_generator, whole_number
from metasim.errors import ObserverError
from metasim.spectra import as_wavelengths, default_grid
from metasim.observers.physiological import DEFAULT_PEAK_SHIFT_AXIS, DEVIATIONS, check_parameter, observers_dataset
from metasim.observers.pigments import check_absorbance_interpolation, check_peak_shift_axis

#: Default standard deviations of the eight deviations (from memory of Asano et al. 2016).
DEFAULT_SD = {
    "lens_density_pct": 18.7,
    "macular_density_pct": 36.5,
    "l_density_pct": 9.0,
    "m_density_pct": 9.0,
    "s_density_pct": 7.4,
    "l_shift_nm": 2.0,
    "m_shift_nm": 1.5,
    "s_shift_nm": 1.3,
}
#: Peak memory of a population per observer and wavelength: about 16 float64 measured (lms, cmf and
#: the model's intermediate arrays), 20 allowed.
POPULATION_BYTES_PER_POINT = 20 * 8
POPULATION_MODEL = (
    "CIE 170-1:2006 physiological observers with normally distributed individual deviations "
    "(Asano, Fairchild & Blondé 2016)"
)


def _draw(name: str, distribution, n: int, rng: np.random.Generator, extrapolate: bool):
    """Draw n values of ``name`` (``age_years`` or ``field_size_deg``) following ``distribution``;
    return (values, description).

    Every value the distribution states is checked here (:func:`~metasim.observers.physiological.check_parameter`),
    so every draw lies inside the model's range and is not checked again.
    """
    def checked(value) -> float:
        return float(check_parameter(name, value, extrapolate)[0])

    if isinstance(distribution, Real) and not isinstance(distribution, bool):
        value = checked(distribution)
        return np.full(n, value), {"distribution": "fixed", "value": value}
    if isinstance(distribution, (tuple, list)) and len(distribution) == 2:
        lo, hi = (checked(v) for v in distribution)
        if lo > hi:
            raise ObserverError(f"{name} range ({lo:g}, {hi:g}) is not allowed; need lo <= hi")
        return rng.uniform(lo, hi, n), {"distribution": "uniform", "low": lo, "high": hi}
    if isinstance(distribution, xr.DataArray):
        if distribution.ndim != 1 or distribution.dims[0] not in distribution.coords:
            raise ObserverError(f"{name} histogram DataArray must be 1-D with a coordinate of values")
        distribution = dict(zip(distribution.coords[distribution.dims[0]].values.tolist(), distribution.values.tolist()))
    if not isinstance(distribution, dict) or not distribution:
        raise ObserverError(
            f"{name}={distribution!r} is not allowed; give a number, a (lo, hi) pair, or a histogram "
            "(dict or DataArray of relative frequencies)"
        )
    bins, weights = [], []
    for key, weight in distribution.items():
        if isinstance(key, (tuple, list)) and len(key) == 2:
            lo, hi = (checked(v) for v in key)
            if lo > hi:
                raise ObserverError(f"{name} histogram bin ({lo:g}, {hi:g}) is not allowed; need lo <= hi")
        else:
            lo = hi = checked(key)
        if not isinstance(weight, Real) or not np.isfinite(weight) or weight < 0:
            raise ObserverError(f"{name} histogram weight {weight!r} for {key!r} is not allowed; need a number >= 0")
        bins.append((lo, hi))
        weights.append(float(weight))
    total = sum(weights)
    if total <= 0:
        raise ObserverError(f"{name} histogram weights sum to {total:g}; need a positive total")
    edges = np.asarray(bins)
    choice = rng.choice(len(bins), size=n, p=np.asarray(weights) / total)
    values = rng.uniform(edges[choice, 0], edges[choice, 1])
    return values, {"distribution": "histogram", "bins": edges.tolist(), "weights": weights}


def observer_population(
    n: int,
    *,
    seed,
    age_years=32,
    field_size_deg=2,
    sd_lens_density_pct: float = DEFAULT_SD["lens_density_pct"],
    sd_macular_density_pct: float = DEFAULT_SD["macular_density_pct"],
    sd_l_density_pct: float = DEFAULT_SD["l_density_pct"],
    sd_m_density_pct: float = DEFAULT_SD["m_density_pct"],
    sd_s_density_pct: float = DEFAULT_SD["s_density_pct"],
    sd_l_shift_nm: float = DEFAULT_SD["l_shift_nm"],
    sd_m_shift_nm: float = DEFAULT_SD["m_shift_nm"],
    sd_s_shift_nm: float = DEFAULT_SD["s_shift_nm"],
    wavelengths=None,
    extrapolate: bool = False,
    lens_components: xr.Dataset | None = None,
    peak_shift_axis: str = DEFAULT_PEAK_SHIFT_AXIS,
    absorbance_interpolation: str = "linear",
) -> xr.Dataset:
    """A reproducible population of n individual CIE 170-1 observers.

    Parameters
    ----------
    n : int
        Number of observers, >= 1.
    seed : int or numpy.random.Generator
        Source of every random draw; an integer is recorded in the result's ``seed`` attribute.
    age_years : number, (lo, hi), dict or DataArray
        Fixed age, uniform range, or histogram (see the module docstring); 20-80 years.
    field_size_deg : number, (lo, hi), dict or DataArray
        Likewise, 1-10 degrees.
    sd_* : float
        Standard deviation of each deviation (% or nm), >= 0; defaults from memory of Asano,
        Fairchild & Blondé (2016).
    wavelengths, extrapolate, lens_components, peak_shift_axis, absorbance_interpolation
        As in :func:`metasim.observers.physiological.physiological_observers` (``peak_shift_axis``:
        ``"log_wavelength"``, the default, or ``"wavelength"``; ``absorbance_interpolation``:
        ``"linear"``, the default, or ``"monotone_cubic"``).

    Returns
    -------
    xarray.Dataset
        ``lms`` (observer, cone, wavelength) and ``cmf`` (observer, xyz, wavelength); ``age_years``,
        ``field_size_deg`` and the eight deviations as ``observer`` coordinates; attributes
        ``seed``, ``model``, ``parameters`` (JSON text) and ``metasim_version``.

    References
    ----------
    Asano, Fairchild & Blondé (2016) PLoS ONE 11, e0145671; CIE 170-1:2006; CIE 170-2:2015.

    Examples
    --------
    >>> import metasim
    >>> population = metasim.observer_population(5, seed=1, age_years=(20, 70))
    >>> population.sizes["observer"], bool(population["age_years"].min() >= 20), population.attrs["seed"]
    (5, True, 1)
    """
    n = whole_number(n, "n", error=ObserverError, minimum=1, note="the number of observers")
    sds = {
        "lens_density_pct": sd_lens_density_pct, "macular_density_pct": sd_macular_density_pct,
        "l_density_pct": sd_l_density_pct, "m_density_pct": sd_m_density_pct,
        "s_density_pct": sd_s_density_pct, "l_shift_nm": sd_l_shift_nm,
        "m_shift_nm": sd_m_shift_nm, "s_shift_nm": sd_s_shift_nm,
    }
    sds = {name: number(sd, f"sd_{name}", error=ObserverError, minimum=0.0, note="a standard deviation")
           for name, sd in sds.items()}
    check_peak_shift_axis(peak_shift_axis)
    check_absorbance_interpolation(absorbance_interpolation)
    rng, recorded_seed = seed_generator(seed, error=ObserverError)
    seed_attrs = seed_attributes(rng, recorded_seed)
    points = as_wavelengths(default_grid() if wavelengths is None else wavelengths).size
    require_memory(POPULATION_BYTES_PER_POINT * n * points, f"a population of {n:,} observers",
                   f"use at most about {largest_fitting(POPULATION_BYTES_PER_POINT * points):,} observers")
    age_years, age_distribution = _draw("age_years", age_years, n, rng, extrapolate)
    field_size_deg, field_distribution = _draw("field_size_deg", field_size_deg, n, rng, extrapolate)
    deviations = {name: rng.normal(0.0, sds[name], n) for name in DEVIATIONS}
    population = observers_dataset({"age_years": age_years, "field_size_deg": field_size_deg, **deviations},
                                   wavelengths=wavelengths, extrapolate=extrapolate,
                                   lens_components=lens_components, peak_shift_axis=peak_shift_axis,
                                   absorbance_interpolation=absorbance_interpolation)
    parameters = {
        "n": n, "age_years": age_distribution, "field_size_deg": field_distribution,
        **{f"sd_{k}": float(v) for k, v in sds.items()},
        "deviation_distribution": "normal, mean 0, independent",
        "lens_components": None if lens_components is None else lens_components.attrs.get("source", "user"),
        "peak_shift_axis": peak_shift_axis,
        "absorbance_interpolation": absorbance_interpolation,
    }
    population.attrs.update({
        **seed_attrs,
        "model": POPULATION_MODEL,
        "parameters": json.dumps(parameters),
        "default_sd_source": "Asano, Fairchild & Blondé (2016), values from memory",
    })
    return population


__all__ = ["DEFAULT_SD", "observer_population"]
