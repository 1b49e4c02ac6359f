"""Sky features that break single scattering: halos, rainbows, sun disk and aureole.

The ring radii are computed from refractive indices, never hard-coded:

* halos: minimum deviation of a prism, ``D = 2 arcsin(n sin(A/2)) - A``, for the 60-degree
  (alternate side faces) and 90-degree (side + basal face) wedges of hexagonal ice;
  ice index from the Warren & Brandt (2008) compilation (:mod:`polarsky.core.refractive_index`);
* rainbows: the Descartes (minimum deviation) ray with ``k`` internal reflections,
  ``cos^2 i = (n^2 - 1) / (k (k + 2))``, ``D_k = 2 (i - r) + k (180 - 2 r)``; the bow's
  radius about the antisolar point is ``180 - D_1`` (primary) and ``D_2 - 180``
  (secondary); water index from the IAPWS (1997) formulation (the same module).

References
----------
.. [1] IAPWS, "Release on the refractive index of ordinary water substance as a function
   of wavelength, temperature and pressure" (R9-97, 1997), http://www.iapws.org/relguide/rindex.pdf.
.. [2] S. G. Warren, R. E. Brandt, "Optical constants of ice from the ultraviolet to the
   microwave: a revised compilation", J. Geophys. Res. 113, D14220 (2008),
   doi:10.1029/2007JD009744.
.. [3] J. B. Tatum, *Geometric Optics*, sec. 1.6 "Refraction by a prism" (LibreTexts)
   (minimum deviation of a prism).
.. [4] H. M. Nussenzveig, "The theory of the rainbow", Sci. Am. 236(4), 116-127 (1977)
   (Descartes rays with k internal reflections).
"""

from __future__ import annotations

import numpy as np

from ..core.refractive_index import N_AIR, refractive_index_ice_warren2008, refractive_index_water_iapws1997

__all__ = [
    "prism_minimum_deviation_deg",
    "descartes_ray",
    "rainbow_radius_deg",
    "halo_radius_deg",
    "feature_bands",
]


def prism_minimum_deviation_deg(n, apex_deg):
    """Minimum deviation ``2 arcsin(n sin(A/2)) - A`` (degrees) of a prism of apex ``A``.

    Returns NaN when no ray passes (``n sin(A/2) > 1``).

    References
    ----------
    .. [1] Tatum, *Geometric Optics*, sec. 1.6.
    """
    n = np.asarray(n, dtype=np.float64)
    half = np.deg2rad(apex_deg) / 2
    arg = n * np.sin(half)
    with np.errstate(invalid="ignore"):
        d = np.rad2deg(2 * np.arcsin(np.where(arg <= 1, arg, np.nan))) - apex_deg
    return float(d) if d.ndim == 0 else d


def descartes_ray(n, k: int):
    """Descartes (minimum-deviation) ray after ``k`` internal reflections in a sphere.

    Returns
    -------
    deviation_deg, incidence_deg, refraction_deg : float or ndarray

    References
    ----------
    .. [1] Nussenzveig (1977); cos^2 i = (n^2 - 1) / (k (k + 2)).
    """
    n = np.asarray(n, dtype=np.float64)
    i = np.arccos(np.sqrt((n * n - 1) / (k * (k + 2))))
    r = np.arcsin(np.sin(i) / n)
    dev = np.rad2deg(2 * (i - r) + k * (np.pi - 2 * r))
    conv = (lambda x: float(x)) if n.ndim == 0 else (lambda x: x)
    return conv(dev), conv(np.rad2deg(i)), conv(np.rad2deg(r))


def rainbow_radius_deg(n, k: int):
    """Angular radius of the k-th order bow about the antisolar point (k = 1 or 2)."""
    dev = descartes_ray(n, k)[0]
    return 180.0 - dev if k == 1 else dev - 180.0


def halo_radius_deg(n, apex_deg):
    """Angular radius of a halo about the sun (the prism's minimum deviation)."""
    return prism_minimum_deviation_deg(n, apex_deg)


def feature_bands(*, sun_radius_deg: float = 10.0, margin_deg: float = 1.0,
                  wavelengths_nm=(400.0, 700.0), water_temperature_k: float = 283.15) -> list[dict]:
    """Angular bands to mask: sun disk + aureole, the 22/46 halos, primary/secondary bows.

    Each band is ``{"name", "kind": "sun"|"halo"|"rainbow", "about": "sun"|"antisun",
    "inner_deg", "outer_deg", "radius_deg"}`` where the angles are distances from the sun (or antisolar point).
    The band spans the ring radius over ``wavelengths_nm`` plus ``margin_deg`` each side
    (halos extend further outward, so their outer margin is doubled).
    """
    lo, hi = float(min(wavelengths_nm)), float(max(wavelengths_nm))
    # indices relative to the surrounding air (both sources give them relative to vacuum)
    n_ice = refractive_index_ice_warren2008(np.array([lo, hi])) / N_AIR
    n_w = refractive_index_water_iapws1997(np.array([lo, hi]) / 1000.0, water_temperature_k, 999.7) / N_AIR
    n_ice_mid = refractive_index_ice_warren2008(550.0) / N_AIR
    n_w_mid = refractive_index_water_iapws1997(0.55, water_temperature_k, 999.7) / N_AIR
    bands = [{"name": "sun and aureole", "kind": "sun", "about": "sun", "inner_deg": 0.0, "outer_deg": float(sun_radius_deg),
              "radius_deg": 0.0}]
    for apex, label in ((60.0, "22-degree halo"), (90.0, "46-degree halo")):
        r = halo_radius_deg(n_ice, apex)
        bands.append({"name": label, "kind": "halo", "about": "sun", "inner_deg": float(np.min(r)) - margin_deg,
                      "outer_deg": float(np.max(r)) + 2 * margin_deg,
                      "radius_deg": float(halo_radius_deg(n_ice_mid, apex))})
    for k, label in ((1, "primary rainbow"), (2, "secondary rainbow")):
        r = rainbow_radius_deg(n_w, k)
        bands.append({"name": label, "kind": "rainbow", "about": "antisun", "inner_deg": float(np.min(r)) - margin_deg,
                      "outer_deg": float(np.max(r)) + margin_deg,
                      "radius_deg": float(rainbow_radius_deg(n_w_mid, k))})
    return bands
