"""Uncertainties of DoLP and AoLP, and the bias-corrected DoLP.

First-order propagation of the intensity noise through the least-squares Stokes estimate
(:mod:`polarsky.core.stokes`), and the modified asymptotic (MAS) estimator that removes the
upward bias noise gives DoLP.

References
----------
.. [1] K. Serkowski, "Polarization of starlight", Adv. Astron. Astrophys. 1, 289-369 (1962)
   (the high signal-to-noise uncertainty of the polarization angle).
.. [2] S. Plaszczynski, L. Montier, F. Levrier, M. Tristram, "A novel estimator of the
   polarization amplitude from normally distributed Stokes parameters", MNRAS 439,
   4048-4056 (2014), doi:10.1093/mnras/stu270 (the MAS estimator).
"""

from __future__ import annotations

import numpy as np

__all__ = ["sigma_dolp_aolp", "dolp_debiased_plaszczynski2014"]


def sigma_dolp_aolp(s, variance, cov):
    """First-order uncertainties of DoLP and AoLP.

    Parameters
    ----------
    s : ndarray, shape (3, ...)
        Stokes components.
    variance : ndarray or float
        Per-pixel intensity noise variance (same units as the frames, squared).
    cov : ndarray, shape (3, 3)
        Unit covariance from :func:`stokes_covariance`.

    Returns
    -------
    sigma_dolp : ndarray
        Standard uncertainty of DoLP.
    sigma_aolp_deg : ndarray
        Standard uncertainty of AoLP in degrees (capped at the uniform-distribution value
        180/sqrt(12) = 51.96 deg, reached when the signal is pure noise).
    sigma_rice : ndarray
        Noise of the normalized Stokes components ``S1/S0, S2/S0`` (the sigma of the
        Rice distribution, for debiasing).

    Notes
    -----
    Linear error propagation of ``p = sqrt(S1^2+S2^2)/S0`` and ``psi = atan2(S2,S1)/2``.
    For 0/45/90/135 and equal noise sigma this gives sigma_psi = sigma/(sqrt(2) p S0)
    (Serkowski 1962; see the project's validation tests).
    """
    s0, s1, s2 = s[0], s[1], s[2]
    dt = s0.dtype
    c = np.asarray(cov, dtype=dt)
    var = np.asarray(variance, dtype=dt)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        l2 = s1 * s1 + s2 * s2
        lin = np.sqrt(l2)
        inv_s0 = 1 / s0
        p = lin * inv_s0
        # gradient of p: (-p/S0, S1/(L S0), S2/(L S0))
        g0 = -p * inv_s0
        g1 = s1 / lin * inv_s0
        g2 = s2 / lin * inv_s0
        var_p = (
            c[0, 0] * g0 * g0 + c[1, 1] * g1 * g1 + c[2, 2] * g2 * g2
            + 2 * (c[0, 1] * g0 * g1 + c[0, 2] * g0 * g2 + c[1, 2] * g1 * g2)
        )
        sigma_p = np.sqrt(var_p * var)
        # gradient of psi: (0, -S2/(2 L^2), S1/(2 L^2))
        h1 = -s2 / (2 * l2)
        h2 = s1 / (2 * l2)
        var_psi = c[1, 1] * h1 * h1 + c[2, 2] * h2 * h2 + 2 * c[1, 2] * h1 * h2
        sigma_psi = np.degrees(np.sqrt(var_psi * var))
        cap = np.asarray(180.0 / np.sqrt(12.0), dtype=dt)
        sigma_psi = np.minimum(np.nan_to_num(sigma_psi, nan=cap, posinf=cap), cap)
        sigma_rice = np.sqrt(0.5 * (c[1, 1] + c[2, 2]) * var) * inv_s0
    return sigma_p.astype(dt, copy=False), sigma_psi.astype(dt, copy=False), sigma_rice.astype(dt, copy=False)


def dolp_debiased_plaszczynski2014(dolp, sigma):
    """Modified asymptotic (MAS) estimator of the degree of polarization.

    Parameters
    ----------
    dolp : ndarray
        Measured (biased) DoLP, ``p_hat``.
    sigma : ndarray or float
        Noise of the normalized Stokes components (``sigma_rice`` from
        :func:`sigma_dolp_aolp`).

    Returns
    -------
    ndarray
        ``p_hat - sigma^2 (1 - exp(-p_hat^2 / sigma^2)) / (2 p_hat)``: always >= 0,
        continuous, and unbiased once ``p0 / sigma > 2``.

    References
    ----------
    .. [1] S. Plaszczynski, L. Montier, F. Levrier, M. Tristram, "A novel estimator of the
       polarization amplitude from normally distributed Stokes parameters", MNRAS 439,
       4048-4056 (2014), doi:10.1093/mnras/stu270, arXiv:1312.0437.
    """
    p = np.asarray(dolp)
    dt = p.dtype if p.dtype.kind == "f" else np.float64
    s2 = np.asarray(sigma, dtype=dt) ** 2
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        corr = s2 * (-np.expm1(-(p * p) / s2)) / (2 * p)
        out = p - corr
    out = np.where(p == 0, 0, out)
    return np.where(s2 == 0, p, out).astype(dt, copy=False)
