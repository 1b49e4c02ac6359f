"""Compiled (numba) fused kernels for the mosaic fast paths.

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
    # coef[t, k, j]: weight of (own, horizontal mean, vertical mean, diagonal mean) in S_k at
    # a pixel of type t; position t holds the pixel's own value, t ^ 1 is its horizontal,
    # t ^ 2 its vertical and 3 - t its diagonal partner
    coef = np.empty((4, 3, 4), np.float32)
    for t in range(4):
        for k in range(3):
            coef[t, k, 0] = solve[k, t]
            coef[t, k, 1] = 0.5 * solve[k, t ^ 1]
            coef[t, k, 2] = 0.5 * solve[k, t ^ 2]
            coef[t, k, 3] = 0.25 * solve[k, 3 - t]
    w2 = w // 2
    for y in prange(h):
        ym = _mirror(y - 1, h)
        yp = _mirror(y + 1, h)
        ty = y & 1
        ce = coef[2 * ty]
        co = coef[2 * ty + 1]
        r = raw[y]
        u = raw[ym]
        d = raw[yp]
        for xx in range(w2):
            x0 = 2 * xx
            x1 = x0 + 1
            xl = x0 - 1 if xx > 0 else 1
            xr = x1 + 1 if xx < w2 - 1 else w - 2
            # even column: pixel type 2 ty
            c = r[x0]
            hs = r[xl] + r[x1]
            vs = u[x0] + d[x0]
            ds = u[xl] + u[x1] + d[xl] + d[x1]
            out[0, y, x0] = ce[0, 0] * c + ce[0, 1] * hs + ce[0, 2] * vs + ce[0, 3] * ds
            out[1, y, x0] = ce[1, 0] * c + ce[1, 1] * hs + ce[1, 2] * vs + ce[1, 3] * ds
            out[2, y, x0] = ce[2, 0] * c + ce[2, 1] * hs + ce[2, 2] * vs + ce[2, 3] * ds
            # odd column: pixel type 2 ty + 1
            c = r[x1]
            hs = r[x0] + r[xr]
            vs = u[x1] + d[x1]
            ds = u[x0] + u[xr] + d[x0] + d[xr]
            out[0, y, x1] = co[0, 0] * c + co[0, 1] * hs + co[0, 2] * vs + co[0, 3] * ds
            out[1, y, x1] = co[1, 0] * c + co[1, 1] * hs + co[1, 2] * vs + co[1, 3] * ds
            out[2, y, x1] = co[2, 0] * c + co[2, 1] * hs + co[2, 2] * vs + co[2, 3] * ds


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
