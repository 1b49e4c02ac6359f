"""Linear Stokes estimation from intensities seen through linear analyzers.

Uncertainties and the bias-corrected DoLP are in :mod:`polarsky.core.uncertainty`.

Pure numpy functions: arrays in, arrays out, float32 kept float32.  Angles are in degrees
at the interface and in radians inside.  The angle convention is the image convention of
the project (from the image +x axis, counter-clockwise as displayed).

The measurement model for frame ``k`` taken through an analyzer with transmission axis at
``theta_k``, transmittance ``t_k`` and diattenuation ``D_k`` is

.. math:: I_k = \\tfrac{t_k}{2}\\,(S_0 + D_k S_1 \\cos 2\\theta_k + D_k S_2 \\sin 2\\theta_k)

so that ``I = W S`` with one row of ``W`` per frame (the *analysis matrix*).

References
----------
.. [1] E. Collett, *Field Guide to Polarization*, SPIE (2005), pp. 8-12 (Stokes parameters
   and the Mueller matrix of a linear polarizer).
.. [2] J. S. Tyo, "Design of optimal polarimeters: maximization of signal-to-noise ratio
   and minimization of systematic error", Appl. Opt. 41(4), 619-630 (2002),
   doi:10.1364/AO.41.000619 (condition number of the analysis matrix).
.. [3] N. Hagen, Y. Otani, "Generating high-performance polarization measurements with
   low-performance polarizers", Opt. Eng. 58(8), 080501 (2019),
   doi:10.1117/1.OE.58.8.080501 (diattenuation in the analysis matrix).
"""

from __future__ import annotations

import warnings

import numpy as np

from ..errors import InputError, PolarskyWarning

__all__ = [
    "diattenuation_from_extinction",
    "analysis_matrix",
    "check_angles",
    "solve_matrix",
    "fit_stokes",
    "fit_stokes_per_pixel",
    "dolp_aolp",
    "stokes_covariance",
    "residual_rms",
    "intensity_at",
    "BAD_CONDITION",
    "distinct_orientations",
]

#: Condition number of the analysis matrix above which a warning is given.  Equally spaced
#: analyzers reach the minimum, sqrt(2); 0/45/90 gives 1 + sqrt(2) ~ 2.41 (Tyo 2002).
BAD_CONDITION = 10.0


def diattenuation_from_extinction(extinction_ratio):
    """Diattenuation ``D = (ER - 1) / (ER + 1)`` of a linear polarizer.

    Parameters
    ----------
    extinction_ratio : float or array_like
        ``Tmax / Tmin`` (>= 1); ``inf`` means an ideal polarizer.

    Returns
    -------
    float or ndarray
        Diattenuation in [0, 1].

    References
    ----------
    .. [1] R. A. Chipman, W. S. T. Lam, G. Young, *Polarized Light and Optical Systems*,
       CRC Press (2018), ch. 5 (diattenuation of a partial polarizer).
    """
    er = np.asarray(extinction_ratio, dtype=np.float64)
    if np.any(~(er >= 1.0)):
        raise InputError(
            f"extinction ratio {extinction_ratio!r} is below 1; give Tmax/Tmin, e.g. --extinction 500"
        )
    with np.errstate(invalid="ignore"):
        d = np.where(np.isinf(er), 1.0, (er - 1.0) / (er + 1.0))
    return float(d) if d.ndim == 0 else d


def analysis_matrix(angles_deg, *, diattenuation=1.0, transmittance=1.0, angle_offset_deg=0.0):
    """Analysis matrix ``W`` (one row per frame) of a linear-analyzer polarimeter.

    Parameters
    ----------
    angles_deg : array_like, shape (N,)
        Analyzer transmission-axis angles in degrees (image convention).
    diattenuation : float or array_like, shape (N,)
        Analyzer diattenuation ``D`` (1 for an ideal polarizer).
    transmittance : float or array_like, shape (N,)
        Mean intensity transmittance ``t`` of the analyzer (1 keeps the input scale).
    angle_offset_deg : float
        Offset added to every angle (the calibrated zero of the filter ring), degrees.

    Returns
    -------
    ndarray, shape (N, 3), float64
        Rows ``t/2 [1, D cos 2theta, D sin 2theta]``.

    Examples
    --------
    >>> analysis_matrix([0, 45, 90, 135]).round(3).tolist()
    [[0.5, 0.5, 0.0], [0.5, 0.0, 0.5], [0.5, -0.5, 0.0], [0.5, -0.0, -0.5]]
    """
    theta = np.deg2rad(np.asarray(angles_deg, dtype=np.float64) + float(angle_offset_deg))
    d = np.broadcast_to(np.asarray(diattenuation, dtype=np.float64), theta.shape)
    t = np.broadcast_to(np.asarray(transmittance, dtype=np.float64), theta.shape)
    return 0.5 * t[:, None] * np.stack(
        [np.ones_like(theta), d * np.cos(2 * theta), d * np.sin(2 * theta)], axis=1
    )


def distinct_orientations(angles_deg) -> np.ndarray:
    """Distinct analyzer orientations modulo 180 degrees (rounded to 1e-6 deg), sorted.

    Examples
    --------
    >>> distinct_orientations([0, 180, 45, 225.0000000001]).tolist()
    [0.0, 45.0]
    """
    a = np.sort(np.round(np.mod(np.asarray(angles_deg, dtype=np.float64).ravel(), 180.0), 6) % 180.0)
    return a[np.concatenate(([True], np.diff(a) != 0))] if a.size else a


def check_angles(angles_deg, *, warn_condition: float = BAD_CONDITION, what: str = "analyzer angles") -> float:
    """Check that an analyzer angle set determines S0, S1, S2; return cond(W).

    Parameters
    ----------
    angles_deg : array_like, shape (N,)
        Analyzer angles in degrees.
    what : str
        How to name the angles in messages.
    warn_condition : float
        Warn (:class:`PolarskyWarning`) when the 2-norm condition number exceeds this.

    Returns
    -------
    float
        Condition number of the ideal analysis matrix (sqrt(2) at best).

    Raises
    ------
    InputError
        Fewer than 3 distinct angles modulo 180 degrees, or a rank-deficient set.

    References
    ----------
    .. [1] J. S. Tyo, Appl. Opt. 41(4), 619-630 (2002).
    """
    angles = np.asarray(angles_deg, dtype=np.float64).ravel()
    if angles.size == 0 or not np.all(np.isfinite(angles)):
        raise InputError(f"{what} {list(angles_deg)!r} are not all finite numbers")
    distinct = distinct_orientations(angles)
    if distinct.size < 3:
        raise InputError(
            f"{what} {_fmt(angles)} hold only {distinct.size} distinct value(s) "
            "modulo 180 deg; a linear Stokes estimate needs at least 3 (e.g. 0,45,90,135)"
        )
    w = analysis_matrix(angles)
    sv = np.linalg.svd(w, compute_uv=False)
    cond = float(sv[0] / sv[-1]) if sv[-1] > 1e-12 * sv[0] else float("inf")
    if not np.isfinite(cond):
        raise InputError(f"{what} {_fmt(angles)} are degenerate; spread them over 180 deg")
    if cond > warn_condition:
        warnings.warn(
            f"{what} {_fmt(angles)} are badly conditioned (condition number "
            f"{cond:.1f}; best is 1.41 for angles spread evenly over 180 deg): "
            "S1/S2 noise is amplified",
            PolarskyWarning,
            stacklevel=2,
        )
    return cond


def _fmt(angles) -> str:
    return ",".join(f"{a:g}" for a in np.asarray(angles).ravel())


def solve_matrix(w, weights=None):
    """Weighted least-squares solve matrix ``P = (W^T V W)^-1 W^T V``, shape (3, N).

    Parameters
    ----------
    w : ndarray, shape (N, 3)
        Analysis matrix.
    weights : array_like, shape (N,), optional
        Inverse noise variance of each frame (relative); equal weights if omitted.
    """
    w = np.asarray(w, dtype=np.float64)
    v = np.ones(w.shape[0]) if weights is None else np.asarray(weights, dtype=np.float64)
    wtv = w.T * v[None, :]
    return np.linalg.solve(wtv @ w, wtv)


def fit_stokes(intensities, w, *, weights=None, out=None):
    """Least-squares Stokes vector from frames seen through the analyzers of ``w``.

    Parameters
    ----------
    intensities : ndarray, shape (N, ...)
        Linear intensities, one slice per frame (float32 recommended).
    w : ndarray, shape (N, 3)
        Analysis matrix from :func:`analysis_matrix`.
    weights : array_like, shape (N,), optional
        Relative inverse variances of the frames (weighted least squares).
    out : ndarray, shape (3, ...), optional
        Where to write the result.

    Returns
    -------
    ndarray, shape (3, ...)
        ``S0, S1, S2`` in the dtype of ``intensities`` (float32 stays float32).

    Notes
    -----
    For 0/45/90/135 this equals the textbook closed forms S0 = (I0+I45+I90+I135)/2,
    S1 = I0 - I90, S2 = I45 - I135 (Collett 2005).
    """
    data = np.asarray(intensities)
    if data.dtype.kind != "f":
        data = data.astype(np.float32)
    p = solve_matrix(w, weights).astype(data.dtype)
    n = data.shape[0]
    flat = data.reshape(n, -1)
    if out is None:
        out = np.empty((3,) + data.shape[1:], dtype=data.dtype)
    res = out.reshape(3, -1)
    np.matmul(p, flat, out=res)
    return out


def fit_stokes_per_pixel(intensities, solve, *, out=None):
    """Stokes vector with a per-pixel solve matrix (per-pixel calibration).

    Parameters
    ----------
    intensities : ndarray, shape (N, ...)
        Linear intensities.
    solve : ndarray, shape (3, N, ...)
        Per-pixel solve matrices (pseudo-inverses of each pixel's analysis matrix).

    Returns
    -------
    ndarray, shape (3, ...)
    """
    data = np.asarray(intensities)
    if out is None:
        out = np.empty((3,) + data.shape[1:], dtype=np.result_type(data.dtype, np.float32))
    for i in range(3):
        np.einsum("k...,k...->...", solve[i], data, out=out[i])
    return out


def dolp_aolp(s, *, out_dolp=None, out_aolp=None):
    """Degree and angle of linear polarization from ``S0, S1, S2``.

    Parameters
    ----------
    s : ndarray, shape (3, ...)
        Stokes components.

    Returns
    -------
    dolp : ndarray
        ``sqrt(S1^2 + S2^2) / S0`` (NaN where S0 <= 0).
    aolp_deg : ndarray
        ``1/2 atan2(S2, S1)`` in degrees, wrapped to [0, 180).
    """
    s0, s1, s2 = s[0], s[1], s[2]
    lin = np.hypot(s1, s2, out=out_dolp)
    with np.errstate(divide="ignore", invalid="ignore"):
        np.divide(lin, s0, out=lin)
    lin[~(s0 > 0)] = np.nan
    aolp = np.arctan2(s2, s1, out=out_aolp)
    aolp *= np.asarray(90.0 / np.pi, dtype=aolp.dtype)
    aolp += np.asarray(180.0, dtype=aolp.dtype)
    np.fmod(aolp, np.asarray(180.0, dtype=aolp.dtype), out=aolp)
    return lin, aolp


def residual_rms(intensities, w, s):
    """RMS of the least-squares residual ``I - W S`` over frames, per pixel.

    Returns the per-pixel root-mean-square misfit in intensity units, with ``N - 3``
    degrees of freedom (zero when N == 3).
    """
    data = np.asarray(intensities)
    n = data.shape[0]
    wf = np.asarray(w, dtype=data.dtype)
    acc = np.zeros(data.shape[1:], dtype=data.dtype)
    for k in range(n):
        r = data[k] - (wf[k, 0] * s[0] + wf[k, 1] * s[1] + wf[k, 2] * s[2])
        acc += r * r
    dof = max(n - 3, 1)
    acc /= dof
    return np.sqrt(acc, out=acc)


def stokes_covariance(w, weights=None):
    """Unit-variance covariance ``(W^T V W)^-1`` of the Stokes estimate, shape (3, 3).

    Multiply by the per-pixel intensity variance to get the covariance of S.
    """
    w = np.asarray(w, dtype=np.float64)
    v = np.ones(w.shape[0]) if weights is None else np.asarray(weights, dtype=np.float64)
    return np.linalg.inv((w.T * v) @ w)


def intensity_at(s, angle_deg, *, diattenuation=1.0, transmittance=1.0):
    """Intensity transmitted by a linear analyzer at ``angle_deg`` (Malus's law in Stokes form).

    Parameters
    ----------
    s : array_like, shape (3, ...)
        Stokes components.
    angle_deg : float or array_like
        Analyzer transmission axis, degrees.

    Returns
    -------
    ndarray
        ``t/2 (S0 + D (S1 cos 2theta + S2 sin 2theta))``.
    """
    th = np.deg2rad(np.asarray(angle_deg, dtype=np.float64))
    c, sn = np.cos(2 * th), np.sin(2 * th)
    s = np.asarray(s)
    return 0.5 * transmittance * (s[0] + diattenuation * (s[1] * c + s[2] * sn))
