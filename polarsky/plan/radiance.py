"""Sky radiance models that weigh the sky's pixels when a plan chooses the filter angle.

The recommended angle minimizes the sky part's summed light; a brighter part of the sky
weighs more.  ``uniform`` weighs every sky pixel alike; ``cie-clear`` is the CIE standard
clear sky (sky type 12), brighter toward the sun and the horizon.  The radiance changes only
the weighting, never a pixel's darkening.

References
----------
.. [1] CIE S 011/E:2003 (ISO 15469:2004), *Spatial distribution of daylight - CIE standard
   general sky* (gradation and indicatrix functions; the type-12 parameters are from memory).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np

__all__ = ["RadianceModel", "radiance_uniform", "radiance_cie_clear_sky", "UNIFORM", "CIE_CLEAR_SKY"]


def radiance_uniform(zenith_deg, scattering_deg, sun_zenith_deg):
    """Uniform relative radiance: 1 everywhere.

    >>> radiance_uniform([10.0, 80.0], [30.0, 100.0], 40.0).tolist()
    [1.0, 1.0]
    """
    return np.ones(np.broadcast(np.asarray(zenith_deg), np.asarray(scattering_deg)).shape)


def radiance_cie_clear_sky(zenith_deg, scattering_deg, sun_zenith_deg, *, a=-1.0, b=-0.32, c=10.0, d=-3.0, e=0.45):
    """Relative sky luminance ``L / L_zenith`` of the CIE standard general sky.

    ``L/Lz = f(chi) phi(Z) / (f(Zs) phi(0))`` with gradation ``phi(Z) = 1 + a exp(b / cos Z)``
    (``phi = 1`` at the horizon) and indicatrix ``f(chi) = 1 + c (exp(d chi) - exp(d pi/2))
    + e cos^2 chi``, ``chi`` the angle from the sun; the defaults are sky type 12.

    Parameters
    ----------
    zenith_deg, scattering_deg : array_like
        Zenith angle of the sky point and its angular distance from the sun, degrees.
    sun_zenith_deg : float
        Zenith angle of the sun, degrees.

    References
    ----------
    .. [1] CIE S 011/E:2003 (ISO 15469:2004); type 12 parameters (from memory).

    Examples
    --------
    >>> round(float(radiance_cie_clear_sky(0.0, 30.0, 30.0)), 12)   # the zenith itself
    1.0
    """
    z = np.deg2rad(np.asarray(zenith_deg, dtype=np.float64))
    chi = np.deg2rad(np.asarray(scattering_deg, dtype=np.float64))
    zs = np.deg2rad(float(sun_zenith_deg))

    def phi(zz):
        cz = np.cos(zz)
        with np.errstate(divide="ignore", over="ignore"):
            return np.where(cz > 1e-6, 1.0 + a * np.exp(b / np.maximum(cz, 1e-6)), 1.0)

    def f(x):
        return 1.0 + c * (np.exp(d * x) - np.exp(d * np.pi / 2)) + e * np.cos(x) ** 2

    return f(chi) * phi(z) / (f(zs) * phi(0.0))


@dataclass(frozen=True)
class RadianceModel:
    """A sky radiance model: its name, what it is in words, and ``radiance(zenith_deg,
    scattering_deg, sun_zenith_deg)`` (relative radiance, any scale)."""

    name: str
    text: str
    radiance: Callable


UNIFORM = RadianceModel("uniform", "uniform sky radiance (every sky pixel weighs the same)", radiance_uniform)
CIE_CLEAR_SKY = RadianceModel("cie-clear", "CIE standard clear sky, type 12 (CIE S 011/E:2003): brighter toward the "
                              "sun and the horizon", radiance_cie_clear_sky)
