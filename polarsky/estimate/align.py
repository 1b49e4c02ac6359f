"""Sub-pixel registration of the frames of a hand-held bracket.

Turning the filter changes the brightness of reflections and sky from frame to frame, so
frames are registered on their *gradient magnitude* (edges), not on raw intensity, with
phase correlation (whose whitened cross-power spectrum ignores overall brightness).  Only
translation is estimated: turning a screw-in filter shakes the camera by a few pixels.

References
----------
.. [1] C. D. Kuglin, D. C. Hines, "The phase correlation image alignment method",
   Proc. IEEE Int. Conf. Cybernetics and Society, 163-165 (1975).
.. [2] G. D. Evangelidis, E. Z. Psarakis, "Parametric image alignment using enhanced
   correlation coefficient maximization", IEEE Trans. PAMI 30(10), 1858-1865 (2008),
   doi:10.1109/TPAMI.2008.113 (the sub-pixel refinement, ``cv2.findTransformECC``).
"""

from __future__ import annotations

import warnings

import numpy as np

from ..conventions import SATURATION_FRACTION
from ..errors import PolarskyWarning

__all__ = ["gradient_image", "estimate_shift", "align_bracket", "MAX_ALIGN_SIDE"]

#: Registration works on a centred crop of at most this many pixels per side.
MAX_ALIGN_SIDE = 2048


def gradient_image(img: np.ndarray) -> np.ndarray:
    """Gradient magnitude (float32) of a 2-D image after light smoothing, log-compressed.

    The log makes the result insensitive to the brightness changes the filter causes.
    """
    import cv2

    a = np.log1p(np.asarray(img, dtype=np.float32) * np.float32(1000.0))
    a = cv2.GaussianBlur(a, (0, 0), 1.0)
    gx = cv2.Sobel(a, cv2.CV_32F, 1, 0, ksize=3)
    gy = cv2.Sobel(a, cv2.CV_32F, 0, 1, ksize=3)
    return cv2.magnitude(gx, gy)


def estimate_shift(reference: np.ndarray, moving: np.ndarray) -> tuple[float, float, float]:
    """Translation ``(dx, dy)`` that maps ``moving`` onto ``reference``, and a peak response.

    Parameters
    ----------
    reference, moving : ndarray, shape (H, W)
        Linear intensity images.

    Returns
    -------
    dx, dy : float
        Shift in pixels: ``moving(x + dx, y + dy) ~ reference(x, y)``... that is, warping
        ``moving`` by ``(-dx, -dy)`` aligns it.
    response : float
        Phase-correlation peak height in [0, 1]; low values mean an unreliable estimate.
    """
    import cv2

    g_ref = gradient_image(reference)
    g_mov = gradient_image(moving)
    win = cv2.createHanningWindow(g_ref.shape[::-1], cv2.CV_32F)
    (dx, dy), response = cv2.phaseCorrelate(g_ref, g_mov, win)
    # refine with the enhanced correlation coefficient (invariant to gain and offset)
    warp = np.float32([[1, 0, dx], [0, 1, dy]])
    try:
        _, warp = cv2.findTransformECC(g_ref, g_mov, warp, cv2.MOTION_TRANSLATION,
                                       (cv2.TERM_CRITERIA_EPS | cv2.TERM_CRITERIA_COUNT, 100, 1e-5), None, 3)
        rx, ry = float(warp[0, 2]), float(warp[1, 2])
        if abs(rx - dx) < 2 and abs(ry - dy) < 2:
            dx, dy = rx, ry
    except cv2.error:
        pass  # keep the phase-correlation estimate
    return float(dx), float(dy), float(response)


def _crop(shape):
    h, w = shape
    ch, cw = min(h, MAX_ALIGN_SIDE), min(w, MAX_ALIGN_SIDE)
    y0, x0 = (h - ch) // 2, (w - cw) // 2
    return slice(y0, y0 + ch), slice(x0, x0 + cw)


def align_bracket(bracket) -> np.ndarray:
    """Register every frame of ``bracket`` to the first; shift frames in memory.

    The bracket's native frames are replaced by shifted copies (the files are untouched),
    pixels that come from outside a frame become not valid, and ``bracket.shifts_px``
    holds the ``(dx, dy)`` that was removed from each frame.

    Returns
    -------
    ndarray, shape (N, 2)
        Measured shifts ``(dx, dy)`` in pixels of each frame relative to the first.
    """
    import cv2

    ys, xs = _crop(bracket.shape)
    h, w = bracket.shape

    def luminance(fr):
        d = fr.data[:, ys, xs].astype(np.float32).mean(axis=0) / np.float32(fr.full_scale)
        return d

    ref = luminance(bracket.frames[0])
    shifts = np.zeros((bracket.n, 2))
    coverage = np.ones((h, w), dtype=bool)
    for k in range(1, bracket.n):
        fr = bracket.frames[k]
        dx, dy, resp = estimate_shift(ref, luminance(fr))
        shifts[k] = (dx, dy)
        if resp < 0.05:
            warnings.warn(f"alignment of {fr.path.name} is unreliable (phase-correlation peak {resp:.3f}); "
                          "check the frame shows the same scene", PolarskyWarning, stacklevel=2)
        if abs(dx) < 1e-3 and abs(dy) < 1e-3:
            continue
        m = np.float32([[1, 0, dx], [0, 1, dy]])
        flags = cv2.INTER_LINEAR | cv2.WARP_INVERSE_MAP
        shifted = np.empty_like(fr.data)
        for c in range(fr.data.shape[0]):
            shifted[c] = cv2.warpAffine(fr.data[c], m, (w, h), flags=flags, borderMode=cv2.BORDER_REPLICATE)
        # saturation must survive interpolation: warp the saturated mask and keep its support
        sat = (fr.data >= SATURATION_FRACTION * fr.full_scale).any(axis=0).astype(np.uint8)
        if sat.any():
            sat_w = cv2.warpAffine(sat, m, (w, h), flags=flags, borderValue=0) > 0
            for c in range(fr.data.shape[0]):
                shifted[c][sat_w] = fr.data.dtype.type(fr.full_scale)
        fr.data = shifted
        inside = cv2.warpAffine(np.ones((h, w), np.uint8), m, (w, h), flags=cv2.INTER_NEAREST | cv2.WARP_INVERSE_MAP, borderValue=0) > 0
        # a pixel whose bilinear footprint reaches outside is not valid either
        inside = cv2.erode(inside.astype(np.uint8), np.ones((3, 3), np.uint8)) > 0
        coverage &= inside
    bracket.shifts_px = shifts
    bracket.coverage = None if coverage.all() else coverage
    return shifts
