"""Edge-directed Newton-polynomial demosaicing guided by polarization differences.

See :func:`demosaic_newton_li2019` for the method and its published sources (Li et al. 2019;
Gao & Gruev 2013); the compiled passes are in :mod:`polarsky.mosaic._kernels` and
:func:`demosaic_newton_numpy` is the plain numpy reference.
"""

from __future__ import annotations

import cv2
import numpy as np

from .methods import BORDER, _as_float

__all__ = ["demosaic_newton_li2019", "demosaic_newton_numpy", "newton_planes_li2019", "newton_fit_li2019",
           "newton_eps", "interleave", "MARGIN_PX"]

#: Pixels beyond its own that an output pixel depends on (pass 1 and 2 each look 3 away).
MARGIN_PX = 6


def newton_eps(level: float, eps_rel: float = 1e-3) -> float:
    """Regularisation of the fusion weights for a frame of mean level ``level``."""
    return eps_rel * max(float(level), 1e-12)


def _quarter_planes(a, qp):
    """Mirror-pad ``a`` by ``2*qp`` pixels and split it into its four contiguous lattices."""
    mp = cv2.copyMakeBorder(a, 2 * qp, 2 * qp, 2 * qp, 2 * qp, BORDER)
    return [np.ascontiguousarray(mp[ty::2, tx::2]) for ty in (0, 1) for tx in (0, 1)]


def interleave(planes, out=None):
    """Assemble lattice planes ``planes[t]`` (h, w) of the 4 pixel types into one (2h, 2w) image."""
    h, w = planes[0].shape
    if out is None:
        out = np.empty((2 * h, 2 * w), dtype=planes[0].dtype)
    v = out.reshape(h, 2, w, 2)
    for t in range(4):
        v[:, t // 2, :, t % 2] = planes[t]
    return out


def demosaic_newton_li2019(raw, *, eps_rel=1e-3, eps=None):
    """Edge-directed Newton-polynomial demosaicing guided by polarization differences.

    The method follows the three ideas of Li et al. (2019): (i) each missing orientation is
    interpolated along a direction with a Newton polynomial whose correction (error) term
    is taken from the pixel's own orientation, i.e. the interpolation is carried out on the
    *polarization difference* between the two orientations, which is much smoother than
    either intensity (an unpolarized edge has the same step in all four); (ii) an edge
    classifier built from these differences decides the direction; (iii) the directional
    estimates are fused.  Our implementation, in two passes over the 2x2 lattice:

    1. the diagonal partner of every pixel (the orientation at its four diagonal neighbours)
       from four one-sided first-order Newton estimates, one per diagonal direction,
       ``E = I(1) + (M(0) - M(2)) / 2``: the neighbour's value of the missing orientation
       plus the change of the pixel's own orientation (``M`` the raw mosaic, steps of one
       pixel along the direction) -- i.e. the polarization difference ``I - M`` is carried
       over unchanged from the neighbour;
    2. the horizontal and vertical partners, now known on a checkerboard, from the four
       one-sided estimates of the same form along the rows and columns.

    The estimates are fused with weights ``1/(G + eps)^2``, ``G = |I(1) - I(3)| + |M(0) - M(2)|``
    the directional variation, so interpolation follows edges instead of crossing them.
    Uniform regions are reproduced exactly; on smooth fields opposite directions get equal
    weights and the pair reduces to the second-order (centred) Newton interpolation
    ``(I(-1) + I(1))/2 + (2 M(0) - M(-2) - M(2))/4``.  The weights, the gradients and the
    two-pass order are our choices, not the paper's exact classifier.

    Parameters
    ----------
    raw : ndarray, shape (H, W)
        Mosaic frame, H and W even.
    eps_rel : float
        Regularisation of the fusion weights, relative to the mean level of the frame.
    eps : float, optional
        Absolute regularisation (overrides ``eps_rel``; used when a frame is processed in
        pieces, so that every piece uses the same value).

    Returns
    -------
    ndarray, shape (4, H, W)

    Notes
    -----
    The formulas are the same at every pixel (pass 1 reads only the raw mosaic; in pass 2 the
    horizontal partner is real left/right and from pass 1 above/below, the vertical partner
    the other way round), so the method runs as two compiled passes
    (:mod:`polarsky.mosaic._kernels`); :func:`demosaic_newton_numpy` is the plain numpy
    reference.

    References
    ----------
    .. [1] N. Li, Y. Zhao, Q. Pan, S. G. Kong, "Demosaicking DoFP images using Newton's
       polynomial interpolation and polarization difference model", Opt. Express 27(2),
       1376-1391 (2019), doi:10.1364/OE.27.001376.
    .. [2] S. Gao, V. Gruev, "Gradient-based interpolation method for division-of-focal-plane
       polarimeters", Opt. Express 21(1), 1137-1151 (2013), doi:10.1364/OE.21.001137
       (diagonal-first, gradient-directed order).
    """
    a, eps_ = _newton_inputs(raw, eps_rel, eps)
    if a.dtype != np.float32:  # the compiled kernels are float32; keep other dtypes exact
        return demosaic_newton_numpy(a, eps=eps_)
    from ._kernels import newton_channels

    rp, dp = _newton_pass1(a, eps_)
    out = np.empty((4,) + a.shape, dtype=a.dtype)
    newton_channels(rp, dp, eps_, out)
    return out


def newton_fit_li2019(raw, p, w, s_out, mean_out, rss_out, *, eps):
    """Newton demosaic fused with the fit (compiled fast path, float32): fills ``s_out`` (3, H, W),
    ``mean_out`` and ``rss_out`` (H, W) for solve matrix ``p`` (3, 4) and analysis matrix ``w`` (4, 3)."""
    from ._kernels import newton_pass

    a = np.ascontiguousarray(raw, dtype=np.float32)
    rp, dp = _newton_pass1(a, np.float32(eps))
    newton_pass(rp, dp, np.float32(eps), p, w, s_out, mean_out, rss_out)


def _newton_inputs(raw, eps_rel, eps):
    a = _as_float(raw)
    if eps is None:
        eps = newton_eps(float(np.mean(np.abs(a))), eps_rel)
    return a, a.dtype.type(eps)


def _newton_pass1(a, eps):
    """Mirror-pad by 6 and run pass 1 (diagonal partners) on the frame padded by 3."""
    from ._kernels import newton_diagonal

    rp = cv2.copyMakeBorder(a, 6, 6, 6, 6, BORDER)
    dp = np.empty((a.shape[0] + 6, a.shape[1] + 6), a.dtype)
    newton_diagonal(rp, eps, dp)
    return rp, dp


def demosaic_newton_numpy(raw, *, eps_rel=1e-3, eps=None):
    """Reference implementation of :func:`demosaic_newton_li2019` in plain numpy (vectorised
    over the four lattices; slower).  Tests check that the compiled kernels agree with it."""
    a, eps_ = _newton_inputs(raw, eps_rel, eps)
    planes = newton_planes_li2019(a, eps=float(eps_))
    out = np.empty((4,) + a.shape, dtype=a.dtype)
    for p in range(4):
        interleave(planes[p], out=out[p])
    return out


def newton_planes_li2019(raw, *, eps):
    """Core of :func:`demosaic_newton_li2019` on the four lattices.

    Returns ``planes[p][t]``: channel ``p`` at the pixels of type ``t`` (each (H/2, W/2)).
    """
    a = _as_float(raw)
    dt = a.dtype
    h, w = a.shape
    h2, w2 = h // 2, w // 2
    qp = 4  # lattice padding: offsets up to 3 px on a margin of 2 lattice pixels
    q = _quarter_planes(a, qp)
    eps = dt.type(eps)
    half = dt.type(0.5)

    def view(planes, pad, t, dy, dx, m=0):
        """Values at full-pixel offset (dy, dx) from the type-t pixels, on a margin of m."""
        ny, nx = t // 2 + dy, t % 2 + dx
        s = 2 * (ny % 2) + (nx % 2)
        y0, x0 = pad + ny // 2 - m, pad + nx // 2 - m
        return planes[s][y0:y0 + h2 + 2 * m, x0:x0 + w2 + 2 * m]

    def directional(ch, chpad, t, dirs, m):
        """Fuse the one-sided Newton estimates of a channel along ``dirs``.

        ``E = I(1) + (M(0) - M(2)) / 2`` with weight ``1 / (|I(1) - I(3)| + |M(0) - M(2)| + eps)^2``;
        ``I`` the channel (known at odd steps along the direction), ``M`` the raw mosaic
        (the pixel's own orientation at even steps).
        """
        c = view(q, qp, t, 0, 0, m)
        shape = c.shape
        num = np.zeros(shape, dt)
        den = np.zeros(shape, dt)
        e = np.empty(shape, dt)
        g = np.empty(shape, dt)
        tmp = np.empty(shape, dt)
        for sy, sx in dirs:
            n1 = view(ch, chpad, t, sy, sx, m)
            np.subtract(c, view(q, qp, t, 2 * sy, 2 * sx, m), out=e)
            np.subtract(n1, view(ch, chpad, t, 3 * sy, 3 * sx, m), out=g)
            np.abs(g, out=g)
            np.abs(e, out=tmp)
            g += tmp
            g += eps
            g *= g
            np.reciprocal(g, out=g)
            e *= half
            e += n1
            e *= g
            num += e
            den += g
        num /= den
        return num

    # pass 1: the diagonal partner (3 - t) of every pixel type t, on a margin of 2
    diag = [directional(q, qp, t, ((-1, 1), (1, -1), (-1, -1), (1, 1)), 2) for t in range(4)]

    planes = [[None] * 4 for _ in range(4)]
    for p in range(4):
        planes[p][p] = q[p][qp:qp + h2, qp:qp + w2]
        planes[p][3 - p] = diag[3 - p][2:2 + h2, 2:2 + w2]
    # pass 2: horizontal (t ^ 1) and vertical (t ^ 2) partners; channel p is now known at
    # its own pixels (real) and at its diagonal partner's (pass 1): a checkerboard
    for t in range(4):
        for p in (t ^ 1, t ^ 2):
            ch = [None] * 4
            ch[p] = q[p][qp - 2:, qp - 2:]
            ch[3 - p] = diag[3 - p]
            planes[p][t] = directional(ch, 2, t, ((0, -1), (0, 1), (-1, 0), (1, 0)), 0)
    return planes


