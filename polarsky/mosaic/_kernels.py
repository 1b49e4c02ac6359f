"""Compiled (numba) fused kernels for the mosaic fast paths (float32 only).

:func:`superpixel_stokes` applies the solve matrix to each 2x2 cell; :func:`bilinear_stokes`
computes, in one pass over memory, what
:func:`polarsky.mosaic.methods.demosaic_bilinear` followed by the Stokes fit does: each
pixel's four orientation values from the bilinear rule (own value; mean of the left/right,
up/down or four diagonal neighbours; mirror reflection about the edge pixel at borders), then
``S = P I`` with the (3, 4) solve matrix ``P``.  The numpy/OpenCV implementations stay the
reference; tests check that both agree.
"""

from __future__ import annotations

import numpy as np
from numba import njit, prange

__all__ = ["bilinear_stokes", "superpixel_stokes"]


@njit(inline="always", cache=True)
def _mirror(i, n):
    if i < 0:
        return -i
    if i >= n:
        return 2 * n - 2 - i
    return i


@njit(parallel=True, fastmath=True, cache=True)
def bilinear_stokes(raw, solve, out):
    """Bilinear demosaic + Stokes of a mono mosaic in one pass.

    Parameters
    ----------
    raw : float32 (H, W), H and W even
    solve : float32 (3, 4), the solve matrix of the cell positions (row-major)
    out : float32 (3, H, W), written
    """
    h, w = raw.shape
    # cr[row parity, k, j, x]: weight of (own value, horizontal sum, vertical sum, diagonal
    # sum) in S_k at column x; at a pixel of type t, position t holds its own value, t ^ 1 is
    # its horizontal, t ^ 2 its vertical and 3 - t its diagonal partner.  Periodic rows of
    # weights keep the inner loop free of branches (vectorisable).
    cr = np.empty((2, 3, 4, w), np.float32)
    for ty in range(2):
        for x in range(w):
            t = 2 * ty + (x & 1)
            for k in range(3):
                cr[ty, k, 0, x] = solve[k, t]
                cr[ty, k, 1, x] = 0.5 * solve[k, t ^ 1]
                cr[ty, k, 2, x] = 0.5 * solve[k, t ^ 2]
                cr[ty, k, 3, x] = 0.25 * solve[k, 3 - t]
    for y in prange(h):
        ym = _mirror(y - 1, h)
        yp = _mirror(y + 1, h)
        c = cr[y & 1]
        r = raw[y]
        u = raw[ym]
        d = raw[yp]
        o0 = out[0, y]
        o1 = out[1, y]
        o2 = out[2, y]
        for x in range(1, w - 1):
            cc = r[x]
            hs = r[x - 1] + r[x + 1]
            vs = u[x] + d[x]
            ds = u[x - 1] + u[x + 1] + d[x - 1] + d[x + 1]
            o0[x] = c[0, 0, x] * cc + c[0, 1, x] * hs + c[0, 2, x] * vs + c[0, 3, x] * ds
            o1[x] = c[1, 0, x] * cc + c[1, 1, x] * hs + c[1, 2, x] * vs + c[1, 3, x] * ds
            o2[x] = c[2, 0, x] * cc + c[2, 1, x] * hs + c[2, 2, x] * vs + c[2, 3, x] * ds
        for x in (0, w - 1):  # borders: mirror about the edge pixel
            xm = _mirror(x - 1, w)
            xp = _mirror(x + 1, w)
            cc = r[x]
            hs = r[xm] + r[xp]
            vs = u[x] + d[x]
            ds = u[xm] + u[xp] + d[xm] + d[xp]
            for k in range(3):
                out[k, y, x] = c[k, 0, x] * cc + c[k, 1, x] * hs + c[k, 2, x] * vs + c[k, 3, x] * ds


@njit(parallel=True, fastmath=True, cache=True)
def superpixel_stokes(raw, solve, out):
    """Superpixel Stokes of a mono mosaic in one pass: ``out[:, j, i] = P . (the four pixels of
    cell (j, i), row-major)``.  ``out`` float32 (3, H/2, W/2)."""
    h2, w2 = out.shape[1], out.shape[2]
    p = solve
    for j in prange(h2):
        r0 = raw[2 * j]
        r1 = raw[2 * j + 1]
        for i in range(w2):
            a = r0[2 * i]
            b = r0[2 * i + 1]
            c = r1[2 * i]
            d = r1[2 * i + 1]
            out[0, j, i] = p[0, 0] * a + p[0, 1] * b + p[0, 2] * c + p[0, 3] * d
            out[1, j, i] = p[1, 0] * a + p[1, 1] * b + p[1, 2] * c + p[1, 3] * d
            out[2, j, i] = p[2, 0] * a + p[2, 1] * b + p[2, 2] * c + p[2, 3] * d


@njit(inline="always", fastmath=True, cache=True)
def _newton_dir(n1, n3, c, f, eps):
    """One-sided Newton estimate ``n1 + (c - f)/2`` and its weight ``1/(|n1-n3| + |c-f| + eps)^2``,
    returned as (weighted estimate, weight)."""
    e = c - f
    g = abs(n1 - n3) + abs(e) + eps
    wgt = np.float32(1.0) / (g * g)
    return (n1 + np.float32(0.5) * e) * wgt, wgt


@njit(parallel=True, fastmath=True, cache=True)
def newton_diagonal(rp, eps, dp):
    """Pass 1 of the Newton method: at every pixel, the orientation of its diagonal neighbours.

    ``rp`` is the frame mirror-padded by 6 pixels; ``dp`` (H + 6, W + 6) receives the result on
    the frame padded by 3 (equal to the mirror image of the result, by symmetry).
    """
    hh, ww = dp.shape
    for i in prange(hh):
        y = i + 3
        for j in range(ww):
            x = j + 3
            c = rp[y, x]
            a0, w0 = _newton_dir(rp[y - 1, x + 1], rp[y - 3, x + 3], c, rp[y - 2, x + 2], eps)
            a1, w1 = _newton_dir(rp[y + 1, x - 1], rp[y + 3, x - 3], c, rp[y + 2, x - 2], eps)
            a2, w2 = _newton_dir(rp[y - 1, x - 1], rp[y - 3, x - 3], c, rp[y - 2, x - 2], eps)
            a3, w3 = _newton_dir(rp[y + 1, x + 1], rp[y + 3, x + 3], c, rp[y + 2, x + 2], eps)
            dp[i, j] = (a0 + a1 + a2 + a3) / (w0 + w1 + w2 + w3)


@njit(inline="always", fastmath=True, cache=True)
def _newton_hv(rp, dp, ry, rx, dy, dx, eps):
    """Pass 2 at one pixel: (horizontal partner, vertical partner) values."""
    m0 = rp[ry, rx]
    # horizontal partner: real samples left/right, pass-1 values above/below
    a0, w0 = _newton_dir(rp[ry, rx - 1], rp[ry, rx - 3], m0, rp[ry, rx - 2], eps)
    a1, w1 = _newton_dir(rp[ry, rx + 1], rp[ry, rx + 3], m0, rp[ry, rx + 2], eps)
    a2, w2 = _newton_dir(dp[dy - 1, dx], dp[dy - 3, dx], m0, rp[ry - 2, rx], eps)
    a3, w3 = _newton_dir(dp[dy + 1, dx], dp[dy + 3, dx], m0, rp[ry + 2, rx], eps)
    hv = (a0 + a1 + a2 + a3) / (w0 + w1 + w2 + w3)
    # vertical partner: real samples above/below, pass-1 values left/right
    b0, v0 = _newton_dir(rp[ry - 1, rx], rp[ry - 3, rx], m0, rp[ry - 2, rx], eps)
    b1, v1 = _newton_dir(rp[ry + 1, rx], rp[ry + 3, rx], m0, rp[ry + 2, rx], eps)
    b2, v2 = _newton_dir(dp[dy, dx - 1], dp[dy, dx - 3], m0, rp[ry, rx - 2], eps)
    b3, v3 = _newton_dir(dp[dy, dx + 1], dp[dy, dx + 3], m0, rp[ry, rx + 2], eps)
    vv = (b0 + b1 + b2 + b3) / (v0 + v1 + v2 + v3)
    return m0, hv, vv


@njit(parallel=True, fastmath=True, cache=True)
def newton_channels(rp, dp, eps, out):
    """Pass 2 of the Newton method, writing the four orientation channels ``out`` (4, H, W)."""
    h, w = out.shape[1], out.shape[2]
    for y in prange(h):
        ty = y & 1
        for x in range(w):
            m0, hv, vv = _newton_hv(rp, dp, y + 6, x + 6, y + 3, x + 3, eps)
            t = 2 * ty + (x & 1)
            out[t, y, x] = m0
            out[t ^ 1, y, x] = hv
            out[t ^ 2, y, x] = vv
            out[3 - t, y, x] = dp[y + 3, x + 3]


@njit(parallel=True, fastmath=True, cache=True)
def newton_stokes(rp, dp, eps, solve, out):
    """Pass 2 of the Newton method fused with the Stokes fit: ``out`` (3, H, W)."""
    h, w = out.shape[1], out.shape[2]
    cr = np.empty((2, 3, 4, w), np.float32)
    for ty in range(2):
        for x in range(w):
            t = 2 * ty + (x & 1)
            for k in range(3):
                cr[ty, k, 0, x] = solve[k, t]
                cr[ty, k, 1, x] = solve[k, t ^ 1]
                cr[ty, k, 2, x] = solve[k, t ^ 2]
                cr[ty, k, 3, x] = solve[k, 3 - t]
    for y in prange(h):
        c = cr[y & 1]
        for x in range(w):
            m0, hv, vv = _newton_hv(rp, dp, y + 6, x + 6, y + 3, x + 3, eps)
            dv = dp[y + 3, x + 3]
            out[0, y, x] = c[0, 0, x] * m0 + c[0, 1, x] * hv + c[0, 2, x] * vv + c[0, 3, x] * dv
            out[1, y, x] = c[1, 0, x] * m0 + c[1, 1, x] * hv + c[1, 2, x] * vv + c[1, 3, x] * dv
            out[2, y, x] = c[2, 0, x] * m0 + c[2, 1, x] * hv + c[2, 2, x] * vv + c[2, 3, x] * dv
