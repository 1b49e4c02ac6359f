"""Glare from a smooth surface: how much a filter removes, and where to stand to remove most.

Light reflected by a smooth dielectric (water, glass) is partly polarized with its excess
E-vector perpendicular to the plane of incidence (Fresnel): an analyzer whose transmission
axis lies *in* the plane of incidence passes the least of it.  With reflectances ``Rs`` and
``Rp`` the reflection's DoLP is ``P = (Rs - Rp) / (Rs + Rp)``; at that axis a filter of
diattenuation ``D`` passes ``1/2 (1 - D P)`` of the reflection where a filter at a random
angle passes ``1/2``, so it removes ``-log2(1 - D P)`` stops (the reference of
``polarsky advise``).  At Brewster's angle ``arctan(n)`` the reflection is fully
s-polarized (``Rp = 0``): an ideal filter removes it completely, a real one by
``log2((ER + 1) / 2)`` stops.

References
----------
.. [1] E. Hecht, *Optics*, 5th ed., Pearson (2017), section 4.6 (Fresnel equations),
   section 8.6 (polarization by reflection, Brewster's angle).
.. [2] IUPAC Gold Book, "Brewster angle", doi:10.1351/goldbook.BT07336.
.. [3] E. Collett, *Field Guide to Polarization*, SPIE (2005), p. 12 (Malus's law).
"""

from __future__ import annotations

import numpy as np

from ..core.fresnel import brewster_angle_deg, fresnel_reflectance, incidence_from_dolp

__all__ = ["glare_plan", "glare_sweep", "stops_removed", "GLARE_ANGLE_NOTE", "GLARE_NUMBER_KEYS", "SWEEP_ROW_KEYS"]

GLARE_ANGLE_NOTE = ("best_angle_deg is the filter's transmission axis in the image for a level surface and a camera "
                    "rolled by roll_deg (0 = level): the axis lies in the plane of incidence, the plane that holds your "
                    "line of sight and the surface normal; for a tilted surface turn it with that plane")

#: Keys of :func:`glare_plan`.
GLARE_NUMBER_KEYS = ("index", "incidence_deg", "roll_deg", "extinction_ratio", "rs", "rp", "reflectance",
                     "reflection_dolp", "best_angle_deg", "reduction_stops", "reduction_stops_ideal",
                     "reflection_passed_fraction", "brewster_deg", "brewster_reduction_stops",
                     "brewster_reduction_stops_ideal", "tilt_to_brewster_deg", "incidence_range_90pct_polarized_deg",
                     "behind_fraction", "behind_fraction_filtered", "contrast_gain", "contrast_gain_ideal", "notes")
#: Keys of each row of :func:`glare_sweep`.
SWEEP_ROW_KEYS = ("incidence_deg", "rs", "rp", "reflection_dolp", "reduction_stops", "reduction_stops_ideal")


def stops_removed(dolp, diattenuation=1.0):
    """``-log2(1 - D P)``: stops removed at the best angle relative to a filter at a random angle.

    ``inf`` where the filter removes everything (``D P = 1``, to 1e-12).

    Examples
    --------
    >>> round(float(stops_removed(0.5)), 6)
    1.0
    """
    left = 1.0 - np.asarray(diattenuation, dtype=np.float64) * np.asarray(dolp, dtype=np.float64)
    with np.errstate(divide="ignore"):
        out = np.where(left > 1e-12, -np.log2(np.maximum(left, 1e-300)), np.inf) + 0.0  # no -0.0
    return float(out) if out.ndim == 0 else out


def _stops(x, nd=4):
    """JSON-friendly stops: infinity (complete removal) becomes None."""
    x = float(x)
    return round(x, nd) if np.isfinite(x) else None


def _reflection(incidence_deg, index):
    rs, rp = fresnel_reflectance(incidence_deg, 1.0, float(index))
    with np.errstate(invalid="ignore", divide="ignore"):
        p = np.clip(np.where(rs + rp > 0, (rs - rp) / (rs + rp), 0.0), 0.0, 1.0)
    return rs, rp, p


def glare_plan(index: float, incidence_deg: float, *, diattenuation: float = 1.0, extinction=None,
               behind_fraction=None, roll_deg: float = 0.0) -> dict:
    """What a filter does to the reflection off a smooth surface of ``index`` at ``incidence_deg``.

    Parameters
    ----------
    index : float
        Refractive index of the reflecting medium relative to air (> 1).
    incidence_deg : float
        Angle between the line of sight and the surface normal, degrees in [0, 90].
    diattenuation, extinction : float, optional
        The filter's diattenuation and the extinction ratio it came from (None = ideal).
    behind_fraction : float, optional
        Share of the unfiltered light that comes from behind the surface (an object under
        water or behind a window), in (0, 1]; that light is taken as unpolarized.
    roll_deg : float
        Camera roll (clockwise as seen from behind): a level surface's s direction then
        lies at ``roll_deg`` in the image, and the best axis at ``90 + roll_deg``.

    Returns
    -------
    dict
        The keys of :data:`GLARE_NUMBER_KEYS` (the behind-fraction keys None without it). A
        complete removal (an ideal filter at Brewster's angle) is None in stops and said in
        ``notes``.

    References
    ----------
    .. [1] Hecht (2017), sections 4.6 and 8.6.

    Examples
    --------
    >>> r = glare_plan(1.5, 0.0)
    >>> round(r["rs"], 6), r["reflection_dolp"]
    (0.04, 0.0)
    """
    n, a, d = float(index), float(incidence_deg), float(diattenuation)
    rs, rp, p = (float(v) for v in _reflection(a, n))
    brewster = brewster_angle_deg(1.0, n)
    notes = ["at Brewster's angle an ideal filter removes the reflection completely (null in stops = complete); a real "
             "filter of extinction ratio ER reaches log2((ER + 1)/2) stops there"]
    if p < 0.1:
        notes.append(f"the reflection is only {p * 100:.0f}% polarized at {a:g} deg: a filter removes little of it; "
                     f"move so that you look at the surface closer to {brewster:.1f} deg from its normal")
    out = dict.fromkeys(GLARE_NUMBER_KEYS)
    out.update({
        "index": round(n, 6), "incidence_deg": a, "roll_deg": float(roll_deg), "extinction_ratio": extinction,
        "rs": round(rs, 6), "rp": round(rp, 6), "reflectance": round(0.5 * (rs + rp), 6),
        "reflection_dolp": round(p, 6), "best_angle_deg": round((90.0 + float(roll_deg)) % 180.0, 3),
        "reduction_stops": _stops(stops_removed(p, d)), "reduction_stops_ideal": _stops(stops_removed(p)),
        "reflection_passed_fraction": round(1.0 - d * p, 6), "brewster_deg": round(brewster, 4),
        "brewster_reduction_stops": _stops(stops_removed(1.0, d)),
        "brewster_reduction_stops_ideal": _stops(stops_removed(1.0)),
        "tilt_to_brewster_deg": round(brewster - a, 3),
        "incidence_range_90pct_polarized_deg": [round(v, 2) for v in incidence_from_dolp(0.9, n)],
        "notes": notes,
    })
    if behind_fraction is not None:
        f = float(behind_fraction)
        gain = _contrast(f, p, d)
        out.update(behind_fraction=f, behind_fraction_filtered=round(gain[0], 6), contrast_gain=round(gain[1], 5),
                   contrast_gain_ideal=round(_contrast(f, p, 1.0)[1], 5))
        notes.append("light from behind the surface is taken as unpolarized (light leaving water is slightly polarized "
                     "along the recommended axis, so the real gain is a little higher)")
    return out


def _contrast(f, p, d) -> tuple:
    """Share of the light from behind after the filter, and the gain in the object's contrast.

    Behind the surface: unpolarized, passes 1/2; the reflection passes 1/2 (1 - D P).  An
    object's detail contrast scales with the share of the light that comes from behind it.
    """
    filtered = f / (f + (1.0 - f) * (1.0 - d * p))
    return filtered, filtered / f


def glare_sweep(index: float, incidences_deg, *, diattenuation: float = 1.0) -> list:
    """Rows (keys :data:`SWEEP_ROW_KEYS`) of the reflection and the reduction per incidence."""
    a = np.atleast_1d(np.asarray(incidences_deg, dtype=np.float64))
    rs, rp, p = _reflection(a, index)
    red, red_i = stops_removed(p, diattenuation), stops_removed(p)
    return [dict(zip(SWEEP_ROW_KEYS, (round(float(x), 4), round(float(s), 6), round(float(q), 6), round(float(pp), 6),
                                      _stops(r1), _stops(r2))))
            for x, s, q, pp, r1, r2 in zip(a, rs, rp, p, np.atleast_1d(red), np.atleast_1d(red_i))]
