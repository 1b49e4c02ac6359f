"""Where the sun is: time and place from settings or EXIF, position from NREL SPA (pvlib).

References
----------
.. [1] I. Reda, A. Andreas, "Solar position algorithm for solar radiation applications",
   Solar Energy 76(5), 577-589 (2004), doi:10.1016/j.solener.2003.12.003; NREL report
   TP-560-34302 (rev. 2008).
.. [2] W. F. Holmgren, C. W. Hansen, M. A. Mikofski, "pvlib python: a python package for
   modeling solar energy systems", J. Open Source Softw. 3(29), 884 (2018),
   doi:10.21105/joss.00884 (the SPA implementation used, ``method='nrel_numpy'``).
.. [3] CIPA DC-008 / JEITA CP-3451, *Exif* 2.3x (DateTimeOriginal, OffsetTimeOriginal,
   GPS tags).
"""

from __future__ import annotations

import datetime as _dt
import re

import numpy as np

from ..errors import InputError

__all__ = ["sun_position", "resolve_time_place"]

_ISO_OFFSET = re.compile(r"(Z|[+-]\d{2}(:?\d{2})?)$")


def sun_position(when: _dt.datetime, latitude_deg: float, longitude_deg: float, *, altitude_m: float = 0.0,
                 pressure_hpa: float | None = None, temperature_c: float = 12.0,
                 delta_t_s: float | None = None) -> dict:
    """Topocentric sun position by the NREL SPA (via pvlib), refraction included.

    Parameters
    ----------
    when : datetime
        Time-zone aware instant.
    latitude_deg, longitude_deg : float
        Observer, degrees north and east (west negative).
    altitude_m : float
        Observer height above sea level, metres.
    pressure_hpa : float, optional
        Air pressure for refraction; default from ``altitude_m`` by the standard atmosphere.
    temperature_c : float
        Air temperature for refraction, deg C.
    delta_t_s : float, optional
        TT - UT1 in seconds; default pvlib's estimate for the date.

    Returns
    -------
    dict
        ``azimuth_deg`` (from north, clockwise), ``elevation_deg`` (apparent, refracted),
        ``zenith_deg`` (apparent), ``elevation_geometric_deg``, ``pressure_hpa``,
        ``temperature_c``.

    References
    ----------
    .. [1] Reda & Andreas (2004), Solar Energy 76(5), 577-589.
    """
    import pandas as pd
    from pvlib import atmosphere, solarposition

    if when.tzinfo is None:
        raise InputError("the observation time has no UTC offset")
    if not (-90 <= latitude_deg <= 90):
        raise InputError(f"--lat {latitude_deg:g} must lie in [-90, 90] degrees")
    if not (-180 <= longitude_deg <= 360):
        raise InputError(f"--lon {longitude_deg:g} must lie in [-180, 180] degrees (east positive)")
    p_pa = atmosphere.alt2pres(altitude_m) if pressure_hpa is None else float(pressure_hpa) * 100.0
    if not p_pa > 0:
        raise InputError(f"--pressure-hpa {pressure_hpa} must be positive")
    t = pd.DatetimeIndex([pd.Timestamp(when)])
    kw = {} if delta_t_s is None else {"delta_t": float(delta_t_s)}
    sp = solarposition.get_solarposition(t, latitude_deg, longitude_deg, altitude=altitude_m,
                                         pressure=p_pa, method="nrel_numpy", temperature=temperature_c, **kw)
    row = sp.iloc[0]
    return {
        "azimuth_deg": float(row["azimuth"]),
        "elevation_deg": float(row["apparent_elevation"]),
        "zenith_deg": float(row["apparent_zenith"]),
        "elevation_geometric_deg": float(row["elevation"]),
        "pressure_hpa": float(p_pa) / 100.0,
        "temperature_c": float(temperature_c),
    }


def resolve_time_place(*, when=None, lat=None, lon=None, altitude_m=None, exif: dict | None = None) -> dict:
    """Merge command-line time/place with EXIF; options win.  Say where each came from.

    Returns
    -------
    dict
        ``when`` (aware datetime), ``latitude_deg``, ``longitude_deg``, ``altitude_m`` and
        ``time_source`` / ``place_source`` (``"option"`` or ``"exif"``).

    Raises
    ------
    InputError
        No time or no place from either source.
    """
    exif = exif or {}
    out: dict = {}
    if when is not None:
        from ..options.syntax import parse_when

        out["when"] = parse_when(when)
        out["time_source"] = "option"
    elif "when" in exif:
        out["when"], out["time_source"] = exif["when"], "exif"
    else:
        extra = (f" (EXIF DateTimeOriginal {exif['when_naive']} has no OffsetTimeOriginal, so it is not used)"
                 if "when_naive" in exif else "")
        raise InputError("the observation time is unknown: give --when with a UTC offset, e.g. "
                         f"--when 2024-06-21T14:05:00+02:00{extra}")
    if (lat is None) != (lon is None):
        raise InputError("give both --lat and --lon (degrees, north and east positive)")
    if lat is not None:
        out["latitude_deg"], out["longitude_deg"], out["place_source"] = float(lat), float(lon), "option"
    elif "latitude_deg" in exif:
        out["latitude_deg"], out["longitude_deg"], out["place_source"] = exif["latitude_deg"], exif["longitude_deg"], "exif"
    else:
        raise InputError("the observation place is unknown: give --lat and --lon (degrees, north and east positive)")
    if altitude_m is not None:
        out["altitude_m"] = float(altitude_m)
    elif "altitude_m" in exif and out["place_source"] == "exif":
        out["altitude_m"] = float(exif["altitude_m"])
    else:
        out["altitude_m"] = 0.0
    if not np.isfinite(out["altitude_m"]):
        raise InputError(f"--altitude-m {altitude_m} is not a number")
    return out
