"""Fresnel reflection at a smooth dielectric surface (glare off water and glass).

References
----------
.. [1] E. Hecht, *Optics*, 5th ed., Pearson (2017), section 4.6 (Fresnel equations) and
   section 8.6 (polarization by reflection, Brewster's angle).
.. [2] IUPAC Gold Book, "Brewster angle", doi:10.1351/goldbook.BT07336.
"""

from __future__ import annotations

import numpy as np

__all__ = ["fresnel_reflectance", "reflected_dolp", "brewster_angle_deg", "reflection_stokes", "incidence_from_dolp"]


def fresnel_reflectance(incidence_deg, n1: float = 1.0, n2: float = 1.333):
    """Intensity reflectances ``(R_s, R_p)`` of a smooth interface from medium n1 to n2.

    Parameters
    ----------
    incidence_deg : array_like
        Angle of incidence from the surface normal, degrees, in [0, 90].
    n1, n2 : float
        Refractive indices of the incident and the second medium.

    Returns
    -------
    R_s, R_p : ndarray
        Reflectance for light polarized perpendicular (s) and parallel (p) to the plane
        of incidence.

    References
    ----------
    .. [1] E. Hecht, *Optics*, 5th ed. (2017), eqs. 4.42-4.45.
    """
    ti = np.radians(np.asarray(incidence_deg, dtype=np.float64))
    st = n1 / n2 * np.sin(ti)
    tir = st >= 1
    ct = np.sqrt(np.clip(1 - st * st, 0, None))
    ci = np.cos(ti)
    rs = (n1 * ci - n2 * ct) / (n1 * ci + n2 * ct)
    rp = (n2 * ci - n1 * ct) / (n2 * ci + n1 * ct)
    return np.where(tir, 1.0, rs * rs), np.where(tir, 1.0, rp * rp)


def reflected_dolp(incidence_deg, n1: float = 1.0, n2: float = 1.333):
    """DoLP ``(R_s - R_p) / (R_s + R_p)`` of unpolarized light after reflection.

    The excess E-vector is perpendicular to the plane of incidence (horizontal for a
    flat, level water surface).

    References
    ----------
    .. [1] E. Hecht, *Optics*, 5th ed. (2017), section 8.6.
    """
    rs, rp = fresnel_reflectance(incidence_deg, n1, n2)
    return (rs - rp) / (rs + rp)


def brewster_angle_deg(n1: float = 1.0, n2: float = 1.333) -> float:
    """Brewster's angle ``arctan(n2 / n1)`` in degrees (reflected light fully s-polarized).

    References
    ----------
    .. [1] IUPAC Gold Book, "Brewster angle".
    """
    return float(np.degrees(np.arctan2(n2, n1)))


def incidence_from_dolp(dolp: float, n2: float, n1: float = 1.0) -> tuple:
    """Both angles of incidence (degrees) whose reflection of unpolarized light has DoLP ``dolp``.

    The reflection's DoLP rises from 0 at normal incidence to 1 at Brewster's angle and falls
    back to 0 at grazing incidence, so every DoLP in (0, 1) has one solution below and one
    above Brewster's angle.

    Returns
    -------
    (low_deg, high_deg)
        Both equal to Brewster's angle for ``dolp >= 1``; ``(0, 90)`` for ``dolp <= 0``.

    References
    ----------
    .. [1] E. Hecht, *Optics*, 5th ed. (2017), section 8.6.

    Examples
    --------
    >>> lo, hi = incidence_from_dolp(float(reflected_dolp(40.0, 1.0, 1.5)), 1.5)
    >>> round(lo, 6)
    40.0
    """
    from scipy.optimize import brentq

    b = brewster_angle_deg(n1, n2)
    p = float(dolp)
    if p >= 1.0:
        return b, b
    if p <= 0.0:
        return 0.0, 90.0

    def g(x):
        return float(reflected_dolp(x, n1, n2)) - p

    return float(brentq(g, 0.0, b, xtol=1e-10)), float(brentq(g, b, 90.0, xtol=1e-10))


def reflection_stokes(s_in, incidence_deg, s_axis_deg, n1: float = 1.0, n2: float = 1.333):
    """Stokes vector of light reflected by a smooth dielectric (Mueller matrix of reflection).

    Parameters
    ----------
    s_in : array_like, shape (3, ...)
        Incident linear Stokes vector (S0, S1, S2) in the image frame.
    incidence_deg : array_like
        Angle of incidence, degrees.
    s_axis_deg : array_like
        Image angle of the s direction (perpendicular to the plane of incidence), degrees.

    Returns
    -------
    ndarray, shape (3, ...)

    Notes
    -----
    In the s/p frame the reflection Mueller matrix (linear part) is
    ``1/2 [[Rs+Rp, Rs-Rp, 0], [Rs-Rp, Rs+Rp, 0], [0, 0, 2 sqrt(Rs Rp)]]`` (Hecht 2017;
    Collett 2005, ch. 7); it is rotated to the image frame by ``2 * s_axis``.
    """
    rs, rp = fresnel_reflectance(incidence_deg, n1, n2)
    a = np.radians(np.asarray(s_axis_deg, dtype=np.float64))
    c, s = np.cos(2 * a), np.sin(2 * a)
    s0, s1, s2 = (np.asarray(v, dtype=np.float64) for v in s_in)
    # rotate into the s/p frame (s along +x'), apply, rotate back
    q = c * s1 + s * s2
    u = -s * s1 + c * s2
    m00, m01, m22 = 0.5 * (rs + rp), 0.5 * (rs - rp), np.sqrt(rs * rp)
    r0 = m00 * s0 + m01 * q
    rq = m01 * s0 + m00 * q
    ru = m22 * u
    return np.stack([r0, c * rq - s * ru, s * rq + c * ru])
