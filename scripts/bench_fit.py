"""Benchmark: fit 1,000 synthetic subjects × 30 test wavelengths, batched vs one subject at a time.

Data: colour-matching functions for the CIE 1964 / Stiles-Burch primaries (645.16, 526.32, 444.44
nm) at 30 test wavelengths 400-690 nm, of a seeded population (ages 20-70, 10° field, default
standard deviations), with 2 % setting noise (metasim's noise model, :mod:`metasim.fitting.fit`).

* batched: ``metasim.fit_observer`` (the whole public call: solve, standard errors, diagnostics,
  the fitted observers' functions; no categories), and its solve alone
  (``metasim.fitting.solve.solve_map``), best of 3;
* loop: for each subject ``scipy.optimize.least_squares`` (trust-region reflective) on the same
  MAP residuals [w · (y − ŷ(θ)) / σ; (θ − μ) / τ], with the same model and its analytic Jacobian
  (``--jac 2-point`` for scipy's finite differences instead), and the same setting-noise estimate
  σ² = χ² / (m − p_eff) updated around it until it settles. ``--loop-sample m`` times m subjects
  (default 100) and scales to n; ``--loop-sample 0`` loops over all.

Prints subjects per second, the ratios and the largest difference between the estimates (in the
parameters' own units, % and nm) on the looped subjects.

Usage: python scripts/bench_fit.py [--n 1000] [--loop-sample 100] [--jac analytic|2-point]
"""

from __future__ import annotations

import argparse
import time

import numpy as np
from scipy.optimize import least_squares

import metasim
from metasim.fitting import check_matching_data, colour_matching_data, fit_observer, synthetic_matches
from metasim.fitting.fit import match_weights, prior_model
from metasim.fitting.model import predict
from metasim.fitting.solve import solve_map

PRIMARIES_NM = [645.16, 526.32, 444.44]


def loop_fit(geometry, y, weights, age, field, tau, jac_kind: str) -> tuple[np.ndarray, float]:
    """One subject: least_squares on the MAP residuals, the setting noise re-estimated until it settles."""
    valid = np.isfinite(y)
    m, p = int(valid.sum()), tau.size

    def residuals(z, sigma):
        amounts, _ = predict(geometry, (z * tau)[None], age, field, jacobian=False)
        return np.concatenate([((y - amounts[0]) * weights[:, None])[valid] / sigma, z])

    def jacobian(z, sigma):
        _, jac = predict(geometry, (z * tau)[None], age, field)
        data = -(jac[0] * weights[None, :, None] * tau[:, None, None])[:, valid].T / sigma
        return np.vstack([data, np.eye(p)])

    z = np.zeros(p)
    sigma = np.sqrt((residuals(z, 1.0)[:m] ** 2).sum() / m)
    for _ in range(100):
        fit = least_squares(residuals, z, jac=jacobian if jac_kind == "analytic" else "2-point", args=(sigma,),
                            xtol=1e-12, ftol=1e-12, gtol=1e-12)
        z = fit.x
        data = fit.jac[:m] if jac_kind == "2-point" else jacobian(z, sigma)[:m]
        info = data.T @ data
        effective = np.trace(np.linalg.solve(info + np.eye(p), info))
        chi2 = ((fit.fun[:m] * sigma) ** 2).sum()
        new = np.sqrt(chi2 / (m - effective))
        settled = abs(new / sigma - 1) < 1e-9
        sigma = new
        if settled:
            break
    return z * tau, sigma


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--n", type=int, default=1000)
    parser.add_argument("--loop-sample", type=int, default=100, help="subjects timed in the loop (0: all), scaled to n")
    parser.add_argument("--jac", choices=("analytic", "2-point"), default="analytic")
    args = parser.parse_args()
    n = args.n

    plan = colour_matching_data(None, test_wavelengths=np.linspace(400.0, 690.0, 30), primaries=PRIMARIES_NM)
    population = metasim.observer_population(n, seed=1, age_years=(20, 70), field_size_deg=10)
    data = synthetic_matches(plan, population, setting_noise=0.02, seed=2)
    fit_observer(data.isel(observer=slice(0, 4)), categories=False)  # warm: tables, caches, compiled kernels

    full_times, solve_times = [], []
    for _ in range(3):  # best of 3: the machine may be shared
        start = time.perf_counter()
        result = fit_observer(data, categories=False)
        full_times.append(time.perf_counter() - start)
    md = check_matching_data(data)
    ages, fields = md.age_years, md.field_size_deg
    weights = match_weights(md, ages, fields, "log_wavelength")
    _, mean, tau, _ = prior_model()
    for _ in range(3):
        start = time.perf_counter()
        solve_map(lambda theta, index: predict(md.geometry, theta, ages[index], fields[index]), md.observations,
                  weights, mean, tau)
        solve_times.append(time.perf_counter() - start)
    t_full, t_solve = min(full_times), min(solve_times)

    loop_n = n if args.loop_sample in (0, None) else min(n, args.loop_sample)
    estimates, noises = [], []
    start = time.perf_counter()
    for i in range(loop_n):
        theta, sigma = loop_fit(md.geometry, md.observations[i, :, 0], weights[i], ages[i:i + 1], fields[i:i + 1], tau,
                                args.jac)
        estimates.append(theta)
        noises.append(sigma)
    t_loop = (time.perf_counter() - start) * n / loop_n
    difference = np.abs(np.array(estimates) - result["estimate"].values[:loop_n]).max()
    noise_difference = np.abs(np.array(noises) / result["setting_noise"].values[:loop_n] - 1).max()

    scaled = "" if loop_n == n else f" (timed {loop_n} subjects, scaled to {n})"
    print(f"subjects: {n} x 30 test wavelengths x 3 primaries, 8 parameters each, setting noise estimated")
    print(f"batched fit_observer:            {t_full:8.3f} s  {n / t_full:8.0f} subjects/s  (best of "
          + ", ".join(f"{t:.3f}" for t in full_times) + ")")
    print(f"batched solve alone:             {t_solve:8.3f} s  {n / t_solve:8.0f} subjects/s  (best of "
          + ", ".join(f"{t:.3f}" for t in solve_times) + ")")
    print(f"loop of least_squares ({args.jac} Jacobian): {t_loop:8.3f} s  {n / t_loop:8.1f} subjects/s{scaled}")
    print(f"ratio loop / fit_observer:       {t_loop / t_full:8.1f} x  (target >= 20)")
    print(f"ratio loop / batched solve:      {t_loop / t_solve:8.1f} x")
    print(f"max |estimate loop - batched| = {difference:.1e} (% and nm; target <= 1e-4); "
          f"setting noise within {noise_difference:.1e} (relative)")
    print(f"converged: {int(result['converged'].sum())} of {n}; iterations median "
          f"{np.median(result['iterations'].values):.0f}, max {int(result['iterations'].max())}")


if __name__ == "__main__":
    main()
