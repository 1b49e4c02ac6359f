"""Decoding (demosaicing) of a polarization mosaic into four analyzer channels.

Each method takes one monochrome mosaic frame ``raw`` (H, W), float32, whose 2x2 cell holds
micro-polarizers at positions ``k = 2*row + col`` (row-major; the cell starts at pixel
(0, 0)), and returns the intensity seen through each of the four micro-polarizers,
``(4, H', W')`` with channel ``k`` = position ``k``.  The methods do not need the angles:
the Stokes fit that follows does.

Methods (registry :data:`DEMOSAIC_METHODS`, the choices of ``--demosaic``):

``superpixel``
    One sample of each orientation per 2x2 cell: half resolution, no interpolation.  The
    four samples look at four different scene points, which creates false polarization at
    edges (the instantaneous-field-of-view error, Ratliff et al. 2009).
``bilinear``
    Each orientation, zero-filled on its period-2 lattice, convolved with
    ``1/4 [[1,2,1],[2,4,2],[1,2,1]]`` (Ratliff et al. 2009; Gao & Gruev 2011).
``newton``
    Edge-directed Newton-polynomial interpolation guided by polarization differences
    (after Li et al. 2019), see :func:`demosaic_newton_li2019`.

Borders are handled by mirror reflection about the edge pixel, which keeps the mosaic
parity, so every method gives a full-size result.

References
----------
.. [1] B. M. Ratliff, C. F. LaCasse, J. S. Tyo, "Interpolation strategies for reducing IFOV
   artifacts in microgrid polarimeter imagery", Opt. Express 17(11), 9112-9125 (2009),
   doi:10.1364/OE.17.009112.
.. [2] S. Gao, V. Gruev, "Bilinear and bicubic interpolation methods for division of focal
   plane polarimeters", Opt. Express 19(27), 26161-26173 (2011), doi:10.1364/OE.19.026161.
.. [3] N. Li, Y. Zhao, Q. Pan, S. G. Kong, "Demosaicking DoFP images using Newton's
   polynomial interpolation and polarization difference model", Opt. Express 27(2),
   1376-1391 (2019), doi:10.1364/OE.27.001376.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import cv2
import numpy as np

from ..errors import InputError

__all__ = [
    "DEMOSAIC_METHODS",
    "DemosaicMethod",
    "demosaic",
    "demosaic_superpixel",
    "demosaic_bilinear",
    "demosaic_newton_li2019",
    "demosaic_newton_numpy",
    "validate_method",
    "BILINEAR_KERNEL",
]

#: Bilinear interpolation kernel for a period-2 lattice (applied to zero-filled channels).
BILINEAR_KERNEL = (np.array([[1, 2, 1], [2, 4, 2], [1, 2, 1]], dtype=np.float32) / 4.0)

_BORDER = cv2.BORDER_REFLECT_101  # mirror about the edge pixel: keeps the 2x2 parity
_TENT = np.array([0.5, 1.0, 0.5], dtype=np.float32)  # BILINEAR_KERNEL = outer(_TENT, _TENT)


def _as_float(raw):
    a = np.asarray(raw)
    if a.dtype != np.float32 and a.dtype != np.float64:
        a = a.astype(np.float32)
    if a.ndim != 2 or a.shape[0] % 2 or a.shape[1] % 2:
        raise InputError(f"mosaic frame of shape {a.shape} is not a 2-D image with even height and width")
    return np.ascontiguousarray(a)


def demosaic_superpixel(raw):
    """Split a mosaic into its four orientations, one value per 2x2 cell (half resolution).

    Parameters
    ----------
    raw : ndarray, shape (H, W)
        Mosaic frame, H and W even.

    Returns
    -------
    ndarray, shape (4, H/2, W/2)
        Channel ``k`` is the micro-polarizer at cell position ``k`` (row-major).

    References
    ----------
    .. [1] B. M. Ratliff, C. F. LaCasse, J. S. Tyo, Opt. Express 17(11), 9112 (2009).
    """
    a = _as_float(raw)
    return np.stack([a[0::2, 0::2], a[0::2, 1::2], a[1::2, 0::2], a[1::2, 1::2]])


def demosaic_bilinear(raw):
    """Bilinear interpolation of each orientation to full resolution.

    Each channel is zero-filled on its period-2 lattice and convolved with
    ``K = 1/4 [[1,2,1],[2,4,2],[1,2,1]]``; this reproduces any affine field exactly away
    from the borders.

    Parameters
    ----------
    raw : ndarray, shape (H, W)

    Returns
    -------
    ndarray, shape (4, H, W)

    References
    ----------
    .. [1] B. M. Ratliff, C. F. LaCasse, J. S. Tyo, Opt. Express 17(11), 9112 (2009).
    .. [2] S. Gao, V. Gruev, Opt. Express 19(27), 26161 (2011).
    """
    a = _as_float(raw)
    h, w = a.shape
    out = np.empty((4, h, w), dtype=a.dtype)
    z = np.empty((h, w), dtype=a.dtype)
    k1 = _TENT.astype(a.dtype)
    for p in range(4):
        py, px = divmod(p, 2)
        z.fill(0)
        z[py::2, px::2] = a[py::2, px::2]
        cv2.sepFilter2D(z, -1, k1, k1, dst=out[p], borderType=_BORDER)
    return out


def interpolate_bilinear_stack(planes):
    """Bilinearly interpolate quantities sampled on the mosaic lattices (rows, gains, ...).

    Parameters
    ----------
    planes : ndarray, shape (M, H, W)
        Per-pixel quantities (e.g. the 3 elements of each pixel's analysis row).

    Returns
    -------
    ndarray, shape (4, M, H, W)
        For channel ``p``, the interpolation of the quantity from the pixels at position ``p``.
    """
    m, h, w = planes.shape
    out = np.zeros((4, m, h, w), dtype=np.float32)
    k = BILINEAR_KERNEL
    for p in range(4):
        py, px = divmod(p, 2)
        for j in range(m):
            z = out[p, j]
            z[py::2, px::2] = planes[j, py::2, px::2]
            cv2.filter2D(z, -1, k, dst=z, borderType=_BORDER)
    return out


def _quarter_planes(a, qp):
    """Mirror-pad ``a`` by ``2*qp`` pixels and split it into its four contiguous lattices."""
    mp = cv2.copyMakeBorder(a, 2 * qp, 2 * qp, 2 * qp, 2 * qp, _BORDER)
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


def newton_stokes_li2019(raw, solve, *, eps_rel=1e-3, eps=None):
    """Stokes maps straight from :func:`demosaic_newton_li2019` (fused pass, fast path).

    Parameters
    ----------
    raw : ndarray, shape (H, W)
    solve : ndarray, shape (3, 4)
        Solve matrix of the four positions (e.g. ``solve_matrix(analysis_matrix(angles))``).

    Returns
    -------
    ndarray, shape (3, H, W), float32
    """
    from ._kernels import newton_stokes

    a, eps_ = _newton_inputs(raw, eps_rel, eps)
    if a.dtype != np.float32:
        chans = demosaic_newton_numpy(a, eps=eps_)
        return np.einsum("kp,p...->k...", np.asarray(solve, dtype=a.dtype), chans)
    rp, dp = _newton_pass1(a, eps_)
    out = np.empty((3,) + a.shape, dtype=a.dtype)
    newton_stokes(rp, dp, eps_, np.ascontiguousarray(solve, dtype=a.dtype), out)
    return out


def _newton_inputs(raw, eps_rel, eps):
    a = _as_float(raw)
    if eps is None:
        eps = eps_rel * max(float(np.mean(np.abs(a))), 1e-12)
    return a, a.dtype.type(eps)


def _newton_pass1(a, eps):
    """Mirror-pad by 6 and run pass 1 (diagonal partners) on the frame padded by 3."""
    from ._kernels import newton_diagonal

    rp = cv2.copyMakeBorder(a, 6, 6, 6, 6, _BORDER)
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


@dataclass(frozen=True)
class DemosaicMethod:
    """One entry of the registry.

    Attributes
    ----------
    name : str
        Registry key (``--demosaic`` choice).
    function : callable
        ``f(raw (H, W)) -> (4, H', W')``.
    scale : int
        Output pixel size in sensor pixels (2 for superpixel, 1 otherwise).
    support : int
        Half-width in pixels of the neighbourhood an output pixel depends on (for masks).
    reference : str
        Short citation.
    """

    name: str
    function: Callable
    scale: int
    support: int
    reference: str


#: Registry of decoding methods; also the choices of ``--demosaic``.
DEMOSAIC_METHODS: dict = {
    "superpixel": DemosaicMethod("superpixel", demosaic_superpixel, 2, 0,
                                 "Ratliff, LaCasse & Tyo 2009, Opt. Express 17(11) 9112"),
    "bilinear": DemosaicMethod("bilinear", demosaic_bilinear, 1, 1,
                               "Ratliff, LaCasse & Tyo 2009; Gao & Gruev 2011, Opt. Express 19(27) 26161"),
    "newton": DemosaicMethod("newton", demosaic_newton_li2019, 1, 3,
                             "Li, Zhao, Pan & Kong 2019, Opt. Express 27(2) 1376"),
}


def validate_method(method) -> DemosaicMethod:
    """Return the registry entry for ``method`` or raise :class:`InputError`."""
    key = str(method).strip().lower()
    if key not in DEMOSAIC_METHODS:
        raise InputError(
            f"demosaic method {method!r} is unknown; choose one of {', '.join(DEMOSAIC_METHODS)}"
        )
    return DEMOSAIC_METHODS[key]


def demosaic(raw, method="bilinear"):
    """Decode ``raw`` with the named method; returns ``(4, H', W')``."""
    return validate_method(method).function(raw)


def invalid_after(method: DemosaicMethod, invalid):
    """Propagate a raw-pixel invalid mask (H, W) to the output grid of ``method``."""
    inv = np.asarray(invalid, dtype=bool)
    if method.scale == 2:
        h, w = inv.shape
        return inv.reshape(h // 2, 2, w // 2, 2).any(axis=(1, 3))
    if not inv.any():
        return inv.copy()
    n = 2 * method.support + 1
    return cv2.dilate(inv.astype(np.uint8), np.ones((n, n), np.uint8), borderType=cv2.BORDER_REFLECT_101) > 0
