"""Compiled row-by-row quadratic programmes behind :mod:`metasim.display.solvers`.

One row (one stimulus of one design) at a time with N ≤ a few primaries, where numpy's per-call
overhead dominated; rows run on the kernel threads. Same algorithms as documented in the solvers module:
the primal active-set method for the box QP (Nocedal & Wright 2006, Algorithm 16.3) and active-set
enumeration for the equality-constrained box QP with a shared objective.
"""

from __future__ import annotations

import numba
import numpy as np

from metasim._threads import run_in_parts
from metasim.colorimetry._kernels.types import writable


@numba.njit(cache=True)
def _solve_free(H, g, free, p, work, rhs):
    """p = −H_FF⁻¹ g_F on the free set (0 elsewhere), Gaussian elimination with partial pivoting."""
    n = g.shape[0]
    for i in range(n):
        for j in range(n):
            work[i, j] = H[i, j] if (free[i] and free[j]) else (1.0 if i == j else 0.0)
        rhs[i] = -g[i] if free[i] else 0.0
    for c in range(n):
        pivot = c
        for r in range(c + 1, n):
            if abs(work[r, c]) > abs(work[pivot, c]):
                pivot = r
        if pivot != c:
            for j in range(n):
                work[c, j], work[pivot, j] = work[pivot, j], work[c, j]
            rhs[c], rhs[pivot] = rhs[pivot], rhs[c]
        for r in range(c + 1, n):
            factor = work[r, c] / work[c, c]
            for j in range(c, n):
                work[r, j] -= factor * work[c, j]
            rhs[r] -= factor * rhs[c]
    for c in range(n - 1, -1, -1):
        total = rhs[c]
        for j in range(c + 1, n):
            total -= work[c, j] * p[j]
        p[c] = total / work[c, c]


@numba.njit(cache=True)
def box_qp_row(H, f, lo, hi, x, max_iter, tol):
    """One row of :func:`metasim.display.solvers.box_qp`; x (start, clipped) is updated in place."""
    n = f.shape[0]
    at_lo = np.empty(n, dtype=np.bool_)
    at_hi = np.empty(n, dtype=np.bool_)
    free = np.empty(n, dtype=np.bool_)
    g = np.empty(n)
    p = np.empty(n)
    work = np.empty((n, n))
    rhs = np.empty(n)
    scale = 1.0
    top_f = 0.0
    top_h = 0.0
    for i in range(n):
        x[i] = min(max(x[i], lo[i]), hi[i])
        at_lo[i] = x[i] <= lo[i]
        at_hi[i] = x[i] >= hi[i]
        top_f = max(top_f, abs(f[i]))
        for j in range(n):
            top_h = max(top_h, abs(H[i, j]))
    scale = 1.0 + top_f + top_h
    for _ in range(max_iter):
        for i in range(n):
            free[i] = not (at_lo[i] or at_hi[i])
            total = f[i]
            for j in range(n):
                total += H[i, j] * x[j]
            g[i] = total
        _solve_free(H, g, free, p, work, rhs)
        size_p = 0.0
        size_x = 0.0
        for i in range(n):
            size_p = max(size_p, abs(p[i]))
            size_x = max(size_x, abs(x[i]))
        if size_p > 1e-14 * (1.0 + size_x):
            alpha = 1.0
            block = -1
            for i in range(n):
                if free[i] and p[i] != 0.0:
                    ratio = (lo[i] - x[i]) / p[i] if p[i] < 0.0 else (hi[i] - x[i]) / p[i]
                    if ratio < alpha:
                        alpha = ratio
                        block = i
            alpha = max(alpha, 0.0)
            for i in range(n):
                x[i] += alpha * p[i]
            if block >= 0:
                if p[block] < 0.0:
                    x[block] = lo[block]
                    at_lo[block] = True
                else:
                    x[block] = hi[block]
                    at_hi[block] = True
            continue
        # no step: check the multipliers of the working set, release the worst
        worst = -1
        lam_min = np.inf
        for i in range(n):
            lam = g[i] if at_lo[i] else (-g[i] if at_hi[i] else np.inf)
            if lam < lam_min:
                lam_min = lam
                worst = i
        if worst >= 0 and lam_min < -tol * scale:
            at_lo[worst] = False
            at_hi[worst] = False
        else:
            break
    for i in range(n):
        x[i] = min(max(x[i], lo[i]), hi[i])


@numba.njit(cache=True, nogil=True)
def _box_qp_rows(H, f, lo, hi, x, max_iter, tol, start, stop):
    """Rows start:stop of a batched box QP (H (R, N, N), f (R, N), x (R, N) start and result)."""
    for r in range(start, stop):
        box_qp_row(H[r], f[r], lo, hi, x[r], max_iter, tol)


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _equality_qp_rows(inverse, H, f, A, b, lo, hi, values, used, upper, starts, tol, best_d, feasible, first, last):
    """The shared-H case of :func:`metasim.display.solvers.equality_box_qp`, row by row.

    inverse (P, C, N + k, K): the inverted KKT matrix of every candidate (drive and bound-multiplier
    rows); H (P, N, N); f (P, S, N); A (P, m, N); b (P, S, m); values / used / upper (C, k) of the
    candidates, grouped by size with group g = candidates starts[g]:starts[g + 1]. The same tests in
    the same order as the numpy version: a row stops at the first group holding a KKT point; among
    a group the least objective wins (KKT points first, the first of equals).
    """
    P, S, N = f.shape
    m = A.shape[1]
    k = values.shape[1]
    groups = starts.shape[0] - 1
    for task in range(first, last):
        p = task // S
        s = task % S
        d = np.empty(N)
        chosen = np.empty(N)
        mu = np.empty(max(k, 1))
        best_obj = np.inf
        b_scale = 0.0
        for j in range(m):
            b_scale = max(b_scale, abs(b[p, s, j]))
        eq_tol = tol * (1.0 + b_scale)
        for g in range(groups):
            pick_value = np.inf
            pick = -1
            closed = False
            for c in range(starts[g], starts[g + 1]):
                inv = inverse[p, c]
                for r in range(N + k):
                    total = 0.0
                    for q in range(N):
                        total += inv[r, q] * -f[p, s, q]
                    for q in range(m):
                        total += inv[r, N + q] * b[p, s, q]
                    for q in range(k):
                        total += inv[r, N + m + q] * values[c, q]
                    if r < N:
                        d[r] = total
                    else:
                        mu[r - N] = total
                ok = True
                for r in range(N):
                    if not (d[r] >= lo[r] - tol and d[r] <= hi[r] + tol and np.isfinite(d[r])):
                        ok = False
                for j in range(m):
                    colour = 0.0
                    for q in range(N):
                        colour += A[p, j, q] * d[q]
                    if not abs(colour - b[p, s, j]) <= eq_tol:
                        ok = False
                objective = np.inf
                if ok:
                    objective = 0.0
                    for r in range(N):
                        hd = 0.0
                        for q in range(N):
                            hd += H[p, r, q] * d[q]
                        objective += (0.5 * hd + f[p, s, r]) * d[r]
                    top = 0.0
                    for q in range(k):
                        top = max(top, abs(mu[q]))
                    mu_scale = 1e-7 * (1.0 + top)
                    optimal = True
                    for q in range(k):
                        sign = mu[q] if upper[c, q] else -mu[q]
                        if used[c, q] and not sign >= -mu_scale:
                            optimal = False
                    if optimal:
                        objective = -np.inf
                        closed = True
                if pick < 0 or objective < pick_value:  # np.argmin: the first of equal values
                    pick_value = objective
                    pick = c
                    for r in range(N):
                        chosen[r] = d[r]
            if pick >= 0 and pick_value < best_obj:
                best_obj = pick_value
                for r in range(N):
                    best_d[p, s, r] = min(max(chosen[r], lo[r]), hi[r])
                feasible[p, s] = True
            if closed:
                break


def box_qp_rows(H, f, lo, hi, x, max_iter, tol) -> None:
    """Every row of a batched box QP, solved in place in x (R, N) (start and result)."""
    run_in_parts(_box_qp_rows, f.shape[0], writable(H), writable(f), writable(lo), writable(hi), x,
                 int(max_iter), float(tol))


def equality_qp_rows(inverse, H, f, A, b, lo, hi, values, used, upper, starts, tol, best_d, feasible) -> None:
    """Every (design, stimulus) row of the shared-H equality-constrained box QP (see
    :func:`_equality_qp_rows`), rows on the kernel threads; results in best_d and feasible."""
    P, S = f.shape[0], f.shape[1]
    run_in_parts(_equality_qp_rows, P * S, writable(inverse), writable(H), writable(f), writable(A), writable(b),
                 writable(lo), writable(hi), writable(values), writable(used, bool), writable(upper, bool),
                 writable(starts, np.int64), float(tol), best_d, feasible)


#: Argument types of the kernels as the entry points above call them (compiled ahead of need by
#: :mod:`metasim._warmup`; ``tests/test_kernels.py`` checks a study calls exactly these).
SIGNATURES = {
    "_box_qp_rows": ("float64[:, :, ::1]", "float64[:, ::1]", "float64[::1]", "float64[::1]",
                     "float64[:, ::1]", "int64", "float64", "int64", "int64"),
    "_equality_qp_rows": ("float64[:, :, :, ::1]", "float64[:, :, ::1]", "float64[:, :, ::1]",
                          "float64[:, :, ::1]", "float64[:, :, ::1]", "float64[::1]", "float64[::1]",
                          "float64[:, ::1]", "boolean[:, ::1]", "boolean[:, ::1]", "int64[::1]", "float64",
                          "float64[:, :, ::1]", "boolean[:, ::1]", "int64", "int64"),
}
