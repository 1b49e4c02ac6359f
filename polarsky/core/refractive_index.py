"""Refractive indices of water, ice, air and a crown glass, each from its published source.

* water: the IAPWS R9-97 formulation (:func:`refractive_index_water_iapws1997`), relative
  to vacuum;
* ice: the real index tabulated by Warren & Brandt (2008)
  (:func:`refractive_index_ice_warren2008`), relative to vacuum;
* air: the standard-air dispersion formula of Peck & Reeder (1972)
  (:func:`refractive_index_air_peck1972`);
* glass: the borosilicate crown of six-digit glass code 517642 (n_d = 1.517, V_d = 64.2)
  from its Sellmeier dispersion formula (:func:`refractive_index_crown_glass_sellmeier`),
  relative to air as glass catalogues give it.

The reflecting surfaces of glare planning (``--surface``) are :data:`WATER`, :data:`GLASS`
and :data:`ICE`: indices relative to the air the light comes from, at a stated wavelength
and temperature (registered by name in :data:`polarsky.registries.SURFACES`).

References
----------
.. [1] IAPWS, "Release on the Refractive Index of Ordinary Water Substance as a Function of
   Wavelength, Temperature and Pressure" (R9-97, Erlangen 1997), http://www.iapws.org.
.. [2] S. G. Warren, R. E. Brandt, "Optical constants of ice from the ultraviolet to the
   microwave: a revised compilation", J. Geophys. Res. 113, D14220 (2008),
   doi:10.1029/2007JD009744.
.. [3] E. R. Peck, K. Reeder, "Dispersion of air", J. Opt. Soc. Am. 62(8), 958-962 (1972),
   doi:10.1364/JOSA.62.000958, as used by Bodhaine et al., J. Atmos. Oceanic Technol. 16,
   1854 (1999), eq. 4.
.. [4] W. Sellmeier, Ann. Phys. Chem. 219, 272 (1871) (the dispersion formula); the
   coefficients of the 517642 borosilicate crown are those of the optical-glass catalogues
   (from memory; the tests check them against the glass code's n_d and V_d).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import InputError

__all__ = ["refractive_index_water_iapws1997", "refractive_index_ice_warren2008", "refractive_index_air_peck1972",
           "refractive_index_crown_glass_sellmeier", "ICE_INDEX_WARREN2008", "N_AIR", "WATER_DENSITY_20C_KG_M3",
           "SurfaceIndex", "WATER", "GLASS", "ICE"]

#: Refractive index of standard air at 550 nm, (n - 1) = 2.7783e-4 (Peck & Reeder 1972 as given by
#: Bodhaine et al. 1999, eq. 4): the air the sky's halos and rainbows are seen through.
N_AIR = 1.00027783

#: Density of liquid water at 20 deg C and 0.101325 MPa, kg m^-3 (IAPWS-95; from memory: its
#: effect on the index is below 1e-6 per 0.01 kg m^-3).
WATER_DENSITY_20C_KG_M3 = 998.2067

# IAPWS R9-97 coefficients (Table 1 of the release)
_IAPWS_A = (0.244257733, 9.74634476e-3, -3.73234996e-3, 2.68678472e-4, 1.58920570e-3, 2.45934259e-3,
            0.900704920, -1.66626219e-2)
_IAPWS_LUV, _IAPWS_LIR = 0.2292020, 5.432937
_IAPWS_RANGES = (("wavelength", 0.2, 1.1, "um"), ("temperature", 261.15, 773.15, "K"),
                 ("density", 0.0, 1060.0, "kg/m3"))


def _scalar_or_array(n):
    return float(n) if np.ndim(n) == 0 else n


def refractive_index_water_iapws1997(wavelength_um, temperature_k=293.15, density_kg_m3=WATER_DENSITY_20C_KG_M3):
    """Refractive index of water (relative to vacuum) by the IAPWS R9-97 formulation.

    .. math:: \\frac{n^2-1}{n^2+2}\\frac{1}{\\bar\\rho} = a_0 + a_1\\bar\\rho + a_2\\bar T
       + a_3\\bar\\lambda^2\\bar T + \\frac{a_4}{\\bar\\lambda^2}
       + \\frac{a_5}{\\bar\\lambda^2-\\bar\\lambda_{UV}^2}
       + \\frac{a_6}{\\bar\\lambda^2-\\bar\\lambda_{IR}^2} + a_7\\bar\\rho^2

    with ``rho_bar = rho / 1000 kg m^-3``, ``T_bar = T / 273.15 K``, ``lambda_bar = lambda /
    0.589 um``.

    Parameters
    ----------
    wavelength_um : float or array_like
        Vacuum wavelength, micrometres, in [0.2, 1.1].
    temperature_k : float or array_like
        Temperature, kelvin, in [261.15, 773.15] (default 20 deg C).
    density_kg_m3 : float or array_like
        Density, kg m^-3, in (0, 1060] (default: liquid water at 20 deg C and 0.1 MPa).

    Returns
    -------
    float or ndarray
        n relative to vacuum.

    Raises
    ------
    InputError
        A value outside the formulation's range of validity.

    References
    ----------
    .. [1] IAPWS R9-97 (1997), eq. 7 and Table 1.

    Examples
    --------
    >>> round(float(refractive_index_water_iapws1997(0.5893, 298.15, 997.047435)), 8)   # IAPWS check value
    1.33285819
    """
    lam = np.asarray(wavelength_um, dtype=np.float64)
    t = np.asarray(temperature_k, dtype=np.float64)
    rho = np.asarray(density_kg_m3, dtype=np.float64)
    for (name, lo, hi, unit), v in zip(_IAPWS_RANGES, (lam, t, rho)):
        if np.any(~((v >= lo) & (v <= hi))) or (name == "density" and np.any(v <= 0)):
            raise InputError(f"water {name} {v.tolist()} {unit} lies outside the IAPWS R9-97 range "
                             f"[{lo:g}, {hi:g}] {unit}")
    rb, tb, l2 = rho / 1000.0, t / 273.15, (lam / 0.589) ** 2
    a = _IAPWS_A
    rhs = (a[0] + a[1] * rb + a[2] * tb + a[3] * l2 * tb + a[4] / l2 + a[5] / (l2 - _IAPWS_LUV ** 2)
           + a[6] / (l2 - _IAPWS_LIR ** 2) + a[7] * rb * rb)
    big_a = rb * rhs
    return _scalar_or_array(np.sqrt((1 + 2 * big_a) / (1 - big_a)))


#: Real refractive index of ice Ih, Warren & Brandt (2008) compilation (wavelength nm -> n,
#: relative to vacuum).
ICE_INDEX_WARREN2008 = {400: 1.3194, 450: 1.3157, 500: 1.3130, 550: 1.3110,
                        590: 1.3097, 600: 1.3094, 650: 1.3080, 700: 1.3069}


def refractive_index_ice_warren2008(wavelength_nm):
    """Real refractive index of ice, interpolated in the Warren & Brandt (2008) table (400-700 nm).

    References
    ----------
    .. [1] Warren & Brandt (2008), J. Geophys. Res. 113, D14220.

    Examples
    --------
    >>> refractive_index_ice_warren2008(590)
    1.3097
    """
    keys = np.array(sorted(ICE_INDEX_WARREN2008))
    vals = np.array([ICE_INDEX_WARREN2008[k] for k in keys])
    return _scalar_or_array(np.interp(np.asarray(wavelength_nm, dtype=np.float64), keys, vals))


def refractive_index_air_peck1972(wavelength_um):
    """Refractive index of standard dry air (15 deg C, 101325 Pa, 300 ppm CO2).

    ``(n - 1) 1e8 = 8060.51 + 2480990 / (132.274 - s^2) + 17455.7 / (39.32957 - s^2)`` with
    ``s = 1 / lambda`` in um^-1.

    References
    ----------
    .. [1] Peck & Reeder (1972); Bodhaine et al. (1999), eq. 4.

    Examples
    --------
    >>> round(float(refractive_index_air_peck1972(0.55)) - 1, 9)
    0.000277823
    >>> abs(refractive_index_air_peck1972(0.55) - N_AIR) < 1e-8
    True
    """
    s2 = 1.0 / np.asarray(wavelength_um, dtype=np.float64) ** 2
    return _scalar_or_array(1.0 + 1e-8 * (8060.51 + 2480990.0 / (132.274 - s2) + 17455.7 / (39.32957 - s2)))


# Sellmeier coefficients of the 517642 borosilicate crown (B dimensionless, C in um^2)
_CROWN_B = (1.03961212, 0.231792344, 1.01046945)
_CROWN_C = (0.00600069867, 0.0200179144, 103.560653)


def refractive_index_crown_glass_sellmeier(wavelength_um):
    """Index (relative to air) of the 517642 borosilicate crown glass, Sellmeier formula.

    ``n^2 = 1 + sum_i B_i lambda^2 / (lambda^2 - C_i)``, lambda in um, valid 0.3-2.5 um.

    References
    ----------
    .. [1] Sellmeier (1871); coefficients from optical-glass catalogues (from memory).

    Examples
    --------
    >>> round(float(refractive_index_crown_glass_sellmeier(0.5875618)), 4)   # n_d of glass code 517642
    1.5168
    """
    l2 = np.asarray(wavelength_um, dtype=np.float64) ** 2
    return _scalar_or_array(np.sqrt(1.0 + sum(b * l2 / (l2 - c) for b, c in zip(_CROWN_B, _CROWN_C))))


@dataclass(frozen=True)
class SurfaceIndex:
    """A reflecting medium's refractive index relative to air, with its conditions and source."""

    name: str
    index: float
    wavelength_nm: float
    temperature_c: float
    description: str
    source: str


_NA_589 = refractive_index_air_peck1972(0.5893)

#: Liquid water at 20 deg C, 589.3 nm (IAPWS R9-97 over standard air).
WATER = SurfaceIndex("water", refractive_index_water_iapws1997(0.5893) / _NA_589, 589.3, 20.0,
                     "liquid water at 20 deg C and 0.101325 MPa",
                     "IAPWS R9-97 (1997), divided by standard air (Peck & Reeder 1972)")
#: Borosilicate crown 517642 at 589.3 nm (catalogue indices are relative to air already).
GLASS = SurfaceIndex("glass", refractive_index_crown_glass_sellmeier(0.5893), 589.3, 20.0,
                     "borosilicate crown glass 517642 (soda-lime window glass is close, about 1.52)",
                     "Sellmeier formula with optical-catalogue coefficients of glass code 517642")
#: Ice Ih at 590 nm (Warren & Brandt 2008 over standard air).
ICE = SurfaceIndex("ice", refractive_index_ice_warren2008(590.0) / refractive_index_air_peck1972(0.590), 590.0, -7.0,
                   "ice Ih (ordinary ray; its birefringence is about 0.001)",
                   "Warren & Brandt (2008), J. Geophys. Res. 113 D14220, divided by standard air")
