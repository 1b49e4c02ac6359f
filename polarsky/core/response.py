"""Camera response curves: the map from 8-bit codes back to linear light.

A camera's JPEG engine does not encode with the plain sRGB curve: it adds a tone curve
(an S-curve, a toe in the shadows, a shoulder in the highlights) that depends on the camera
and its picture style.  Decoding such frames with the sRGB curve leaves a nonlinearity that
inflates DoLP where the curve is steeper than sRGB.  The response is recovered from an
exposure series of a still scene (the same scene at several known exposure times) by one of
two published methods, both implemented by OpenCV:

``debevec``
    Debevec & Malik (1997): the log inverse response ``g(Z) = ln E + ln dt`` by linear least
    squares on sampled pixels with a smoothness term and a hat weighting.
``robertson``
    Robertson, Borman & Stevenson (2003): maximum-likelihood estimate of the inverse
    response by alternating optimization of irradiance and response.

A :class:`ResponseCurve` holds, per channel, the linear value of each code 0..255 on a scale
whose code 255 is 1 (the frame's full scale), made non-decreasing.

References
----------
.. [1] P. E. Debevec, J. Malik, "Recovering high dynamic range radiance maps from
   photographs", Proc. SIGGRAPH 97, 369-378 (1997), doi:10.1145/258734.258884.
.. [2] M. A. Robertson, S. Borman, R. L. Stevenson, "Estimation-theoretic approach to
   dynamic range enhancement using multiple exposures", J. Electronic Imaging 12(2),
   219-228 (2003), doi:10.1117/1.1557695.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..errors import InputError

__all__ = ["ResponseCurve", "ResponseMethod", "DEBEVEC", "ROBERTSON", "response_debevec1997",
           "response_robertson2003", "normalize_response"]


@dataclass
class ResponseCurve:
    """Linear value of each 8-bit code, per channel.

    Attributes
    ----------
    lut : ndarray, shape (C, 256), float32
        ``lut[c, code]``: linear light, code 255 = 1, non-decreasing.
    method : str
        Registry name of the method that recovered it.
    source : str
        File it was read from (empty when made in memory).
    attrs : dict
        What the file says besides (inputs, exposures, created, ...).
    """

    lut: np.ndarray
    method: str = ""
    source: str = ""
    attrs: dict = field(default_factory=dict)


@dataclass(frozen=True)
class ResponseMethod:
    """A response-recovery method of the registry (``--method`` of ``calibrate response``)."""

    name: str
    reference: str
    function: object


def normalize_response(curve) -> np.ndarray:
    """A raw inverse response (256, C) or (256, 1, C) as a LUT (C, 256): non-decreasing, code 255 = 1.

    Examples
    --------
    >>> normalize_response(np.array([[0.0], [2.0], [1.0], [4.0]]).repeat(64, 0)).shape
    (1, 256)
    """
    c = np.asarray(curve, dtype=np.float64).reshape(256, -1).T.copy()
    codes = np.arange(256)
    for row in c:
        ok = np.isfinite(row) & (row >= 0)
        if ok.sum() < 32:
            raise InputError("the response recovery gave no usable curve; shoot the series with more exposures that "
                             "overlap (each code value seen in several frames)")
        # codes the series never showed: interpolated, and the black end towards 0
        row[:] = np.interp(codes, np.r_[0, codes[ok]] if not ok[0] else codes[ok], np.r_[0.0, row[ok]] if not ok[0]
                           else row[ok])
    c = np.maximum.accumulate(np.clip(c, 0, None), axis=1)
    if np.any(c[:, -1] <= 0):
        raise InputError("the response recovery gave no usable curve; shoot the series with brighter exposures")
    return (c / c[:, -1:]).astype(np.float32)


def _as_bgr8(images):
    out = []
    for im in images:
        a = np.asarray(im)
        if a.dtype != np.uint8:
            raise InputError(f"response recovery needs 8-bit frames, got {a.dtype}")
        if a.ndim == 2:
            a = np.repeat(a[..., None], 3, axis=2)
        out.append(np.ascontiguousarray(a))
    return out


def _process(calibrator, images, exposures_s) -> np.ndarray:
    """Run an OpenCV response calibrator: (256, 3) relative linear exposure of each code."""
    times = np.asarray(exposures_s, dtype=np.float32)
    return np.asarray(calibrator.process(_as_bgr8(images), times), dtype=np.float64).reshape(256, 3)


def response_debevec1997(images, exposures_s, *, samples: int = 70, smoothness: float = 10.0) -> np.ndarray:
    """Inverse camera response by Debevec & Malik (1997), through ``cv2.createCalibrateDebevec``.

    Parameters
    ----------
    images : sequence of ndarray, shape (H, W) or (H, W, 3), uint8
        The same still scene at several exposures (channel order is kept).
    exposures_s : sequence of float
        Exposure time of each image, seconds.
    samples : int
        Pixels sampled for the least-squares system.
    smoothness : float
        Weight lambda of the second-derivative smoothness term.

    Returns
    -------
    ndarray, shape (256, 3), float64
        Relative linear exposure of each code (arbitrary scale).

    References
    ----------
    .. [1] P. E. Debevec, J. Malik, Proc. SIGGRAPH 97, 369-378 (1997), eq. (3).
    """
    import cv2

    return _process(cv2.createCalibrateDebevec(int(samples), float(smoothness), False), images, exposures_s)


def response_robertson2003(images, exposures_s, *, max_iter: int = 30, threshold: float = 0.01) -> np.ndarray:
    """Inverse camera response by Robertson, Borman & Stevenson (2003), through
    ``cv2.createCalibrateRobertson``.

    Parameters
    ----------
    images : sequence of ndarray, shape (H, W) or (H, W, 3), uint8
    exposures_s : sequence of float
        Exposure time of each image, seconds.
    max_iter : int
    threshold : float
        Convergence threshold of the alternating optimization.

    Returns
    -------
    ndarray, shape (256, 3), float64
        The maximum-likelihood inverse response: relative linear exposure of each code, in
        the scale the optimization fixed (arbitrary).

    References
    ----------
    .. [1] M. A. Robertson, S. Borman, R. L. Stevenson, J. Electronic Imaging 12(2),
       219-228 (2003), eqs. (9)-(10).
    """
    import cv2

    return _process(cv2.createCalibrateRobertson(max_iter=int(max_iter), threshold=float(threshold)), images,
                    exposures_s)


DEBEVEC = ResponseMethod("debevec", "Debevec & Malik 1997, Proc. SIGGRAPH 97, 369-378 (doi:10.1145/258734.258884)",
                         response_debevec1997)
ROBERTSON = ResponseMethod("robertson", "Robertson, Borman & Stevenson 2003, J. Electron. Imaging 12(2) 219-228 "
                           "(doi:10.1117/1.1557695)", response_robertson2003)
