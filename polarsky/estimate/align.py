"""Sub-pixel registration of the frames of a hand-held bracket.

Turning the filter changes the brightness of reflections and sky from frame to frame, so
frames are registered on their *gradient magnitude* (edges), not on raw intensity, with
phase correlation (whose whitened cross-power spectrum ignores overall brightness), then
refined by the enhanced correlation coefficient to a similarity: translation, rotation (a
hand-held camera rolls by a fraction of a degree between frames) and scale (focus breathing).

A frame whose content is turned by ``rho`` (counter-clockwise as displayed) relative to the
first was taken with the camera rolled by ``-rho``; a filter on the lens rolled with it, so
after the frame is turned back its analyzer angle is ``theta - rho`` on the first frame's
image (:func:`roll_corrections`; not so for a filter fixed to the scene).

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

__all__ = ["gradient_image", "estimate_motion", "estimate_shift", "roll_corrections", "align_bracket", "MAX_ALIGN_SIDE"]

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


def estimate_motion(reference: np.ndarray, moving: np.ndarray):
    """Similarity that maps ``reference`` coordinates onto ``moving`` ones, and a peak response.

    Parameters
    ----------
    reference, moving : ndarray, shape (H, W)
        Linear intensity images.

    Returns
    -------
    m : ndarray, shape (2, 3), float64
        ``moving(m @ [x, y, 1]) ~ reference(x, y)`` (pixel coordinates, x right, y down):
        warping ``moving`` by ``m`` with ``WARP_INVERSE_MAP`` aligns it.
    response : float
        Phase-correlation peak height in [0, 1]; low values mean an unreliable estimate.
    refined : bool
        Whether the similarity refinement converged (else ``m`` is the translation alone).
    """
    import cv2

    g_ref = gradient_image(reference)
    g_mov = gradient_image(moving)
    win = cv2.createHanningWindow(g_ref.shape[::-1], cv2.CV_32F)
    (dx, dy), response = cv2.phaseCorrelate(g_ref, g_mov, win)
    m = np.array([[1.0, 0.0, dx], [0.0, 1.0, dy]])
    warp = m.astype(np.float32)
    try:
        _, warp = cv2.findTransformECC(g_ref, g_mov, warp, cv2.MOTION_AFFINE,
                                       (cv2.TERM_CRITERIA_EPS | cv2.TERM_CRITERIA_COUNT, 200, 1e-6), None, 3)
    except cv2.error:
        return m, float(response), False
    a = np.asarray(warp, dtype=np.float64)
    sim = _similarity(a, g_ref.shape)
    scale, rot = _scale_rotation(sim)
    c = np.array([(g_ref.shape[1] - 1) / 2, (g_ref.shape[0] - 1) / 2])
    moved = sim[:, :2] @ c + sim[:, 2] - c
    if np.hypot(moved[0] - dx, moved[1] - dy) > 2 or abs(scale - 1) > 0.1 or abs(rot) > 0.2:
        return m, float(response), False  # the refinement wandered off
    return sim, float(response), True


def _similarity(a: np.ndarray, shape) -> np.ndarray:
    """The similarity closest to the affine ``a`` that maps the image centre the same way."""
    p = (a[0, 0] + a[1, 1]) / 2
    q = (a[1, 0] - a[0, 1]) / 2
    r = np.array([[p, -q], [q, p]])
    c = np.array([(shape[1] - 1) / 2, (shape[0] - 1) / 2])
    t = a[:, :2] @ c + a[:, 2] - r @ c
    return np.hstack([r, t[:, None]])


def _scale_rotation(m: np.ndarray):
    """Scale and the angle (radians, from +x toward +y) of a similarity's linear part."""
    return float(np.hypot(m[0, 0], m[1, 0])), float(np.arctan2(m[1, 0], m[0, 0]))


def estimate_shift(reference: np.ndarray, moving: np.ndarray) -> tuple[float, float, float]:
    """Translation ``(dx, dy)`` of :func:`estimate_motion` and its peak response (rotation ignored)."""
    m, response, _ = estimate_motion(reference, moving)
    return float(m[0, 2]), float(m[1, 2]), response


def roll_corrections(rotations_deg) -> np.ndarray:
    """Degrees to add to each frame's analyzer angle when the filter turns with the camera.

    A frame's content turned by ``rho`` counter-clockwise as displayed means the camera and
    a filter on its lens rolled by ``-rho``: the analyzer angle on the first frame's image is
    ``theta - rho``.

    Examples
    --------
    >>> roll_corrections([0.0, 0.5, -0.25]).tolist()
    [-0.0, -0.5, 0.25]
    """
    return -np.asarray(rotations_deg, dtype=np.float64)


def _crop(shape):
    h, w = shape
    ch, cw = min(h, MAX_ALIGN_SIDE), min(w, MAX_ALIGN_SIDE)
    y0, x0 = (h - ch) // 2, (w - cw) // 2
    return slice(y0, y0 + ch), slice(x0, x0 + cw)


def align_bracket(bracket) -> np.ndarray:
    """Register every frame of ``bracket`` to the first; turn and shift frames in memory.

    The bracket's native frames are replaced by registered copies (the files are untouched),
    pixels that come from outside a frame become not valid, ``bracket.shifts_px`` holds the
    ``(dx, dy)`` removed from each frame (at the image centre), ``bracket.rotations_deg``
    the content rotation (counter-clockwise as displayed) and ``bracket.scales`` the scale.

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
        return np.nan_to_num(d, nan=0.0, posinf=1.0, neginf=0.0)

    ref = luminance(bracket.frames[0])
    n = bracket.n
    shifts, rotations, scales = np.zeros((n, 2)), np.zeros(n), np.ones(n)
    coverage = np.ones((h, w), dtype=bool)
    origin = np.array([xs.start, ys.start], dtype=np.float64)
    unrefined = []
    for k in range(1, n):
        fr = bracket.frames[k]
        mc, resp, refined = estimate_motion(ref, luminance(fr))
        if not refined:
            unrefined.append(fr.path.name)
        # crop coordinates -> frame coordinates: x_mov = A x_ref + (t + o - A o)
        m = mc.copy()
        m[:, 2] = mc[:, 2] + origin - mc[:, :2] @ origin
        scale, rot = _scale_rotation(m)
        center = np.array([(w - 1) / 2, (h - 1) / 2])
        shifts[k] = m[:, :2] @ center + m[:, 2] - center
        rotations[k] = -np.degrees(rot)
        scales[k] = scale
        if resp < 0.05:
            warnings.warn(f"alignment of {fr.path.name} is unreliable (phase-correlation peak {resp:.3f}); "
                          "check the frame shows the same scene", PolarskyWarning, stacklevel=2)
        if np.allclose(m, [[1, 0, 0], [0, 1, 0]], atol=1e-3):
            continue
        m32 = m.astype(np.float32)
        flags = cv2.INTER_LINEAR | cv2.WARP_INVERSE_MAP
        moved = np.empty_like(fr.data)
        for c in range(fr.data.shape[0]):
            moved[c] = cv2.warpAffine(fr.data[c], m32, (w, h), flags=flags, borderMode=cv2.BORDER_REPLICATE)
        # saturation must survive interpolation: warp the saturated mask and keep its support
        sat = (fr.data >= SATURATION_FRACTION * fr.full_scale).any(axis=0).astype(np.uint8)
        if sat.any():
            sat_w = cv2.warpAffine(sat, m32, (w, h), flags=flags, borderValue=0) > 0
            for c in range(fr.data.shape[0]):
                moved[c][sat_w] = fr.data.dtype.type(fr.full_scale)
        fr.data = moved
        inside = cv2.warpAffine(np.ones((h, w), np.uint8), m32, (w, h), flags=cv2.INTER_NEAREST | cv2.WARP_INVERSE_MAP,
                                borderValue=0) > 0
        # a pixel whose bilinear footprint reaches outside is not valid either
        inside = cv2.erode(inside.astype(np.uint8), np.ones((3, 3), np.uint8)) > 0
        coverage &= inside
    if unrefined:
        warnings.warn(f"rotation and scale could not be measured for {', '.join(unrefined)} (translation only); "
                      "a hand-held roll left there shows as AoLP error on textured surfaces", PolarskyWarning,
                      stacklevel=2)
    bracket.shifts_px = shifts
    bracket.rotations_deg = rotations
    bracket.scales = scales
    bracket.coverage = None if coverage.all() else coverage
    return shifts
