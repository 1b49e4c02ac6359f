"""Scalar helpers written once, and the compiled passes that do not depend on the frame count.

``finish_pixel`` turns a pixel's Stokes vector, mean intensity and residual sum of squares
into DoLP, AoLP, the RMS residual and the noise variance; the generated solve passes
(:mod:`._generated`) and :func:`finish_pass` (mosaic fast paths, whose Stokes vectors come
from the demosaicing kernels) both inline it.  The noise model is
:func:`polarsky.core.noise.model_variance`, compiled here from its one source.

References
----------
.. [1] M. Abramowitz, I. A. Stegun, *Handbook of Mathematical Functions*, NBS (1964),
   eq. 4.4.49: ``atan x = x (1 + a2 x^2 + ... + a16 x^16)``, |error| <= 2e-8 on [0, 1]
   (a vectorizable arctangent).
.. [2] S. Plaszczynski et al., MNRAS 439, 4048 (2014) (the MAS estimator).
"""

from __future__ import annotations

import math

import numpy as np
from numba import prange

from ..noise import model_variance as _model_variance
from .policy import inline, kernel, parallel_kernel

__all__ = ["atan2_poly", "finish_pixel", "finish_pass", "uncertainty_pass", "smooth_pass", "masked_sums"]

model_variance = inline(_model_variance)

# Abramowitz & Stegun 4.4.49 coefficients a2..a16
_A2, _A4, _A6, _A8 = -0.3333314528, 0.1999355085, -0.1420889944, 0.1065626393
_A10, _A12, _A14, _A16 = -0.0752896400, 0.0429096138, -0.0161657367, 0.0028662257


@inline
def atan2_poly(y, x):
    """Arctangent of y/x in (-pi, pi] from the A&S 4.4.49 polynomial (branch-light)."""
    ax = abs(x)
    ay = abs(y)
    big = max(ax, ay)
    small = min(ax, ay)
    t = small / big if big > 0 else 0.0
    t2 = t * t
    p = _A16
    p = p * t2 + _A14
    p = p * t2 + _A12
    p = p * t2 + _A10
    p = p * t2 + _A8
    p = p * t2 + _A6
    p = p * t2 + _A4
    p = p * t2 + _A2
    r = t + t * t2 * p
    if ay > ax:
        r = 1.5707963267948966 - r
    if x < 0:
        r = 3.141592653589793 - r
    if y < 0:
        r = -r
    return r


@inline
def finish_pixel(s0, s1, s2, mean_i, rss, invalid, mode, inv_dof, inv_full_well, q_var, srgb):
    """``(bad, dolp, aolp_deg, residual_rms, variance)`` of one pixel.

    ``mode`` 1 takes the variance from the residual (``rss * inv_dof``), 0 from the noise
    model at ``mean_i``.
    """
    bad = invalid or not (s0 > 0)
    lin = math.sqrt(s1 * s1 + s2 * s2)
    a = atan2_poly(s2, s1) * np.float32(90.0 / math.pi)
    if a < 0:
        a = a + np.float32(180.0)
    ms = rss * inv_dof
    if mode == 1:
        var = ms
    else:
        var = model_variance(mean_i, inv_full_well, q_var, srgb)
    return bad, lin / s0, a, math.sqrt(ms), var


@parallel_kernel
def finish_pass(s, mean, rss, invalid, mode, inv_dof, inv_full_well, q_var, srgb, has_residual,
                dolp_out, aolp_out, res_out, var_out):
    """DoLP, AoLP, residual and variance of pixels whose Stokes vectors ``s`` (3, P) are known.

    ``s`` is set to NaN where the pixel is not valid (``invalid`` or S0 <= 0).
    """
    nan = np.float32(np.nan)
    for j in prange(s.shape[1]):
        bad, d, a, r, v = finish_pixel(s[0, j], s[1, j], s[2, j], mean[j], rss[j], invalid[j], mode, inv_dof,
                                       inv_full_well, q_var, srgb)
        if bad:
            s[0, j] = nan
            s[1, j] = nan
            s[2, j] = nan
        dolp_out[j] = nan if bad else d
        aolp_out[j] = nan if bad else a
        var_out[j] = nan if bad else v
        if has_residual:
            res_out[j] = nan if bad else r


@parallel_kernel
def uncertainty_pass(s, dolp, var, cov, sig_dolp_out, sig_aolp_out, unb_out):
    """sigma_dolp, sigma_aolp (deg, capped at 180/sqrt(12)) and the MAS DoLP of every pixel.

    ``cov`` is (c00, c11, c22, c01, c02, c12) of the unit covariance (W^T V W)^-1.
    """
    npx = dolp.shape[0]
    c00, c11, c22, c01, c02, c12 = cov[0], cov[1], cov[2], cov[3], cov[4], cov[5]
    cap = np.float32(180.0 / math.sqrt(12.0))
    to_deg = np.float32(180.0 / math.pi)
    nan = np.float32(np.nan)
    tiny = np.float32(1e-30)
    zero = np.float32(0.0)
    for j in prange(npx):
        s0 = s[0, j]
        s1 = s[1, j]
        s2 = s[2, j]
        v = var[j]
        p = dolp[j]
        ok = s0 > 0
        inv = np.float32(1.0) / s0
        l2 = max(s1 * s1 + s2 * s2, tiny)
        lin = math.sqrt(l2)
        sr2 = np.float32(0.5) * (c11 + c22) * v * inv * inv  # Rice sigma^2 of S1/S0, S2/S0
        g0 = -p * inv
        g1 = s1 / lin * inv
        g2 = s2 / lin * inv
        vp = (c00 * g0 * g0 + c11 * g1 * g1 + c22 * g2 * g2
              + np.float32(2.0) * (c01 * g0 * g1 + c02 * g0 * g2 + c12 * g1 * g2))
        sd = math.sqrt(max(vp * v, zero))
        h1 = -s2 / (np.float32(2.0) * l2)
        h2 = s1 / (np.float32(2.0) * l2)
        va = c11 * h1 * h1 + c22 * h2 * h2 + np.float32(2.0) * c12 * h1 * h2
        sa = min(math.sqrt(max(va * v, zero)) * to_deg, cap)
        sr2s = max(sr2, tiny)
        ps = max(p, tiny)
        unb = p - sr2s * (np.float32(1.0) - math.exp(-(p * p) / sr2s)) / (np.float32(2.0) * ps)
        sig_dolp_out[j] = sd if ok else nan
        sig_aolp_out[j] = sa if ok else nan
        unb_out[j] = unb if ok else nan


@inline
def _mirror(i, n):
    """Index ``i`` of a length-``n`` axis mirrored at its ends with the edge repeated (numpy's
    ``symmetric`` padding, period ``2 n``)."""
    j = i % (2 * n)
    return 2 * n - 1 - j if j >= n else j


@parallel_kernel
def smooth_pass(var, radius, out):
    """Mean of the finite values of ``var`` (h, w) in the (2r+1)^2 window of each pixel into
    ``out``; NaN stays NaN.  The same sums in the same order as the numpy reference
    (:func:`polarsky.estimate.block.smooth_variance`: each window row summed left to right,
    then the rows top to bottom, from zero), so the results are identical."""
    h, w = var.shape
    k = 2 * radius + 1
    hs = np.empty((h + 2 * radius, w), np.float32)
    hc = np.empty((h + 2 * radius, w), np.float32)
    zero = np.float32(0.0)
    one = np.float32(1.0)
    for i in prange(h + 2 * radius):
        row = _mirror(i - radius, h)
        for x in range(w):
            interior = x >= radius and x + radius < w
            acc = zero
            cnt = zero
            for dx in range(k):
                col = x + dx - radius if interior else _mirror(x + dx - radius, w)
                v = var[row, col]
                if math.isfinite(v):
                    acc += v
                    cnt += one
                else:
                    acc += zero
                    cnt += zero
            hs[i, x] = acc
            hc[i, x] = cnt
    nan = np.float32(np.nan)
    for y in prange(h):
        for x in range(w):
            acc = zero
            cnt = zero
            for dy in range(k):
                acc += hs[y + dy, x]
                cnt += hc[y + dy, x]
            out[y, x] = acc / cnt if math.isfinite(var[y, x]) else nan


@kernel
def masked_sums(valid, arrays, out):
    """``out[j]`` = float64 sum of ``arrays[j]`` (float32, P) over the pixels where ``valid`` (P),
    in one pass over the pixels (serial: a sum is memory-bound)."""
    for j in range(len(arrays)):
        out[j] = 0.0
    for p in range(valid.shape[0]):
        if valid[p]:
            for j in range(len(arrays)):
                out[j] += np.float64(arrays[j][p])
