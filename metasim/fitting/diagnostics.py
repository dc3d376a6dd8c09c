"""Diagnostics of a fit: what the data identify, how far each match is off, the nearest category.

Identification (metasim's own rules, applied per subject and parameter):

* **little information** — the posterior standard deviation is at least
  :data:`PRIOR_DOMINATED_RATIO` (90 %) of the population's: the data narrowed the prior by less
  than 10 %, so the estimate is mostly the population mean;
* **not separable** — the parameter's effect on the matches is nearly proportional to another's:
  the cosine between the two columns of the noise-weighted Jacobian is at least
  :data:`COLLINEARITY_LIMIT` (0.95) in size, so the data fix only a combination of the two and the
  prior decides how it is split between them;
* **at a limit** — a bounded parameter (age, 20-80 years) ended on its bound.

A parameter is *identified* when none applies. Match errors, each as the fitted (or the mean)
observer sees it, through that observer's own XYZ functions (CIE 170-2 transformation):

* colour-matching functions: the distance in the CIE 1976 u'v' chromaticity diagram (CIE 15:2004)
  between the observed and the predicted mixture of the primaries (Σ_k amount_k · XYZ of primary
  k). Unlike the rg chromaticity of the primaries, u'v' has no pole where the amounts sum to zero;
* matching sessions: the CIE 2000 colour difference (CIE 15:2004) between the reference and the
  subject's setting on the display, CIELAB relative to the display's white.
"""

from __future__ import annotations

import numpy as np

from metasim.colorimetry.cielab import xyz_to_lab_array
from metasim.colorimetry.difference import delta_e_2000_array
from metasim.colorimetry.tristimulus import K_M
from metasim.fitting.forms import CMF_FORM, MatchData

PRIOR_DOMINATED_RATIO = 0.9
COLLINEARITY_LIMIT = 0.95


def correlation(matrix: np.ndarray) -> np.ndarray:
    """Correlation (or cosine) matrix of a batch of symmetric matrices (n, p, p); NaN where a diagonal is 0."""
    scale = np.sqrt(np.diagonal(matrix, axis1=1, axis2=2))
    with np.errstate(invalid="ignore", divide="ignore"):
        return matrix / scale[:, :, None] / scale[:, None, :]


def identification(covariance: np.ndarray, data_information: np.ndarray, prior_sd: np.ndarray,
                   at_bound: np.ndarray, names: list[str]):
    """Information share, collinearity, identified flags and notes per subject × parameter."""
    posterior_sd = np.sqrt(np.diagonal(covariance, axis1=1, axis2=2))
    ratio = posterior_sd / prior_sd
    share = 1.0 - ratio**2
    cosine = correlation(data_information)
    p = len(names)
    off = ~np.eye(p, dtype=bool)
    alike = (np.abs(np.nan_to_num(cosine)) >= COLLINEARITY_LIMIT) & off
    weak = ratio >= PRIOR_DOMINATED_RATIO
    identified = ~weak & ~alike.any(axis=2) & ~at_bound
    notes = np.empty(ratio.shape, dtype=object)
    for i, j in np.ndindex(ratio.shape):  # text only, n × p strings
        parts = []
        if weak[i, j]:
            parts.append(f"little information: posterior SD {100 * ratio[i, j]:.0f} % of the population SD")
        for k in np.flatnonzero(alike[i, j]):
            parts.append(f"not separable from {names[k]} (effects on the matches alike, cosine {cosine[i, j, k]:+.2f})")
        if at_bound[i, j]:
            parts.append("at the model's limit")
        notes[i, j] = "; ".join(parts)
    return share, cosine, identified, notes.astype(str)


def chromaticity_errors(observed: np.ndarray, predicted: np.ndarray, primary_xyz: np.ndarray) -> np.ndarray:
    """u'v' distance (n, S, R) between observed (n, S, R, 3) and predicted (n, S, 3) amounts of primaries
    whose XYZ per unit amount are ``primary_xyz`` (n, 3 primaries, 3)."""
    def uv(amounts):
        xyz = amounts @ primary_xyz[:, None] if amounts.ndim == 4 else amounts @ primary_xyz
        denominator = xyz[..., 0] + 15.0 * xyz[..., 1] + 3.0 * xyz[..., 2]
        with np.errstate(invalid="ignore", divide="ignore"):
            return np.stack([4.0 * xyz[..., 0], 9.0 * xyz[..., 1]], axis=-1) / denominator[..., None]
    difference = uv(observed) - uv(predicted)[:, :, None]
    return np.sqrt((difference**2).sum(axis=-1))


def session_errors(data: MatchData, cmf: np.ndarray) -> np.ndarray:
    """CIE 2000 difference (n, S, R) between each reference and the setting, for observers cmf (n, 3, W)."""
    ds = data.dataset
    wl = ds["wavelength"].values
    step = float(wl[1] - wl[0])
    references = ds["reference_spectra"].transpose("stimulus", "wavelength").values
    primaries = ds["display_spectra"].transpose("primary", "wavelength").values
    black = ds["display_black"].values if "display_black" in ds else np.zeros(wl.size)
    def xyz(spectra):
        return K_M * step * np.einsum("nxw,sw->nsx", cmf, spectra)
    reference_xyz = xyz(references)  # (n, S, 3)
    primary_xyz = xyz(primaries)  # (n, 3 primaries, 3)
    black_xyz = xyz(black[None])[:, 0]  # (n, 3)
    white = black_xyz + primary_xyz.sum(axis=1)
    settings = data.observations  # (n, S, R, 3)
    setting_xyz = black_xyz[:, None, None] + np.einsum("nsrk,nkx->nsrx", np.nan_to_num(settings), primary_xyz)
    lab_reference = xyz_to_lab_array(reference_xyz, white[:, None])
    lab_setting = xyz_to_lab_array(setting_xyz.reshape(len(white), -1, 3), white[:, None]).reshape(setting_xyz.shape)
    errors = delta_e_2000_array(lab_reference[:, :, None], lab_setting)
    return np.where(np.isfinite(settings).all(axis=-1), errors, np.nan)


def match_errors(data: MatchData, predicted: np.ndarray, cmf: np.ndarray) -> np.ndarray:
    """Match errors (n, S, R) for one observer per subject (module docstring).

    ``cmf``: the observers' XYZ functions (n, 3, wavelength), on the session's grid for sessions,
    on the model's 1-nm base grid (390-830 nm) for colour-matching functions.
    """
    if data.form == CMF_FORM:
        primary_xyz = cmf[:, :, data.geometry.nodes] @ data.geometry.weights[-4:-1].T  # (n, xyz, primary)
        return chromaticity_errors(data.observations, predicted, np.swapaxes(primary_xyz, 1, 2))
    return session_errors(data, cmf)


def nearest_category(cmf: np.ndarray, category_cmf: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Index and RMS difference of the closest category observer: cmf (n, 3, W) against (k, 3, W)."""
    difference = category_cmf[None] - cmf[:, None]
    rms = np.sqrt((difference**2).mean(axis=(2, 3)))
    index = rms.argmin(axis=1)
    return index, rms[np.arange(len(index)), index]


__all__ = ["PRIOR_DOMINATED_RATIO", "COLLINEARITY_LIMIT", "identification", "correlation", "match_errors",
           "chromaticity_errors", "session_errors", "nearest_category"]
