"""Fitting the clear-sky model: which pixels are sky, the DoLP scale, the residuals.

The DoLP scale ``dolp_max`` is fitted by least squares with a robust (soft-L1) loss, so
clouds, haze patches and obstacles that slipped through the mask pull the answer little.
Uncertainties come from the Gauss-Newton covariance at the solution and treat the fitted
pixels as independent (they are drawn at random over the frame); neighbouring pixels are
correlated in real skies, so read them as lower bounds.

References
----------
.. [1] P. J. Huber, E. M. Ronchetti, *Robust Statistics*, 2nd ed., Wiley (2009)
   (M-estimation with robust losses).
.. [2] B. Triggs, P. F. McLauchlan, R. I. Hartley, A. W. Fitzgibbon, "Bundle adjustment -
   a modern synthesis", in *Vision Algorithms: Theory and Practice*, LNCS 1883, 298-372
   (2000) (covariance from the Gauss-Newton Hessian).
"""

from __future__ import annotations

import numpy as np

__all__ = ["MASK_REASONS", "describe_mask", "channel_mean", "sky_mask", "fit_dolp_max", "wrap_aolp_difference",
           "residual_stats",
           "subsample"]

#: Codes of the ``sky_mask_reason`` map: 0 = used for the fit.
MASK_REASONS = {
    0: "sky, used",
    1: "outside the lens field",
    2: "below the horizon",
    3: "invalid Stokes estimate",
    4: "sun disk and aureole",
    5: "halo ring",
    6: "rainbow band",
    7: "too dark (obstacle)",
    8: "excluded by --sky-mask",
}


def channel_mean(a: np.ndarray) -> np.ndarray:
    """Mean over the first axis (channels) of the finite values; NaN where none is finite.

    Unlike ``np.nanmean`` it says nothing (no RuntimeWarning) about pixels invalid in every
    channel, such as a saturated sun.

    >>> channel_mean(np.array([[1.0, np.nan], [3.0, np.nan]], np.float32))
    array([ 2., nan], dtype=float32)
    """
    finite = np.isfinite(a)
    n = finite.sum(axis=0)
    total = np.where(finite, a, 0).sum(axis=0)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(n > 0, total / np.maximum(n, 1), np.nan).astype(a.dtype)


def describe_mask(reason) -> str:
    """The pixels a sky mask left out, by reason, most first: ``"1200 px below the horizon, ..."``.

    >>> describe_mask(np.array([[2, 2], [8, 0]], np.uint8))
    '2 px below the horizon, 1 px excluded by --sky-mask'
    """
    counts = [(int(np.count_nonzero(reason == k)), MASK_REASONS[k]) for k in MASK_REASONS if k != 0]
    return ", ".join(f"{n} px {name}" for n, name in sorted(counts, key=lambda c: -c[0]) if n)


def sky_mask(*, inside, up, valid, s0, dolp, scattering_angle_deg, elevation_deg, bands,
             user_mask=None, min_elevation_deg: float = 0.0, dark_fraction: float = 0.25):
    """Reason code per pixel (see :data:`MASK_REASONS`); 0 marks sky used in the fit.

    Parameters
    ----------
    inside, up, valid : ndarray of bool, (h, w)
        Pixel sees the scene; above the horizon; Stokes valid in every channel.
    s0, dolp : ndarray, (h, w)
        Brightness and observed DoLP (one channel or channel mean).
    scattering_angle_deg, elevation_deg : ndarray, (h, w)
    bands : list of dict
        From :func:`polarsky.sky.features.feature_bands`.
    user_mask : ndarray of bool, optional
        True = sky the user allows.
    min_elevation_deg : float
        Pixels at or below this elevation are not sky (the horizon is never sky).
    dark_fraction : float
        Pixels darker than this fraction of the median brightness of the geometric sky
        are taken as obstacles (trees, buildings, the ground).
    """
    reason = np.zeros(inside.shape, dtype=np.uint8)
    order = []  # later assignments do not overwrite earlier (stronger) reasons
    order.append((~inside, 1))
    order.append((~up | ~(elevation_deg > min_elevation_deg), 2))
    order.append((~valid | ~np.isfinite(dolp) | ~(dolp <= 1.0) | ~np.isfinite(s0), 3))
    code = {"sun": 4, "halo": 5, "rainbow": 6}
    for b in bands:
        dist = scattering_angle_deg if b["about"] == "sun" else 180.0 - scattering_angle_deg
        order.append(((dist >= b["inner_deg"]) & (dist <= b["outer_deg"]), code[b["kind"]]))
    if user_mask is not None:
        order.append((~user_mask, 8))
    for cond, c in order:
        np.putmask(reason, (reason == 0) & cond, c)
    geo = reason == 0
    if geo.any():
        level = float(np.median(s0[geo]))
        np.putmask(reason, geo & (s0 < dark_fraction * level), 7)
    return reason


def subsample(mask, max_samples: int, seed: int = 0):
    """Flat indices of at most ``max_samples`` True pixels of ``mask``, in random order."""
    idx = np.flatnonzero(mask)
    if idx.size > max_samples:
        idx = np.random.default_rng(seed).choice(idx, size=max_samples, replace=False)
        idx.sort()
    return idx


def fit_dolp_max(dolp_obs, shape, *, max_samples: int = 200_000, seed: int = 0) -> dict:
    """Robust least-squares scale ``dolp_max`` in ``dolp_obs ~ dolp_max * shape``.

    Parameters
    ----------
    dolp_obs, shape : ndarray
        Observed DoLP and model DoLP for dolp_max = 1, at the sky pixels (any shape).

    Returns
    -------
    dict
        ``dolp_max``, ``dolp_max_sigma`` (standard uncertainty), ``samples``.

    References
    ----------
    .. [1] Huber & Ronchetti (2009).
    """
    from scipy.optimize import least_squares

    d = np.asarray(dolp_obs, dtype=np.float64).ravel()
    f = np.asarray(shape, dtype=np.float64).ravel()
    ok = np.isfinite(d) & np.isfinite(f)
    d, f = d[ok], f[ok]
    if d.size > max_samples:
        pick = np.random.default_rng(seed).choice(d.size, size=max_samples, replace=False)
        d, f = d[pick], f[pick]
    if d.size < 2 or not np.any(f > 0):
        return {"dolp_max": float("nan"), "dolp_max_sigma": float("nan"), "fit_samples": int(d.size)}
    d0 = float(np.dot(f, d) / np.dot(f, f))
    r0 = d - d0 * f
    scale = max(1.4826 * float(np.median(np.abs(r0 - np.median(r0)))), 1e-4)
    res = least_squares(lambda p: d - p[0] * f, [d0], loss="soft_l1", f_scale=scale, method="trf")
    j = res.jac
    dof = max(d.size - 1, 1)
    var = 2.0 * res.cost / dof
    cov = var / float(j[:, 0] @ j[:, 0])
    return {"dolp_max": float(res.x[0]), "dolp_max_sigma": float(np.sqrt(cov)), "fit_samples": int(d.size)}


def wrap_aolp_difference(a_deg, b_deg):
    """``a - b`` for axial angles, wrapped to [-90, 90) degrees (dtype kept)."""
    a = np.asarray(a_deg)
    d = a - np.asarray(b_deg, dtype=a.dtype)
    d = np.mod(d + 90.0, 180.0) - 90.0
    return d.astype(a.dtype, copy=False)


def residual_stats(dolp_res, aolp_res, used) -> dict:
    """RMS and robust (1.4826 MAD) spread and median (bias) of the residuals over ``used`` pixels.

    All channels together; the medians use a random subsample of 500 000 values on large frames.
    """
    dr = np.asarray(dolp_res)[..., used] if np.ndim(dolp_res) == 3 else np.asarray(dolp_res)[used]
    ar = np.asarray(aolp_res)[..., used] if np.ndim(aolp_res) == 3 else np.asarray(aolp_res)[used]
    dr = dr[np.isfinite(dr)].astype(np.float64)
    ar = ar[np.isfinite(ar)].astype(np.float64)
    rng = np.random.default_rng(0)
    # medians on at most 500 000 random values (exact below that)
    dm = dr if dr.size <= 500_000 else rng.choice(dr, 500_000, replace=False)
    am = ar if ar.size <= 500_000 else rng.choice(ar, 500_000, replace=False)
    if dr.size == 0:
        nan = float("nan")
        return {"rms_dolp_residual": nan, "rms_aolp_residual_deg": nan, "mad_dolp_residual": nan, "mad_aolp_residual_deg": nan,
                "median_dolp_residual": nan, "median_aolp_residual_deg": nan}
    return {
        "rms_dolp_residual": float(np.sqrt(np.mean(dr ** 2))),
        "rms_aolp_residual_deg": float(np.sqrt(np.mean(ar ** 2))),
        "mad_dolp_residual": float(1.4826 * np.median(np.abs(dm - np.median(dm)))),
        "mad_aolp_residual_deg": float(1.4826 * np.median(np.abs(am - np.median(am)))),
        "median_dolp_residual": float(np.median(dm)),
        "median_aolp_residual_deg": float(np.median(am)),
    }
