"""Compiled CIE 2000 colour difference (the kernel behind :mod:`metasim.colorimetry.difference`).

Two evaluations of the same formula (Sharma, Wu & Dalal 2005, with colour-science's hue
conventions): :func:`delta_e_2000_scalar` follows the paper step by step with libm's functions;
the branch-free ``_vector_pair`` (hue terms from chroma vectors, series of
:mod:`~metasim.colorimetry._kernels.series`) runs in the vectorised column loop
:func:`delta_e_2000_columns` and flags the pairs (achromatic, equal or opposite hues) that the
scalar path recomputes. :func:`delta_e_2000_pairs` is the entry point for (n, 3) arrays.
"""

from __future__ import annotations

import math

import numba
import numpy as np

from metasim._threads import run_in_parts
from metasim.colorimetry._kernels.series import atan2, exp_negative, sin_reduced
from metasim.colorimetry._kernels.simd import wide_vectors as _wide_vectors
from metasim.colorimetry._kernels.types import writable

_25_POW_7 = 25.0**7
_DEG = math.pi / 180.0
_RAD2DEG = 180.0 / math.pi  # as numpy.degrees, so hue angles round exactly as in colour-science
_C30, _S30 = math.cos(30 * _DEG), math.sin(30 * _DEG)
_C6, _S6 = math.cos(6 * _DEG), math.sin(6 * _DEG)
_C63, _S63 = math.cos(63 * _DEG), math.sin(63 * _DEG)


@numba.njit(cache=True, inline="always", error_model="numpy")
def _primed(a1, b1, a2, b2):
    """a'1, a'2, C'1, C'2: the a* axis rescaled by 1 + G (Sharma, Wu & Dalal eqs. 2-6)."""
    c1 = math.sqrt(a1 * a1 + b1 * b1)
    c2 = math.sqrt(a2 * a2 + b2 * b2)
    cb = 0.5 * (c1 + c2)
    cb2 = cb * cb
    cb7 = cb2 * cb2 * cb2 * cb
    g = 0.5 * (1.0 - math.sqrt(cb7 / (cb7 + _25_POW_7)))
    ap1 = (1.0 + g) * a1
    ap2 = (1.0 + g) * a2
    cp1 = math.sqrt(ap1 * ap1 + b1 * b1)
    cp2 = math.sqrt(ap2 * ap2 + b2 * b2)
    return ap1, ap2, cp1, cp2


@numba.njit(cache=True, inline="always", error_model="numpy")
def _hue_weight(c, s):
    """T of the mean hue from its cosine and sine; the four cosines by multiple-angle identities."""
    c2h = 2.0 * c * c - 1.0
    s2h = 2.0 * s * c
    c3h = c * (4.0 * c * c - 3.0)
    s3h = s * (3.0 - 4.0 * s * s)
    c4h = 2.0 * c2h * c2h - 1.0
    s4h = 2.0 * s2h * c2h
    t = (1.0 - 0.17 * (c * _C30 + s * _S30) + 0.24 * c2h
         + 0.32 * (c3h * _C6 - s3h * _S6) - 0.20 * (c4h * _C63 + s4h * _S63))
    return t


@numba.njit(cache=True, inline="always", error_model="numpy")
def delta_e_2000_scalar(L1, a1, b1, L2, a2, b2, k_L):
    """ΔE00 of one pair, Sharma, Wu & Dalal (2005) eqs. 1-22 step by step (hue angles, libm)."""
    ap1, ap2, cp1, cp2 = _primed(a1, b1, a2, b2)
    if b1 == 0.0 and ap1 == 0.0:
        h1 = 0.0
    else:
        h1 = math.atan2(b1, ap1) * _RAD2DEG
        if h1 < 0.0:
            h1 += 360.0
    if b2 == 0.0 and ap2 == 0.0:
        h2 = 0.0
    else:
        h2 = math.atan2(b2, ap2) * _RAD2DEG
        if h2 < 0.0:
            h2 += 360.0
    dL = L2 - L1
    dC = cp2 - cp1
    cc = cp1 * cp2
    diff = h2 - h1
    total = h1 + h2
    if cc == 0.0:
        dh = 0.0
        hb = total
    elif abs(diff) <= 180.0:
        dh = diff
        hb = 0.5 * total
    else:
        dh = diff - 360.0 if diff > 180.0 else diff + 360.0
        hb = 0.5 * (total + 360.0) if total < 360.0 else 0.5 * (total - 360.0)
    dH = 2.0 * math.sqrt(cc) * math.sin(0.5 * dh * _DEG)
    Lb = 0.5 * (L1 + L2)
    Cb = 0.5 * (cp1 + cp2)
    c = math.cos(hb * _DEG)
    s = math.sin(hb * _DEG)
    t = _hue_weight(c, s)
    q = (hb - 275.0) / 25.0
    dtheta = 30.0 * math.exp(-q * q)
    Cb2 = Cb * Cb
    Cb7 = Cb2 * Cb2 * Cb2 * Cb
    rc = 2.0 * math.sqrt(Cb7 / (Cb7 + _25_POW_7))
    Lq = (Lb - 50.0) * (Lb - 50.0)
    sl = 1.0 + 0.015 * Lq / math.sqrt(20.0 + Lq)
    sc = 1.0 + 0.045 * Cb
    sh = 1.0 + 0.015 * Cb * t
    rt = -math.sin(2.0 * dtheta * _DEG) * rc
    tl = dL / (k_L * sl)
    tc = dC / sc
    th = dH / sh
    return math.sqrt(tl * tl + tc * tc + th * th + rt * tc * th)


_FAST = {"contract", "arcp", "nsz"}  # fused multiply-add and x/y = x*(1/y); no unsafe reassociation


@numba.njit(cache=True, inline="always", error_model="numpy", fastmath=_FAST)
def _vector_pair(L1, a1, b1, L2, a2, b2, k_L):
    """ΔE00 of one pair and whether :func:`delta_e_2000_scalar` must recompute it (branch-free).

    Hue terms come from the chroma vectors v = (a', b) instead of hue angles (exact algebra):
    with P = C'1·C'2, dot = v1·v2 and cross = v1 × v2, ΔH'² = 2·cross²/(P + dot) for hues less
    than 90° apart and 2·(P − dot) otherwise (each free of cancellation on its side), with the sign
    of cross; the mean hue is the bisector of the shorter hue arc (what eq. 14 of Sharma, Wu &
    Dalal selects): the direction of C'2·v1 + C'1·v2, or, for hues more than 90° apart where that
    sum is ill-conditioned, the perpendicular of C'2·v1 − C'1·v2. R_C·ΔH' is taken under one
    square root, and the three weighted terms and R_T are brought over one denominator, so a pair
    costs 8 square roots and 5 divisions. Achromatic samples and hues equal or opposite to within
    1e-9 rad are flagged.
    """
    ap1, ap2, cp1, cp2 = _primed(a1, b1, a2, b2)
    cc = cp1 * cp2
    cross = ap1 * b2 - b1 * ap2
    dot = ap1 * ap2 + b1 * b2
    flag = (cc == 0.0) | (abs(cross) <= 1e-9 * cc)
    acute = dot >= 0.0
    dh2 = 2.0 * cross * cross / (cc + dot) if acute else 2.0 * (cc - dot)  # ΔH'²
    px = cp2 * ap1
    py = cp2 * b1
    qx = cp1 * ap2
    qy = cp1 * b2
    sign = -1.0 if cross < 0.0 else 1.0
    sx = px + qx if acute else sign * (qy - py)
    sy = py + qy if acute else sign * (px - qx)
    n2 = sx * sx + sy * sy
    rn = 1.0 / math.sqrt(n2 if n2 > 0.0 else 1.0)
    c = sx * rn
    s = sy * rn
    hb = atan2(s, c if n2 > 0.0 else 1.0) / _DEG
    hb = hb + 360.0 if hb < 0.0 else hb
    dL = L2 - L1
    dC = cp2 - cp1
    Lb = 0.5 * (L1 + L2)
    Cb = 0.5 * (cp1 + cp2)
    t = _hue_weight(c, s)
    q = (hb - 275.0) / 25.0
    dtheta = 30.0 * exp_negative(q * q)
    Cb2 = Cb * Cb
    Cb7 = Cb2 * Cb2 * Cb2 * Cb
    m7 = Cb7 + _25_POW_7
    Lq = (Lb - 50.0) * (Lb - 50.0)
    root = math.sqrt(20.0 + Lq)
    sl_num = root + 0.015 * Lq  # S_L = sl_num / root
    sc = 1.0 + 0.045 * Cb
    sh = 1.0 + 0.015 * Cb * t
    # R_T·ΔC'/S_C·ΔH'/S_H with R_C·ΔH' = 2·sign·√(C̄'^7·ΔH'²·(C̄'^7 + 25^7)) / (C̄'^7 + 25^7)
    rcdh = 2.0 * sign * math.sqrt(Cb7 * dh2 * m7)
    sin_t = sin_reduced(2.0 * dtheta * _DEG)
    wl = dL * root * sc * sh          # the three terms times k_L·S_L·S_C·S_H·root
    wc = dC * k_L * sl_num * sh
    whs = k_L * sl_num * sc           # ΔH'/S_H·(k_L·S_L·S_C·S_H·root) / ΔH'
    num = (wl * wl + wc * wc + whs * whs * dh2) * m7 - sin_t * wc * whs * rcdh
    den = k_L * sl_num * sc * sh
    den2 = den * den * m7
    return math.sqrt(num * den2) / den2, flag


@numba.njit(cache=True, error_model="numpy", fastmath=_FAST)
def delta_e_2000_columns(L1v, a1v, b1v, L2v, a2v, b2v, k_L, out, special):
    """ΔE00 of pairs given as six columns; pairs flagged in ``special`` need :func:`delta_e_2000_scalar`."""
    _wide_vectors()
    for i in range(out.shape[0]):
        out[i], special[i] = _vector_pair(L1v[i], a1v[i], b1v[i], L2v[i], a2v[i], b2v[i], k_L)


_BLOCK = 2048  # pairs per block: columns of one block stay in L1/L2 cache
#: Vector loops always run on a multiple of this many pairs (padded), so every pair goes through the
#: same vector code: LLVM's scalar remainder loop can round differently in the last bit, which would
#: make a result depend on where a pair sits in its array (and sweeps on their chunk size).
PAD = 16


@numba.njit(cache=True, inline="always")
def padded(m):
    """``m`` rounded up to a multiple of :data:`PAD`."""
    return (m + PAD - 1) // PAD * PAD


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _blocks(lab1, lab2, k_L, out, first, last):
    """Blocks first:last: transpose each block to padded columns, run the vector loop, mend flagged pairs."""
    n = out.shape[0]
    for block in range(first, last):
        start = block * _BLOCK
        stop = min(start + _BLOCK, n)
        m = stop - start
        width = padded(m)
        columns = np.ones((6, width))
        for j in range(m):
            columns[0, j] = lab1[start + j, 0]
            columns[1, j] = lab1[start + j, 1]
            columns[2, j] = lab1[start + j, 2]
            columns[3, j] = lab2[start + j, 0]
            columns[4, j] = lab2[start + j, 1]
            columns[5, j] = lab2[start + j, 2]
        special = np.empty(width, dtype=np.bool_)
        values = np.empty(width)
        delta_e_2000_columns(columns[0], columns[1], columns[2], columns[3], columns[4], columns[5],
                             k_L, values, special)
        for j in range(m):
            out[start + j] = values[j]
            if special[j]:
                out[start + j] = delta_e_2000_scalar(columns[0, j], columns[1, j], columns[2, j],
                                                     columns[3, j], columns[4, j], columns[5, j], k_L)


def delta_e_2000_pairs(lab_1: np.ndarray, lab_2: np.ndarray, k_L: float, out: np.ndarray) -> None:
    """out[i] = ΔE00 between rows i of the float arrays lab_1 and lab_2 (n, 3); blocks of pairs on
    the kernel threads."""
    run_in_parts(_blocks, (out.shape[0] + _BLOCK - 1) // _BLOCK, writable(lab_1), writable(lab_2), float(k_L), out)


#: Argument types of the kernels as the entry points above call them (compiled ahead of need by
#: :mod:`metasim._warmup`; ``tests/test_kernels.py`` checks a study calls exactly these).
SIGNATURES = {
    "_blocks": ("float64[:, ::1]", "float64[:, ::1]", "float64", "float64[::1]", "int64", "int64"),
}
