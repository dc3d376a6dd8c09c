"""Compiled CIELAB clipping behind :func:`metasim.display.drive.solve_drive`: Gauss-Newton in CIELAB
with box constraints on the drives, row by row (rows on the kernel threads).

CIELAB here uses libm's cube root (CIE 15:2004 §8.2.1) and its Jacobian; each step is a box QP
(:func:`metasim.display._kernels.qp.box_qp_row`). Compiled for size
(:func:`~metasim.colorimetry._kernels.simd.small_code`): loops over a few primaries gain nothing
from vector code.

Compiling the chain takes about 10 s of CPU, while a study clips a few dozen rows (the demo 89 in
20 calls); the same functions run by the Python interpreter take about 2 ms a row. So a call of at
most :data:`INTERPRETED_ROWS` rows, in a process where the compiled kernel is neither loaded nor
in numba's cache, runs the interpreted twin (:func:`interpreted_rows`: the same bytecode, with
``np.cbrt`` as numba compiles it, libm's ``cbrt``): the same operations in the same order, so the
same bits (``tests/test_kernels.py`` checks this), and nothing is compiled.
"""

from __future__ import annotations

import functools
import math
import types

import numba
import numpy as np

from metasim._threads import run_in_parts
from metasim.colorimetry._kernels.simd import small_code
from metasim.colorimetry._kernels.types import writable
from metasim.colorimetry.constants import CIELAB_EPSILON as _EPSILON
from metasim.colorimetry.constants import CIELAB_KAPPA as _KAPPA
from metasim.display._kernels.qp import _solve_free, box_qp_row

#: calls of at most this many rows run interpreted while the compiled kernel is not at hand
INTERPRETED_ROWS = 64


@numba.njit(cache=True, inline="always")
def _f(t):
    return np.cbrt(t) if t > _EPSILON else (_KAPPA * t + 16.0) / 116.0


@numba.njit(cache=True)
def _lab3(x, y, z, wx, wy, wz, out):
    small_code()
    fx, fy, fz = _f(x / wx), _f(y / wy), _f(z / wz)
    out[0] = 116.0 * fy - 16.0
    out[1] = 500.0 * (fx - fy)
    out[2] = 200.0 * (fy - fz)


@numba.njit(cache=True)
def _jacobian(xyz, white, jac):
    """∂(L*, a*, b*)/∂(X, Y, Z) (CIE 15:2004 §8.2.1)."""
    small_code()
    g = np.empty(3)
    for k in range(3):
        t = xyz[k] / white[k]
        if t > _EPSILON:
            root = np.cbrt(max(t, _EPSILON))
            slope = 1.0 / (root * root) / 3.0  # what numba compiles root ** -2 to (Python's pow rounds differently)
        else:
            slope = _KAPPA / 116.0
        g[k] = slope / white[k]
    jac[:] = 0.0
    jac[0, 1] = 116.0 * g[1]
    jac[1, 0] = 500.0 * g[0]
    jac[1, 1] = -500.0 * g[1]
    jac[2, 1] = 200.0 * g[1]
    jac[2, 2] = -200.0 * g[2]


@numba.njit(cache=True)
def _colour(A, black, d, out):
    small_code()
    for m in range(3):
        total = black[m]
        for k in range(d.shape[0]):
            total += A[m, k] * d[k]
        out[m] = total


@numba.njit(cache=True)
def _cost(A, black, d, white, lab_target, xyz, lab):
    small_code()
    _colour(A, black, d, xyz)
    _lab3(xyz[0], xyz[1], xyz[2], white[0], white[1], white[2], lab)
    return (lab[0] - lab_target[0]) ** 2 + (lab[1] - lab_target[1]) ** 2 + (lab[2] - lab_target[2]) ** 2


@numba.njit(cache=True)
def _step(jac, residual, d, A, H_s, f_s, q_scale, weight_factor, lo, hi, max_iter, out):
    small_code()
    n = d.shape[0]
    g = np.zeros((3, n))
    for i in range(3):
        for k in range(n):
            total = 0.0
            for m in range(3):
                total += jac[i, m] * A[m, k]
            g[i, k] = total
    gram = np.empty((n, n))
    trace = 0.0
    for k in range(n):
        for m in range(n):
            total = 0.0
            for i in range(3):
                total += g[i, k] * g[i, m]
            gram[k, m] = total
        trace += gram[k, k]
    scale = trace / n
    weight = weight_factor * scale / q_scale
    H_c = np.empty((n, n))
    f_c = np.empty(n)
    gd = np.empty(3)
    for i in range(3):
        total = 0.0
        for k in range(n):
            total += g[i, k] * d[k]
        gd[i] = residual[i] - total
    for k in range(n):
        for m in range(n):
            H_c[k, m] = gram[k, m] + weight * H_s[k, m] + (1e-12 * scale if k == m else 0.0)
        total = 0.0
        for i in range(3):
            total += g[i, k] * gd[i]
        f_c[k] = total + weight * f_s[k]
        out[k] = d[k]
    box_qp_row(H_c, f_c, lo, hi, out, max_iter, 1e-12)


@numba.njit(cache=True, nogil=True)
def _clip_rows(A, black, target, white, H_s, f_s, q_scale, weight_factor, iterations, max_iter, out, start, stop):
    """Gauss-Newton in CIELAB with box constraints, rows start:stop (see ``metasim.display.drive``)."""
    small_code()
    n = A.shape[2]
    lo = np.zeros(n)
    hi = np.ones(n)
    for r in range(start, stop):
        lab_target = np.empty(3)
        _lab3(target[r, 0], target[r, 1], target[r, 2], white[r, 0], white[r, 1], white[r, 2], lab_target)
        jac = np.empty((3, 3))
        _jacobian(white[r], white[r], jac)
        residual = np.empty(3)
        for i in range(3):
            total = 0.0
            for m in range(3):
                total += jac[i, m] * (black[r, m] - target[r, m])
            residual[i] = total
        d = np.zeros(n)
        proposal = np.empty(n)
        _step(jac, residual, d, A[r], H_s[r], f_s[r], q_scale[r], weight_factor, lo, hi, max_iter, proposal)
        for k in range(n):  # element loops: whole-array assignment compiles a shape check with messages
            d[k] = proposal[k]
        xyz = np.empty(3)
        lab = np.empty(3)
        cost = _cost(A[r], black[r], d, white[r], lab_target, xyz, lab)
        for _ in range(iterations):
            _colour(A[r], black[r], d, xyz)
            _lab3(xyz[0], xyz[1], xyz[2], white[r, 0], white[r, 1], white[r, 2], lab)
            for i in range(3):
                residual[i] = lab[i] - lab_target[i]
            _jacobian(xyz, white[r], jac)
            _step(jac, residual, d, A[r], H_s[r], f_s[r], q_scale[r], weight_factor, lo, hi, max_iter, proposal)
            new_cost = _cost(A[r], black[r], proposal, white[r], lab_target, xyz, lab)
            if not new_cost < cost * (1 - 1e-12):
                break
            for k in range(n):
                d[k] = proposal[k]
            cost = new_cost
        for k in range(n):
            out[r, k] = d[k]


class _InterpretedNumpy:
    """numpy as the interpreted twin sees it: ``cbrt`` is libm's (:func:`math.cbrt`), the function
    numba compiles ``np.cbrt`` to (numpy's own ``np.cbrt`` can differ in the last bit)."""

    cbrt = staticmethod(math.cbrt)

    def __getattr__(self, name):
        return getattr(np, name)


def _no_code_options() -> None:
    """The interpreted stand-in of :func:`small_code` (an instruction to the compiler only)."""


def _twin(kernel, callees: dict):
    """The Python function of a compiled ``kernel`` (same bytecode), calling ``callees`` in place of
    the compiled helpers it calls."""
    function = kernel.py_func
    namespace = {**function.__globals__, **callees, "np": _InterpretedNumpy(), "small_code": _no_code_options}
    return types.FunctionType(function.__code__, namespace, function.__name__, function.__defaults__,
                              function.__closure__)


@functools.lru_cache(maxsize=1)
def interpreted_rows():
    """:func:`_clip_rows` run by the Python interpreter (same arguments), with its helpers."""
    helpers = {"_f": _twin(_f, {})}
    for name, kernel in (("_lab3", _lab3), ("_jacobian", _jacobian), ("_colour", _colour)):
        helpers[name] = _twin(kernel, helpers)
    helpers["_cost"] = _twin(_cost, helpers)
    box = _twin(box_qp_row, {"_solve_free": _twin(_solve_free, {})})
    helpers["_step"] = _twin(_step, {**helpers, "box_qp_row": box})
    return _twin(_clip_rows, helpers)


@functools.lru_cache(maxsize=1)
def _compiled_in_cache() -> bool:
    from metasim import _warmup

    return _warmup.is_cached("metasim.display._kernels.clip:_clip_rows")


def clip_rows(A, black, target, white, H_s, f_s, q_scale, weight_factor, iterations, max_iter, out) -> None:
    """Clipped drives of every row into out (R, N), rows on the kernel threads: A (R, 3, N) primary
    XYZ, black / target / white (R, 3), strategy objective H_s (R, N, N), f_s (R, N), q_scale (R,).
    At most :data:`INTERPRETED_ROWS` rows while the compiled kernel is not at hand: interpreted,
    the same bits (module docstring)."""
    arrays = [writable(a) for a in (A, black, target, white, H_s, f_s, q_scale)]
    settings = (float(weight_factor), int(iterations), int(max_iter), out)
    rows = out.shape[0]
    if rows <= INTERPRETED_ROWS and not _clip_rows.overloads and not _compiled_in_cache():
        interpreted_rows()(*arrays, *settings, 0, rows)
        return
    run_in_parts(_clip_rows, rows, *arrays, *settings)


#: Argument types of the kernels as the entry points above call them (compiled ahead of need by
#: :mod:`metasim._warmup`; ``tests/test_kernels.py`` checks a study calls exactly these).
SIGNATURES = {
    "_clip_rows": ("float64[:, :, ::1]", "float64[:, ::1]", "float64[:, ::1]", "float64[:, ::1]",
                   "float64[:, :, ::1]", "float64[:, ::1]", "float64[::1]", "float64", "int64", "int64",
                   "float64[:, ::1]", "int64", "int64"),
}
