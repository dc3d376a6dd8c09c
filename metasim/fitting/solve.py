"""One batched maximum-a-posteriori solve for many subjects: Levenberg-Marquardt on stacked Jacobians.

Each subject i has parameters θ_i (p of them) with a Gaussian prior N(μ, diag τ²) — the population
model's spread — and observations y_isrk (stimulus s, repeat r, primary k; NaN = missing) with
independent normal setting noise of standard deviation σ_i / w_is (w_is fixed weights per stimulus).
In prior units z = (θ − μ) / τ the negative log posterior is, up to constants,

    f_i(z) = Σ_srk w_is² (y_isrk − ŷ_isk(θ))² / σ_i² + Σ_p z_p².

Repeats share a prediction, so only the count c_isk and the mean ȳ_isk of the valid repeats enter
the normal equations (the spread of the repeats about their mean is a constant of the fit but
counts in the noise estimate). Every iteration takes all unfinished subjects at once: the model
returns their predictions and Jacobians stacked along the subject axis, the p × p normal equations

    (H_i + λ_i · diag H_i) δ_i = g_i,   H_i = τ Jᵢᵀ W Jᵢ τ / σ_i² + I,   g_i = τ Jᵢᵀ W (ȳ − ŷ) / σ_i² − z_i

are solved with one batched ``numpy.linalg.solve``, each subject keeps its own damping λ_i
(Levenberg 1944; Marquardt 1963): a step that lowers f_i is taken and λ_i divided by 10, otherwise
λ_i is multiplied by 10. Parameters with bounds (age) are projected back into them.

When the setting noise is not given it is estimated per subject with the fit, as
σ_i² = χ²_i / (m_i − p_eff,i), m_i the number of valid values and p_eff the effective number of
parameters tr(H_data (H_data + I)⁻¹) that the data, not the prior, determine (MacKay 1992); the
estimate is updated after every accepted step and the fit ends when both the step (below
``xtol`` prior standard deviations) and σ (relative change below ``xtol``) settle, or when a
rejected step changes the objective by no more than rounding.

The posterior covariance is the inverse curvature H⁻¹ at the optimum (Gauss-Newton approximation
of the Hessian of f / 2), scaled back by τ.

References
----------
Levenberg, K. (1944) Quart. Appl. Math. 2, 164-168. Marquardt, D. W. (1963) J. SIAM 11, 431-441.
MacKay, D. J. C. (1992) Neural Computation 4, 415-447 (effective number of parameters).
Tarantola, A. (2005) Inverse Problem Theory, SIAM, ch. 3 (least squares with a Gaussian prior).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

#: Smallest setting noise the estimate may reach (data units): noise-free data stay solvable.
MIN_NOISE = 1e-12
INITIAL_DAMPING = 1e-3
MIN_DAMPING = 1e-7
#: A rejected step whose objective change is below this share of the objective is at the optimum
#: to rounding (the objective is a sum of ~100 terms of order 1).
ROUNDOFF = 1e-13


@dataclass
class Solution:
    """The state of the batched solve at its end (arrays over subjects)."""

    theta: np.ndarray  # (n, p) estimates
    covariance: np.ndarray  # (n, p, p) posterior covariance of θ
    data_information: np.ndarray  # (n, p, p) τ Jᵀ W J τ / σ², the data's curvature in prior units
    noise: np.ndarray  # (n,) setting noise used (estimated or given)
    prediction: np.ndarray  # (n, S, K)
    chi_square: np.ndarray  # (n,) Σ w² (y − ŷ)² at the estimate
    count: np.ndarray  # (n,) valid values
    iterations: np.ndarray  # (n,)
    converged: np.ndarray  # (n,) bool
    at_bound: np.ndarray  # (n, p) bool


def sufficient_statistics(observations: np.ndarray, weights: np.ndarray):
    """Counts c, means ȳ (0 where c = 0), within-repeat sum of squares (weighted) and w² from (n, S, R, K)."""
    valid = np.isfinite(observations)
    count = valid.sum(axis=2).astype(float)
    total = np.where(valid, observations, 0.0).sum(axis=2)
    mean = np.divide(total, count, out=np.zeros_like(total), where=count > 0)
    spread = np.where(valid, observations - mean[:, :, None], 0.0)
    w2 = (np.asarray(weights, dtype=float) ** 2)[..., None]  # (n, S, 1)
    within = (w2 * (spread**2).sum(axis=2)).sum(axis=(1, 2))
    return count, mean, within, w2


def solve_map(model, observations, weights, prior_mean, prior_sd, *, noise=None, lower=None, upper=None,
              start=None, xtol: float = 1e-8, max_iterations: int = 200) -> Solution:
    """Batched MAP fit (module docstring).

    ``model(theta, index)`` returns predictions (m, S, K) and Jacobians (m, p, S, K) for the
    parameter rows ``theta`` (m, p) of subjects ``index`` (m,). ``observations`` (n, S, R, K) with
    NaN for missing values, ``weights`` (n, S); ``prior_mean``, ``prior_sd`` (p,) or (n, p);
    ``noise`` (n,) known setting noise or None to estimate it; ``lower``/``upper`` (p,) bounds.
    """
    count, mean, within, w2 = sufficient_statistics(observations, weights)
    n, p = observations.shape[0], np.shape(prior_sd)[-1]
    tau = np.broadcast_to(np.asarray(prior_sd, dtype=float), (n, p))
    mu = np.broadcast_to(np.asarray(prior_mean, dtype=float), (n, p))
    lower = np.full(p, -np.inf) if lower is None else np.asarray(lower, dtype=float)
    upper = np.full(p, np.inf) if upper is None else np.asarray(upper, dtype=float)
    m = count.sum(axis=(1, 2))
    cw = count * w2  # (n, S, K)
    theta = mu.copy() if start is None else np.clip(np.asarray(start, dtype=float), lower, upper)
    z = (theta - mu) / tau
    everyone = np.arange(n)
    pred, jac = model(theta, everyone)
    chi2 = (cw * (mean - pred) ** 2).sum(axis=(1, 2)) + within
    estimate_noise = noise is None
    sigma2 = np.maximum(chi2 / m, MIN_NOISE**2) if estimate_noise else np.broadcast_to(
        np.asarray(noise, dtype=float) ** 2, (n,)).copy()
    damping = np.full(n, INITIAL_DAMPING)
    iterations = np.zeros(n, dtype=int)
    done = np.zeros(n, dtype=bool)
    converged = np.zeros(n, dtype=bool)
    eye = np.eye(p)

    def normal_equations(idx):
        jz = jac[idx] * tau[idx][:, :, None, None]  # (a, p, S, K)
        weighted = jz * cw[idx][:, None]
        info = np.einsum("apsk,aqsk->apq", weighted, jz)
        grad = np.einsum("apsk,ask->ap", weighted, mean[idx] - pred[idx])
        return info, grad

    while not done.all():
        idx = np.flatnonzero(~done)
        info, grad = normal_equations(idx)
        s2 = sigma2[idx][:, None]
        hessian = info / s2[..., None] + eye
        rhs = grad / s2 - z[idx]
        damped = hessian + damping[idx][:, None, None] * (hessian * eye)
        step = np.linalg.solve(damped, rhs[..., None])[..., 0]
        z_try = z[idx] + step
        theta_try = np.clip(mu[idx] + tau[idx] * z_try, lower, upper)
        z_try = (theta_try - mu[idx]) / tau[idx]
        pred_try, jac_try = model(theta_try, idx)
        chi2_try = (cw[idx] * (mean[idx] - pred_try) ** 2).sum(axis=(1, 2)) + within[idx]
        f_old = chi2[idx] / sigma2[idx] + (z[idx] ** 2).sum(axis=1)
        f_new = chi2_try / sigma2[idx] + (z_try**2).sum(axis=1)
        better = f_new <= f_old  # False for a NaN trial (singular primaries far outside the population)
        iterations[idx] += 1
        moved = np.abs(z_try - z[idx]).max(axis=1)
        flat = ~better & (np.abs(f_new - f_old) <= ROUNDOFF * f_old) & (moved < np.sqrt(xtol))
        accept = idx[better]
        z[accept], theta[accept] = z_try[better], theta_try[better]
        pred[accept], jac[accept], chi2[accept] = pred_try[better], jac_try[better], chi2_try[better]
        damping[accept] = np.maximum(damping[accept] / 10.0, MIN_DAMPING)
        reject = idx[~better]
        damping[reject] *= 10.0
        settled = better & (moved < xtol)
        if estimate_noise and accept.size:
            info_a, _ = normal_equations(accept)
            data = info_a / sigma2[accept][:, None, None]
            effective = np.trace(np.linalg.solve(data + eye, data), axis1=1, axis2=2)
            new = np.maximum(chi2[accept] / np.maximum(m[accept] - effective, 1.0), MIN_NOISE**2)
            steady = np.abs(np.sqrt(new / sigma2[accept]) - 1.0) < xtol
            sigma2[accept] = new
            settled[better] &= steady
        stuck = ~better & (damping[idx] > 1e12)  # no step lowers f at all
        converged[idx[settled | flat]] = True
        done[idx[settled | flat | stuck | (iterations[idx] >= max_iterations)]] = True
    info, _ = normal_equations(everyone)
    data_information = info / sigma2[:, None, None]
    covariance_z = np.linalg.inv(data_information + eye)
    covariance = covariance_z * tau[:, :, None] * tau[:, None, :]
    at_bound = (theta <= lower) | (theta >= upper)
    return Solution(theta=theta, covariance=covariance, data_information=data_information, noise=np.sqrt(sigma2),
                    prediction=pred, chi_square=chi2, count=m, iterations=iterations, converged=converged,
                    at_bound=at_bound)


__all__ = ["Solution", "solve_map", "sufficient_statistics"]
