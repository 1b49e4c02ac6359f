"""Compiled (numba) fused kernels of the mosaic fast paths (float32, monochrome sensors).

Each ``*_pass`` decodes the four micro-polarizer intensities of every output pixel and fits
them in the same pass: Stokes vector ``S = P I`` (``P`` the (3, 4) solve matrix of the cell
positions), mean intensity and residual sum of squares ``sum_p (I_p - W_p S)^2``.  What
the estimate does next (DoLP, AoLP, noise, uncertainties) is the common finish of
:mod:`polarsky.estimate.block`.  The numpy/OpenCV decoders of :mod:`.methods` followed by
the reference fit stay the reference; tests check that both agree.

At a pixel of type ``t`` (its cell position, row-major), position ``t`` holds its own value,
``t ^ 1`` its horizontal partner, ``t ^ 2`` its vertical partner and ``3 - t`` its diagonal
partner.
"""

from __future__ import annotations

import numpy as np
from numba import prange

from ..core.kernels.policy import inline, parallel_kernel

__all__ = ["superpixel_pass", "bilinear_pass", "newton_pass", "newton_diagonal", "newton_channels"]


@inline
def _mirror(i, n):
    if i < 0:
        return -i
    if i >= n:
        return 2 * n - 2 - i
    return i


@inline
def _fit(t, own, hor, ver, dia, p, w):
    """``(s0, s1, s2, mean, rss)`` of a pixel of type ``t`` from its four intensities."""
    th, tv, td = t ^ 1, t ^ 2, 3 - t
    s0 = p[0, t] * own + p[0, th] * hor + p[0, tv] * ver + p[0, td] * dia
    s1 = p[1, t] * own + p[1, th] * hor + p[1, tv] * ver + p[1, td] * dia
    s2 = p[2, t] * own + p[2, th] * hor + p[2, tv] * ver + p[2, td] * dia
    r0 = own - (w[t, 0] * s0 + w[t, 1] * s1 + w[t, 2] * s2)
    r1 = hor - (w[th, 0] * s0 + w[th, 1] * s1 + w[th, 2] * s2)
    r2 = ver - (w[tv, 0] * s0 + w[tv, 1] * s1 + w[tv, 2] * s2)
    r3 = dia - (w[td, 0] * s0 + w[td, 1] * s1 + w[td, 2] * s2)
    return s0, s1, s2, (own + hor + ver + dia) * np.float32(0.25), r0 * r0 + r1 * r1 + r2 * r2 + r3 * r3


@inline
def _fit_store(t, own, hor, ver, dia, p, w, s_out, mean_out, rss_out, y, x):
    """Fit a pixel (see :func:`_fit`) and store its results at ``(y, x)`` of the outputs."""
    s0, s1, s2, m, rss = _fit(t, own, hor, ver, dia, p, w)
    s_out[0, y, x] = s0
    s_out[1, y, x] = s1
    s_out[2, y, x] = s2
    mean_out[y, x] = m
    rss_out[y, x] = rss


@parallel_kernel
def superpixel_pass(raw, p, w, s_out, mean_out, rss_out):
    """One output pixel per 2x2 cell: ``s_out`` (3, H/2, W/2), ``mean_out``, ``rss_out`` (H/2, W/2)."""
    h2, w2 = mean_out.shape
    for j in prange(h2):
        r0 = raw[2 * j]
        r1 = raw[2 * j + 1]
        for i in range(w2):
            # a cell seen from its position-0 pixel: own 0, horizontal 1, vertical 2, diagonal 3
            _fit_store(0, r0[2 * i], r0[2 * i + 1], r1[2 * i], r1[2 * i + 1], p, w, s_out, mean_out, rss_out, j, i)


@inline
def _bilinear_pixel(raw, y, ym, yp, x, xm, xp, ty, p, w, s_out, mean_out, rss_out):
    own = raw[y, x]
    hor = (raw[y, xm] + raw[y, xp]) * np.float32(0.5)
    ver = (raw[ym, x] + raw[yp, x]) * np.float32(0.5)
    dia = (raw[ym, xm] + raw[ym, xp] + raw[yp, xm] + raw[yp, xp]) * np.float32(0.25)
    _fit_store(ty + (x & 1), own, hor, ver, dia, p, w, s_out, mean_out, rss_out, y, x)


@parallel_kernel
def bilinear_pass(raw, p, w, s_out, mean_out, rss_out):
    """Bilinear demosaic (mirror about the edge pixel) and fit of every pixel, (3, H, W) etc."""
    h, wd = raw.shape
    for y in prange(h):
        ym = _mirror(y - 1, h)
        yp = _mirror(y + 1, h)
        ty = 2 * (y & 1)
        for x in range(1, wd - 1):
            _bilinear_pixel(raw, y, ym, yp, x, x - 1, x + 1, ty, p, w, s_out, mean_out, rss_out)
        _bilinear_pixel(raw, y, ym, yp, 0, 1, 1, ty, p, w, s_out, mean_out, rss_out)
        _bilinear_pixel(raw, y, ym, yp, wd - 1, wd - 2, wd - 2, ty, p, w, s_out, mean_out, rss_out)


@inline
def _newton_dir(n1, n3, c, f, eps):
    """One-sided Newton estimate ``n1 + (c - f)/2`` and its weight ``1/(|n1-n3| + |c-f| + eps)^2``,
    returned as (weighted estimate, weight)."""
    e = c - f
    g = abs(n1 - n3) + abs(e) + eps
    wgt = np.float32(1.0) / (g * g)
    return (n1 + np.float32(0.5) * e) * wgt, wgt


@parallel_kernel
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


@inline
def _newton_hv(rp, dp, ry, rx, dy, dx, eps):
    """Pass 2 at one pixel: (own, horizontal partner, vertical partner) values."""
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


@parallel_kernel
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


@parallel_kernel
def newton_pass(rp, dp, eps, p, w, s_out, mean_out, rss_out):
    """Pass 2 of the Newton method fused with the fit: ``s_out`` (3, H, W), ``mean_out``, ``rss_out``."""
    h, wd = mean_out.shape
    for y in prange(h):
        ty = 2 * (y & 1)
        for x in range(wd):
            m0, hv, vv = _newton_hv(rp, dp, y + 6, x + 6, y + 3, x + 3, eps)
            _fit_store(ty + (x & 1), m0, hv, vv, dp[y + 3, x + 3], p, w, s_out, mean_out, rss_out, y, x)
