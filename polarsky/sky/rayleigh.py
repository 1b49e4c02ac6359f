"""Single-scattering Rayleigh sky: degree and E-vector of skylight polarization.

For light scattered once by air molecules at scattering angle ``gamma`` from the sun,

.. math:: P(\\gamma) = d_{max} \\frac{\\sin^2\\gamma}{1 + \\cos^2\\gamma}

largest 90 degrees from the sun and zero toward the sun and the antisolar point, with the
E-vector perpendicular to the scattering plane (sun, observer, sky point):
``E ~ s x v``.  For pure air the molecular anisotropy (depolarization ratio ``rho``)
bounds the maximum at ``(1 - rho) / (1 + rho)``.

References
----------
.. [1] S. Chandrasekhar, *Radiative Transfer*, Oxford (1950), ch. I (Rayleigh phase
   matrix, anisotropic molecules).
.. [2] A. T. Young, "Revised depolarization corrections for atmospheric extinction",
   Appl. Opt. 19(20), 3427-3428 (1980), doi:10.1364/AO.19.003427 (rho = 0.0279 for air).
.. [3] K. L. Coulson, *Polarization and Intensity of Light in the Atmosphere*,
   A. Deepak (1988) (the clear-sky pattern and its departures).
"""

from __future__ import annotations

import numpy as np

__all__ = ["RHO_AIR_YOUNG1980", "dolp_max_bound", "rayleigh_dolp", "rayleigh_dolp_depolarized",
           "rayleigh_evector"]

#: Depolarization ratio of air, Young (1980).
RHO_AIR_YOUNG1980 = 0.0279


def dolp_max_bound(rho: float = RHO_AIR_YOUNG1980) -> float:
    """Largest single-scattering DoLP of air, ``(1 - rho) / (1 + rho)`` (at 90 degrees).

    References
    ----------
    .. [1] Young (1980); Chandrasekhar (1950).

    Examples
    --------
    >>> round(dolp_max_bound(0.0279), 5)
    0.94571
    """
    return (1.0 - rho) / (1.0 + rho)


def rayleigh_dolp(cos_gamma, dmax=1.0):
    """``dmax sin^2(gamma) / (1 + cos^2(gamma))`` from ``cos(gamma)`` (dtype kept)."""
    c = np.asarray(cos_gamma)
    c2 = c * c
    one = np.asarray(1.0, dtype=c2.dtype)
    return np.asarray(dmax, dtype=c2.dtype) * (one - c2) / (one + c2)


def rayleigh_dolp_depolarized(cos_gamma, rho=RHO_AIR_YOUNG1980):
    """Single scattering by anisotropic molecules: ``sin^2 / (1 + cos^2 + 2 rho/(1 - rho))``.

    References
    ----------
    .. [1] Chandrasekhar (1950); Young (1980).
    """
    c = np.asarray(cos_gamma, dtype=np.float64)
    return (1 - c * c) / (1 + c * c + 2 * rho / (1 - rho))


def rayleigh_evector(sun, view, *, need_z=True):
    """E-vector direction ``s x v`` (not normalized) for sun ``s`` (3,) and views ``v``.

    ``v`` is a (3, ...) array or a tuple of three broadcastable arrays; the result is a
    tuple of three arrays (the third is None when ``need_z`` is False).  Any frame, any lengths; the result is perpendicular to the
    scattering plane.
    """
    v = view
    dt = np.result_type(v[0], v[1], v[2])
    s0, s1, s2 = (dt.type(x) for x in np.asarray(sun))
    ez = s0 * v[1] - s1 * v[0] if need_z else None
    return (s1 * v[2] - s2 * v[1], s2 * v[0] - s0 * v[2], ez)
