"""Forward model of colour matches: what an individual CIE 170-1 observer would set, with derivatives.

A match of stimulus s (a monochromatic test light, or a reference spectrum) by three primaries is a
cone-excitation match for the observer: its cones see the same in both fields. The amounts (or
linear drive values) an observer with parameters θ sets are therefore

    amount_s(θ) = A(θ)⁻¹ · (t_s(θ) − k(θ)),

A (cone × primary) the cone excitations of the three primaries, t_s those of the stimulus and k
those of the display's black (zero for colour-matching functions). Excitations are sums over the
1-nm base grid of the CIE 170-1 model (390-830 nm) of the observer's cone fundamentals times
weights that encode each spectrum (:func:`monochromatic_weights`, :func:`spectral_weights`): the
linear-interpolation weights of a monochromatic light, or a spectrum on its own grid mapped onto
the base nodes by the transpose of the linear interpolation that puts observer functions on that
grid, so an excitation equals the rectangle-rule integral the display layer computes. A
per-cone scale cancels in A⁻¹·t and the LMS → XYZ matrix does not enter a cone match, so the peak
normalisation and the CIE 170-2 matrix are not needed here.

The cone fundamentals are those of :mod:`metasim.observers.physiological` (same absorbances,
densities, ageing, shift axis), evaluated only at the base nodes the weights touch::

    lms_c(λ) = λ · [1 − 10^(−D_c · a_c'(λ))] · 10^(−f_mac · D_mac(λ) − f_lens · D_ocul(λ, A))

with the absorbance table read by monotone cubic interpolation at shifted positions
(:data:`FIT_INTERPOLATION`), and differentiated analytically with respect to the eight deviations: the lens and macular factors
``f = max(0, 1 + pct/100)`` and the peak densities act on the logarithm or through
∂α/∂D = ln10 · a · 10^(−D·a); the peak shifts through ∂α/∂a = ln10 · D · 10^(−D·a) times the slope
of the interpolated absorbance (:func:`metasim.observers.pigments.shifted_absorbance`); age through
a central difference of the ocular media density (exact for the quadratic age terms).

References
----------
CIE 170-1:2006; CIE 203:2012; Asano, Fairchild & Blondé (2016) PLoS ONE 11, e0145671; Wyszecki &
Stiles (1982) Color Science, 2nd ed. (trichromatic matching and colour-matching functions).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from metasim.errors import FittingError
from metasim.observers.physiological import (
    BASE_WAVELENGTHS,
    DEVIATIONS,
    MACULAR_TABLE,
    absorbance_table,
    macular_peak_density,
    ocular_density_values,
    optical_density_table,
    photopigment_peak_density,
)
from metasim.observers.pigments import DEFAULT_PEAK_SHIFT_AXIS, shifted_absorbance

LN10 = np.log(10.0)
#: Parameter order of the fit: the eight deviations, then age when it is fitted.
PARAMETERS = (*DEVIATIONS, "age_years")
#: Subjects per block of array work (bounds the temporaries for broadband spectra).
BLOCK_SUBJECTS = 256
#: Step (years) of the central difference of the ocular media density in age.
AGE_STEP_YEARS = 1e-3
#: The fit reads the absorbance table by monotone cubic interpolation: linear reading makes the
#: matches piecewise linear in the shifts, with a derivative jump each time a reading position
#: crosses a 1-nm node, and the posterior then has spurious local optima a few hundredths of a
#: prior standard deviation apart (measured); the cubic reading is smooth in the shifts.
FIT_INTERPOLATION = "monotone_cubic"


@dataclass(frozen=True)
class MatchGeometry:
    """What a set of matches measures, as weights on the base nodes of the CIE 170-1 model.

    ``weights`` rows: the S stimuli, then the three primaries, then the black; columns: the base
    nodes ``nodes`` (indices into :data:`BASE_WAVELENGTHS`) that any row touches.
    """

    nodes: np.ndarray
    weights: np.ndarray

    @property
    def n_stimuli(self) -> int:
        return self.weights.shape[0] - 4

    @property
    def wavelengths(self) -> np.ndarray:
        return BASE_WAVELENGTHS[self.nodes]


def monochromatic_weights(wavelengths_nm) -> np.ndarray:
    """Weights (len × base grid) of unit-energy monochromatic lights: linear interpolation between nodes."""
    wl = np.atleast_1d(np.asarray(wavelengths_nm, dtype=float))
    lo, hi = BASE_WAVELENGTHS[0], BASE_WAVELENGTHS[-1]
    bad = ~np.isfinite(wl) | (wl < lo) | (wl > hi)
    if bad.any():
        raise FittingError(f"monochromatic wavelength {wl[bad][0]!r} nm is outside the observer model; "
                           f"allowed: {lo:g}-{hi:g} nm")
    pos = wl - lo
    i0 = np.clip(np.floor(pos).astype(int), 0, BASE_WAVELENGTHS.size - 2)
    frac = pos - i0
    out = np.zeros((wl.size, BASE_WAVELENGTHS.size))
    rows = np.arange(wl.size)
    out[rows, i0] = 1.0 - frac
    out[rows, i0 + 1] += frac
    return out


def spectral_weights(spectra: np.ndarray, grid_nm: np.ndarray) -> np.ndarray:
    """Weights (rows × base grid) of spectra sampled on a uniform grid (rectangle rule, step × values).

    ``Σ_node lms(node) · weight(node)`` equals ``step · Σ_grid lms_on_grid · spectrum`` with the
    observer functions put on the grid by linear interpolation from the base grid, 0 outside
    390-830 nm (as :func:`metasim.observers.physiological_observers` does).
    """
    grid = np.asarray(grid_nm, dtype=float)
    step = float(grid[1] - grid[0]) if grid.size > 1 else 1.0
    inside = (grid >= BASE_WAVELENGTHS[0]) & (grid <= BASE_WAVELENGTHS[-1])
    interpolation = monochromatic_weights(grid[inside])  # (grid points inside, base nodes)
    return step * np.asarray(spectra, dtype=float)[:, inside] @ interpolation


def match_geometry(stimuli: np.ndarray, primaries: np.ndarray, black: np.ndarray | None = None) -> MatchGeometry:
    """Stack stimulus (S × base), primary (3 × base) and black (base) weights, keeping used nodes only."""
    black = np.zeros(BASE_WAVELENGTHS.size) if black is None else np.asarray(black, dtype=float)
    weights = np.concatenate([stimuli, primaries, black[None, :]])
    nodes = np.flatnonzero(np.any(weights != 0.0, axis=0))
    return MatchGeometry(nodes=nodes, weights=np.ascontiguousarray(weights[:, nodes]))


def _cone_terms(params: np.ndarray, age: np.ndarray, field: np.ndarray, wl: np.ndarray, nodes: np.ndarray,
                axis: str, interpolation: str, lens_components, fit_age: bool, jacobian: bool):
    """Cone fundamentals (n, 3, B) at the nodes and, with ``jacobian``, their derivatives (n, p, 3, B)."""
    absorbances, peak_nm = absorbance_table()
    n = params.shape[0]
    dev = {name: params[:, i] for i, name in enumerate(DEVIATIONS)}
    if fit_age:
        age = params[:, len(DEVIATIONS)]

    def factor(name):
        raw = 1.0 + dev[name] / 100.0
        return np.maximum(raw, 0.0), (raw > 0.0) / 100.0  # value and d/d(pct)

    f_lens, df_lens = factor("lens_density_pct")
    f_mac, df_mac = factor("macular_density_pct")
    ocular = ocular_density_values(age, lens_components)[:, nodes]
    macular = np.outer(macular_peak_density(field) / 0.35, optical_density_table(MACULAR_TABLE)[nodes])
    log_t = -LN10 * (f_lens[:, None] * ocular + f_mac[:, None] * macular)  # ln of the media transmittance
    quantal = wl * np.exp(log_t)  # (n, B)
    base_density = photopigment_peak_density(field)  # (n, 3)
    scale = [factor(f"{c}_density_pct") for c in "lms"]
    density = base_density * np.stack([s[0] for s in scale], axis=1)  # (n, 3)
    shift = np.stack([dev[f"{c}_shift_nm"] for c in "lms"], axis=1)
    if jacobian:
        a, da = shifted_absorbance(BASE_WAVELENGTHS, absorbances, peak_nm, shift, axis, wl,
                                   interpolation=interpolation, derivative=True)
    else:
        a = shifted_absorbance(BASE_WAVELENGTHS, absorbances, peak_nm, shift, axis, wl, interpolation=interpolation)
    remaining = np.exp(-LN10 * density[..., None] * a)  # 10^(−D·a)
    lms = (1.0 - remaining) * quantal[:, None, :]
    if not jacobian:
        return lms, None
    p = len(DEVIATIONS) + int(fit_age)
    d = np.zeros((n, p, 3, wl.size))
    d[:, 0] = lms * (-LN10 * ocular * df_lens[:, None])[:, None, :]
    d[:, 1] = lms * (-LN10 * macular * df_mac[:, None])[:, None, :]
    for c in range(3):
        d_alpha_d_density = LN10 * a[:, c] * remaining[:, c]
        d[:, 2 + c, c] = quantal * d_alpha_d_density * (base_density[:, c] * scale[c][1])[:, None]
        d[:, 5 + c, c] = quantal * (LN10 * density[:, c, None] * remaining[:, c]) * da[:, c]
    if fit_age:
        up = ocular_density_values(age + AGE_STEP_YEARS, lens_components)[:, nodes]
        down = ocular_density_values(age - AGE_STEP_YEARS, lens_components)[:, nodes]
        d_ocular = (up - down) / (2.0 * AGE_STEP_YEARS)
        d[:, 8] = lms * (-LN10 * f_lens[:, None] * d_ocular)[:, None, :]
    return lms, d


def _inverse(matrix: np.ndarray) -> np.ndarray:
    """Batched 3 × 3 inverses; NaN for singular matrices (a trial point the solver then rejects)."""
    try:
        return np.linalg.inv(matrix)
    except np.linalg.LinAlgError:
        singular = ~(np.abs(np.linalg.det(matrix)) > 0)
        safe = np.where(singular[:, None, None], np.eye(3), matrix)
        inverse = np.linalg.inv(safe)
        inverse[singular] = np.nan
        return inverse


def primary_condition(geometry: MatchGeometry, field_size_deg: float = 2.0) -> float:
    """Condition number of the primaries' cone-excitation matrix for the mean observer of age 32."""
    lms, _ = _cone_terms(np.zeros((1, len(DEVIATIONS))), np.array([32.0]), np.array([float(field_size_deg)]),
                         geometry.wavelengths, geometry.nodes, DEFAULT_PEAK_SHIFT_AXIS, FIT_INTERPOLATION, None,
                         False, False)
    matrix = (lms @ geometry.weights[-4:-1].T)[0]
    matrix = matrix / np.abs(matrix).max(axis=1, keepdims=True).clip(np.finfo(float).tiny)  # per-cone scale is free
    return float(np.linalg.cond(matrix))


def predict(geometry: MatchGeometry, params: np.ndarray, age: np.ndarray, field: np.ndarray, *,
            fit_age: bool = False, peak_shift_axis: str = DEFAULT_PEAK_SHIFT_AXIS,
            absorbance_interpolation: str = FIT_INTERPOLATION, lens_components=None, jacobian: bool = True):
    """Predicted amounts (n, S, 3) and, with ``jacobian``, their derivatives (n, p, S, 3).

    ``params`` (n, p): the eight deviations in :data:`DEVIATIONS` order, then age (years) when
    ``fit_age`` (``age`` is then ignored); ``age``, ``field`` (n,): years and degrees. Subjects whose
    primaries' cone excitations are singular (possible only far outside the population) get NaN.
    """
    params = np.atleast_2d(np.asarray(params, dtype=float))
    n, p = params.shape
    S = geometry.n_stimuli
    amounts = np.empty((n, S, 3))
    jac = np.empty((n, p, S, 3)) if jacobian else None
    wl = geometry.wavelengths
    weights_t = geometry.weights.T  # (B, S + 4)
    age = np.broadcast_to(np.asarray(age, dtype=float), (n,))
    field = np.broadcast_to(np.asarray(field, dtype=float), (n,))
    for start in range(0, n, BLOCK_SUBJECTS):
        part = slice(start, start + BLOCK_SUBJECTS)
        lms, d_lms = _cone_terms(params[part], age[part], field[part], wl, geometry.nodes, peak_shift_axis,
                                 absorbance_interpolation, lens_components, fit_age, jacobian)
        excitation = lms @ weights_t  # (m, 3, S + 4)
        matrix = excitation[..., S:S + 3]  # cone × primary
        target = excitation[..., :S] - excitation[..., S + 3:]
        inverse = _inverse(matrix)
        solved = inverse @ target  # (m, 3, S)
        amounts[part] = np.swapaxes(solved, -1, -2)
        if jacobian:
            d_exc = d_lms @ weights_t  # (m, p, 3, S + 4)
            d_target = d_exc[..., :S] - d_exc[..., S + 3:]
            d_solved = inverse[:, None] @ (d_target - d_exc[..., S:S + 3] @ solved[:, None])
            jac[part] = np.swapaxes(d_solved, -1, -2)
    return amounts, jac


__all__ = ["PARAMETERS", "MatchGeometry", "match_geometry", "monochromatic_weights", "spectral_weights",
           "primary_condition", "predict"]
