"""Compiled per-pixel kernels (numba) for the Stokes estimate.

These fuse, in one pass over memory, what :mod:`polarsky.stokes` does with separate numpy
calls: the least-squares solve, DoLP, AoLP, the fit residual, the noise variance, the
first-order uncertainties and the MAS debiasing.  The numpy functions in
:mod:`polarsky.stokes` stay the reference implementation; tests check that both agree.

References
----------
.. [1] M. Abramowitz, I. A. Stegun, *Handbook of Mathematical Functions*, NBS (1964),
   eq. 4.4.49: ``atan x = x (1 + a2 x^2 + ... + a16 x^16)``, |error| <= 2e-8 on [0, 1]
   (used for a vectorizable arctangent).
.. [2] S. Plaszczynski et al., MNRAS 439, 4048 (2014) (the MAS estimator).
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit, prange

__all__ = ["pass_stokes", "pass_uncertainty", "stokes_maps", "atan2_as"]

# fast-math flags without 'nnan'/'ninf': NaN marks pixels that are not valid
_FM = {"contract", "afn", "reassoc", "nsz", "arcp"}

# Abramowitz & Stegun 4.4.49 coefficients a2..a16
_A2, _A4, _A6, _A8 = -0.3333314528, 0.1999355085, -0.1420889944, 0.1065626393
_A10, _A12, _A14, _A16 = -0.0752896400, 0.0429096138, -0.0161657367, 0.0028662257


@njit(fastmath=_FM, inline="always", cache=True)
def atan2_as(y, x):
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


def _generic_pass(frames, invalid, solve, w, s_out, dolp_out, aolp_out, res_out, var_out,
                  mode, inv_full_well, q_var, srgb):
    """Any number of frames (slower: the frame loop is not unrolled)."""
    n = frames.shape[0]
    s = solve.astype(np.float64) @ frames.astype(np.float64)
    s_out[...] = s
    bad = invalid | ~(s[0] > 0)
    lin = np.hypot(s[1], s[2])
    with np.errstate(divide="ignore", invalid="ignore"):
        dolp_out[...] = lin / s[0]
    aolp_out[...] = np.degrees(0.5 * np.arctan2(s[2], s[1])) % 180.0
    mean_i = np.maximum(frames.mean(axis=0), 0)
    fit = w.astype(np.float64) @ s
    rss = ((frames - fit) ** 2).sum(axis=0)
    if n > 3:
        res_out[...] = np.sqrt(rss / (n - 3))
        res_out[bad] = np.nan
    if mode == 1:
        var_out[...] = rss / max(n - 3, 1)
    else:
        var = mean_i * inv_full_well
        if srgb:
            var += q_var * np.maximum((2.4 / 1.055) ** 2 * mean_i ** (2 * 1.4 / 2.4), 1 / 12.92 ** 2)
        else:
            var += q_var
        var_out[...] = var
    for a in (s_out, dolp_out, aolp_out, var_out):
        a[..., bad] = np.nan


def pass_stokes(frames, invalid, solve, w, s_out, dolp_out, aolp_out, res_out, var_out,
                mode, inv_full_well, q_var, srgb):
    """First pass: S, DoLP, AoLP, residual and noise variance for every pixel.

    Parameters
    ----------
    frames : float32 (N, P)
    invalid : bool (P,)
    solve : float32 (3, N)      least-squares solve matrix
    w : float32 (N, 3)          analysis matrix
    s_out : float32 (3, P); dolp_out, aolp_out, res_out, var_out : float32 (P,)
        Outputs (``res_out`` is ignored when N == 3).
    mode : 0 noise model, 1 residual variance
    inv_full_well, q_var : noise model parameters (normalized units)
    srgb : bool, quantization noise on sRGB-encoded values
    """
    from ._kernels_unrolled import PASS_STOKES

    fn = PASS_STOKES.get(frames.shape[0], _generic_pass)
    fn(frames, invalid, solve, w, s_out, dolp_out, aolp_out, res_out, var_out, mode, inv_full_well, q_var, srgb)


def stokes_maps(frames, solve, s_out, dolp_out, aolp_out):
    """S0, S1, S2, DoLP and AoLP only (no residual or noise), one fused pass.

    ``frames`` float32 (N, P) with 3 to 8 frames, ``solve`` float32 (3, N); outputs
    preallocated float32 ((3, P), (P,), (P,)).  AoLP in degrees in [0, 180).
    """
    from ._kernels_unrolled import STOKES_MAPS

    STOKES_MAPS[frames.shape[0]](frames, solve, s_out, dolp_out, aolp_out)


@njit(parallel=True, fastmath=_FM, cache=True)
def pass_uncertainty(s, dolp, var, cov, sig_dolp_out, sig_aolp_out, unb_out):
    """Second pass: sigma_dolp, sigma_aolp (deg, capped at 180/sqrt(12)) and the MAS DoLP.

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
