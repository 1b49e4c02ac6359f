"""The compiled fast path of a monochrome mosaic without per-pixel calibration.

One fused pass per method decodes the four micro-polarizer intensities of every output
pixel and fits them (:mod:`polarsky.mosaic._kernels`); the estimate finishes the products
from the Stokes vectors, mean intensities and residuals it returns.  It gives what
decoding with :func:`polarsky.mosaic.methods.demosaic` followed by the reference fit gives.
"""

from __future__ import annotations

import numpy as np

from .methods import validate_method

__all__ = ["FAST_METHODS", "fast_fit"]

#: Methods with a fused compiled pass.
FAST_METHODS = ("superpixel", "bilinear", "newton")


def fast_fit(values, w, method, *, eps=None):
    """Stokes vector, mean intensity and residual sum of squares of every output pixel.

    Parameters
    ----------
    values : ndarray, shape (H, W), float32
        Linear mosaic values (H, W even).
    w : ndarray, shape (4, 3)
        Analysis matrix of the four cell positions.
    method : str or DemosaicMethod
        One of :data:`FAST_METHODS`.
    eps : float, optional
        Newton method's regularisation (:func:`polarsky.mosaic.newton.newton_eps` of the
        whole frame's level when a frame is processed in pieces).

    Returns
    -------
    s : ndarray (3, H', W') float32
    mean, rss : ndarray (H', W') float32
    """
    from ..core.stokes import solve_matrix
    from . import _kernels

    m = validate_method(method)
    a = np.ascontiguousarray(values, dtype=np.float32)
    p = solve_matrix(w).astype(np.float32)
    w32 = np.ascontiguousarray(w, dtype=np.float32)
    h, wd = a.shape
    oh, ow = (h // 2, wd // 2) if m.scale == 2 else (h, wd)
    s = np.empty((3, oh, ow), np.float32)
    mean = np.empty((oh, ow), np.float32)
    rss = np.empty((oh, ow), np.float32)
    if m.name == "superpixel":
        _kernels.superpixel_pass(a, p, w32, s, mean, rss)
    elif m.name == "bilinear":
        _kernels.bilinear_pass(a, p, w32, s, mean, rss)
    elif m.name == "newton":
        from .newton import newton_eps, newton_fit_li2019

        newton_fit_li2019(a, p, w32, s, mean, rss, eps=newton_eps(float(np.mean(np.abs(a)))) if eps is None else eps)
    else:
        raise ValueError(f"no compiled pass for {m.name}")
    return s, mean, rss
