"""Batched small quadratic programmes for drive solving (numpy only, no per-stimulus Python loop).

Two problems, each over a batch of ``P`` designs × ``S`` stimuli with ``N`` ≤ ~8 primaries:

* :func:`equality_box_qp` — minimise ½dᵀHd + fᵀd subject to A d = b (3 colour equations) and
  lo ≤ d ≤ hi. Solved exactly by *active-set enumeration*: the feasible set has dimension
  k = N − 3, so the optimum is the minimiser of the objective on the affine set where some ≤ k
  bounds are active. Every such set is a candidate; each candidate's KKT system is solved for the
  whole batch at once (its matrix depends only on the design when H does not vary by stimulus,
  so it is inverted once per design), candidates that violate a bound are discarded, and the
  feasible candidate of least objective is kept. Candidates are tried in order of size and a
  stimulus stops as soon as one satisfies the KKT conditions (feasible, multipliers of the right
  sign), so most stimuli need only the first few. A stimulus with no feasible candidate is out of
  gamut. Candidate counts: N = 3: 1, 4: 9, 5: 51, 6: 233.
* :func:`box_qp` — minimise ½dᵀHd + fᵀd subject to lo ≤ d ≤ hi (H positive definite): a
  primal active-set method (Nocedal & Wright 2006, Algorithm 16.3) run on all rows at once, one
  batched linear solve per iteration.

References
----------
Nocedal, J. & Wright, S. J. (2006) Numerical Optimization, 2nd ed., ch. 16 (equality-constrained
QP via the KKT system; active-set methods for convex QP).
"""

from __future__ import annotations

import functools
import itertools

import numpy as np

from metasim.display._kernels.qp import box_qp_rows, equality_qp_rows

_CHUNK_ROWS = 2048


def _candidates(n: int, k: int, lo: np.ndarray, hi: np.ndarray):
    """Active sets of ≤ k bounds (index, value) with distinct indices; finite bounds only.

    The same bounds give the same (read-only) arrays: they are built once and kept."""
    return _candidate_arrays(n, k, tuple(float(v) for v in lo), tuple(float(v) for v in hi))


@functools.lru_cache(maxsize=64)
def _candidate_arrays(n: int, k: int, lo: tuple, hi: tuple):
    sets = [()]
    for size in range(1, k + 1):
        for idx in itertools.combinations(range(n), size):
            for sides in itertools.product((0, 1), repeat=size):
                bounds = [lo[i] if s == 0 else hi[i] for i, s in zip(idx, sides)]
                if all(np.isfinite(bounds)):
                    sets.append(tuple(zip(idx, bounds, sides)))
    c = len(sets)
    rows = np.zeros((c, max(k, 0), n))
    used = np.zeros((c, max(k, 0)), dtype=bool)
    values = np.zeros((c, max(k, 0)))
    upper = np.zeros((c, max(k, 0)), dtype=bool)
    for ci, actives in enumerate(sets):
        for slot, (i, bound, side) in enumerate(actives):
            rows[ci, slot, i] = 1.0
            used[ci, slot] = True
            values[ci, slot] = bound
            upper[ci, slot] = side == 1
    for array in (rows, used, values, upper):
        array.flags.writeable = False
    return rows, used, values, upper


def _inverse(matrices: np.ndarray) -> np.ndarray:
    try:
        return np.linalg.inv(matrices)
    except np.linalg.LinAlgError:
        return np.linalg.pinv(matrices)


def _solve(matrices: np.ndarray, rhs: np.ndarray) -> np.ndarray:
    try:
        return np.linalg.solve(matrices, rhs[..., None])[..., 0]
    except np.linalg.LinAlgError:
        return np.einsum("...kl,...l->...k", np.linalg.pinv(matrices), rhs)


def equality_box_qp(H, f, A, b, lo, hi, *, tol: float = 1e-9):
    """Solve min ½dᵀHd + fᵀd s.t. A d = b, lo ≤ d ≤ hi for a batch (see the module docstring).

    Parameters
    ----------
    H : (P, 1 or S, N, N) positive definite on the null space of A (regularise linear objectives).
    f : (P, S, N).  A : (P, m, N) of full row rank m ≤ N.  b : (P, S, m).
    lo, hi : (N,) bounds (``hi`` may be ``inf``).
    tol : feasibility tolerance on bounds and on the equations (in the units of d and b).

    Returns
    -------
    d : (P, S, N) the optimum (NaN where infeasible); feasible : (P, S) bool.
    """
    H, f, A, b = (np.asarray(x, dtype=float) for x in (H, f, A, b))
    lo, hi = np.asarray(lo, dtype=float), np.asarray(hi, dtype=float)
    P, S, N = f.shape
    m = A.shape[1]
    k = N - m
    rows, used, values, upper = _candidates(N, k, lo, hi)
    C = rows.shape[0]
    K = N + m + k
    base = np.zeros((P, H.shape[1], 1, K, K))
    base[..., :N, :N] = H[:, :, None]
    base[..., :N, N:N + m] = np.swapaxes(A, -1, -2)[:, None, None]
    base[..., N:N + m, :N] = A[:, None, None]
    cand = np.zeros((C, K, K))
    cand[:, N + m:, :N] = rows
    cand[:, :N, N + m:] = np.swapaxes(rows, -1, -2)
    slots = np.arange(k)
    cand[:, N + m + slots, N + m + slots] = np.where(used, 0.0, 1.0)
    kkt = base + cand  # (P, 1|S, C, K, K)

    best_d = np.full((P, S, N), np.nan)
    feasible = np.zeros((P, S), dtype=bool)
    shared = H.shape[1] == 1
    keep = np.r_[np.arange(N), np.arange(N + m, K)]  # drive rows and bound-multiplier rows
    if shared:  # one KKT inverse per design and candidate; stimuli then enter through plain GEMMs
        inverse = _inverse(kkt[:, 0])[..., keep, :]  # (P, C, N + k, K)
    sizes = used.sum(-1)
    if shared:  # compiled, row by row (candidates come grouped by size, in order)
        starts = np.searchsorted(sizes, np.arange(k + 2)).astype(np.int64)
        H_shared = np.ascontiguousarray(H[:, 0])
        equality_qp_rows(np.ascontiguousarray(inverse), H_shared, np.ascontiguousarray(f), np.ascontiguousarray(A),
                         np.ascontiguousarray(b), lo, hi, values, used, upper, starts, float(tol), best_d, feasible)
        return best_d, feasible
    groups = [np.flatnonzero(sizes == j) for j in range(k + 1)]
    for p in range(P):
        for start in range(0, S, _CHUNK_ROWS):
            sl = np.arange(start, min(S, start + _CHUNK_ROWS))
            best_obj = np.full(sl.size, np.inf)
            open_rows = np.arange(sl.size)
            for group in groups:
                if open_rows.size == 0 or group.size == 0:
                    continue
                rows_s = sl[open_rows]
                f_p, b_p = f[p, rows_s], b[p, rows_s]
                if shared:
                    inv = inverse[p, group]  # (G, N + k, K)
                    sol = (np.einsum("gnk,sk->sgn", inv[..., :N], -f_p, optimize=True)
                           + np.einsum("gnk,sk->sgn", inv[..., N:N + m], b_p, optimize=True)
                           + np.einsum("gnk,gk->gn", inv[..., N + m:], values[group])[None])
                    d = sol[..., :N]
                    Hd = d @ H[p, 0].T
                else:
                    rhs = np.empty((rows_s.size, group.size, K))
                    rhs[..., :N] = -f_p[:, None, :]
                    rhs[..., N:N + m] = b_p[:, None, :]
                    rhs[..., N + m:] = values[group]
                    sol = _solve(kkt[p, rows_s][:, group], rhs)[..., keep]
                    d = sol[..., :N]
                    Hd = np.matmul(H[p, rows_s][:, None], d[..., None])[..., 0]
                mu = sol[..., N:]
                colour = d @ A[p].T
                eq = np.abs(colour - b_p[:, None, :]).max(-1) <= tol * (1 + np.abs(b_p).max(-1))[:, None]
                inside = ((d >= lo - tol) & (d <= hi + tol)).all(-1)
                ok = inside & eq & np.isfinite(d).all(-1)
                objective = np.where(ok, ((0.5 * Hd + f_p[:, None, :]) * d).sum(-1), np.inf)
                signs = np.where(upper[group], mu, -mu)  # >= 0 at a KKT point
                mu_scale = 1e-7 * (1 + np.abs(mu).max(-1, initial=0.0))
                optimal = ok & ((signs >= -mu_scale[..., None]) | ~used[group]).all(-1)
                objective = np.where(optimal, -np.inf, objective)
                pick = np.argmin(objective, axis=-1)
                value = objective[np.arange(rows_s.size), pick]
                better = value < best_obj[open_rows]
                chosen = d[np.arange(rows_s.size), pick]
                best_obj[open_rows] = np.where(better, value, best_obj[open_rows])
                target_rows = rows_s[better]
                best_d[p, target_rows] = np.clip(chosen[better], lo, hi)
                feasible[p, target_rows] = True
                open_rows = open_rows[~optimal.any(-1)]
    return best_d, feasible


def box_qp(H, f, lo, hi, *, x0=None, max_iter: int | None = None, tol: float = 1e-12):
    """Solve min ½xᵀHx + fᵀx s.t. lo ≤ x ≤ hi for a batch of rows (primal active-set method).

    Parameters
    ----------
    H : (R, N, N) symmetric positive definite.  f : (R, N).  lo, hi : (N,) finite bounds.
    x0 : (R, N) optional feasible start (clipped into the box); default the box centre.

    Returns
    -------
    x : (R, N) the minimiser.
    """
    H, f = np.asarray(H, dtype=float), np.asarray(f, dtype=float)
    R, N = f.shape
    lo = np.ascontiguousarray(np.broadcast_to(np.asarray(lo, dtype=float), (N,)))
    hi = np.ascontiguousarray(np.broadcast_to(np.asarray(hi, dtype=float), (N,)))
    start = np.broadcast_to(0.5 * (lo + hi), (R, N)) if x0 is None else np.asarray(x0, dtype=float)
    x = np.array(np.broadcast_to(start, (R, N)), dtype=float)  # a fresh (R, N) array, solved in place
    if R:
        box_qp_rows(np.ascontiguousarray(np.broadcast_to(H, (R, N, N))), np.ascontiguousarray(f), lo, hi, x,
                    max_iter or 10 * N + 20, tol)
    return x


__all__ = ["equality_box_qp", "box_qp"]
