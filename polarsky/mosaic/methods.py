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
    (after Li et al. 2019), see :mod:`polarsky.mosaic.newton`.

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
    "DemosaicMethod",
    "SUPERPIXEL",
    "BILINEAR",
    "NEWTON",
    "demosaic",
    "demosaic_superpixel",
    "demosaic_bilinear",
    "interpolate_bilinear_stack",
    "invalid_after",
    "validate_method",
    "BILINEAR_KERNEL",
    "BORDER",
]

#: Bilinear interpolation kernel for a period-2 lattice (applied to zero-filled channels).
BILINEAR_KERNEL = (np.array([[1, 2, 1], [2, 4, 2], [1, 2, 1]], dtype=np.float32) / 4.0)

BORDER = cv2.BORDER_REFLECT_101  # mirror about the edge pixel: keeps the 2x2 parity
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
        cv2.sepFilter2D(z, -1, k1, k1, dst=out[p], borderType=BORDER)
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
            cv2.filter2D(z, -1, k, dst=z, borderType=BORDER)
    return out


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


def _newton(raw, **kw):
    from .newton import demosaic_newton_li2019

    return demosaic_newton_li2019(raw, **kw)


#: Entries of the ``--demosaic`` registry (:data:`polarsky.registries.DEMOSAIC_METHODS`).
SUPERPIXEL = DemosaicMethod("superpixel", demosaic_superpixel, 2, 0,
                            "Ratliff, LaCasse & Tyo 2009, Opt. Express 17(11) 9112")
BILINEAR = DemosaicMethod("bilinear", demosaic_bilinear, 1, 1,
                          "Ratliff, LaCasse & Tyo 2009; Gao & Gruev 2011, Opt. Express 19(27) 26161")
NEWTON = DemosaicMethod("newton", _newton, 1, 3, "Li, Zhao, Pan & Kong 2019, Opt. Express 27(2) 1376")


def validate_method(method) -> DemosaicMethod:
    """The registry entry of ``method`` (a name or an entry); InputError listing the choices."""
    if isinstance(method, DemosaicMethod):
        return method
    from ..registries import DEMOSAIC_METHODS

    return DEMOSAIC_METHODS.get(method)


def demosaic(raw, method="bilinear"):
    """Decode ``raw`` with the named method; returns ``(4, H', W')``."""
    return validate_method(method).function(raw)


def invalid_after(method: DemosaicMethod, invalid):
    """Propagate a raw-pixel invalid mask (H, W) to the output grid of ``method``."""
    inv = np.asarray(invalid, dtype=bool)
    if method.scale == 2:
        h, w = inv.shape
        if not inv.any():  # the common case, without the slow strided reduction
            return np.zeros((h // 2, w // 2), bool)
        return inv.reshape(h // 2, 2, w // 2, 2).any(axis=(1, 3))
    if not inv.any():
        return inv.copy()
    n = 2 * method.support + 1
    return cv2.dilate(inv.astype(np.uint8), np.ones((n, n), np.uint8), borderType=cv2.BORDER_REFLECT_101) > 0
