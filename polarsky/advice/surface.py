"""Glare off a smooth surface, read backwards: the angle of incidence from a region's DoLP.

Light reflected by a smooth dielectric (water, glass) is partly polarized, its DoLP rising
from 0 at normal incidence to 1 at Brewster's angle ``arctan(n)`` and falling back to 0 at
grazing incidence (Fresnel).  A region's measured DoLP therefore fits two angles of
incidence, one each side of Brewster's angle; light from below or behind the surface and a
real filter only lower the measured DoLP, so the true angle lies between the two.  With the
camera's pitch the geometry of a level surface tells which side applies.

References
----------
.. [1] E. Hecht, *Optics*, 5th ed., Pearson (2017), section 4.6 (Fresnel equations) and
   section 8.6 (polarization by reflection, Brewster's angle).
"""

from __future__ import annotations

from ..core.fresnel import brewster_angle_deg, incidence_from_dolp
from ..errors import InputError

__all__ = ["resolve_surface", "surface_estimate", "tilt_text", "SURFACE_ESTIMATE_KEYS", "MOVE_CAUTION"]

MOVE_CAUTION = ("a plan that says 'step closer' or 'lower the camera' to reach Brewster's angle does not know the edge "
                "of the quay: move only where it is safe to stand")

#: Keys of ``surface_estimate`` (advice key ``surface_estimate``), all always present.
SURFACE_ESTIMATE_KEYS = ("surface", "index", "index_source", "region_dolp", "incidence_solutions_deg", "brewster_deg",
                         "tilt_to_brewster_deg", "pitch_deg", "incidence_from_pitch_deg", "favoured_incidence_deg",
                         "tilt_to_brewster_from_pitch_deg", "notes")


def resolve_surface(surface=None, index=None) -> dict:
    """The reflecting medium: a name of :data:`polarsky.registries.SURFACES` or an index.

    Returns
    -------
    dict
        ``surface`` (name or None), ``index`` (relative to air), ``wavelength_nm``,
        ``temperature_c`` (None for a given index), ``surface_description``, ``index_source``.

    Raises
    ------
    InputError
        Both or neither given.

    Examples
    --------
    >>> resolve_surface("water")["index"]
    1.33298
    """
    from ..registries import SURFACES

    if (surface is None) == (index is None):
        raise InputError(f"give either --surface ({'|'.join(SURFACES)}) or --index N (the refractive index of the "
                         "reflecting medium relative to air), not both")
    if surface is not None:
        s = SURFACES.get(surface)
        return {"surface": s.name, "index": round(float(s.index), 6), "wavelength_nm": s.wavelength_nm,
                "temperature_c": s.temperature_c, "surface_description": s.description, "index_source": s.source}
    return {"surface": None, "index": float(index), "wavelength_nm": None, "temperature_c": None,
            "surface_description": "index given with --index", "index_source": "given by the user"}


def tilt_text(incidence_deg: float, brewster_deg: float) -> str:
    """How to move the line of sight to reach Brewster's angle on a level surface.

    >>> tilt_text(60.0, 53.1)
    'look 6.9 deg more steeply (on a level surface: lower the line of sight 6.9 deg toward the surface - step closer or raise the camera)'
    """
    d = brewster_deg - incidence_deg
    if abs(d) < 0.5:
        return f"you are at Brewster's angle already (within {abs(d):.1f} deg)"
    if d > 0:
        return (f"look {d:.1f} deg more obliquely (on a level surface: raise the line of sight {d:.1f} deg toward the "
                "horizon - step back or lower the camera)")
    return (f"look {-d:.1f} deg more steeply (on a level surface: lower the line of sight {-d:.1f} deg toward the "
            "surface - step closer or raise the camera)")


def surface_estimate(region_dolp: float, surface: dict, *, pitch_deg=None, region_aolp_deg=None) -> dict:
    """The angle of incidence from a region's measured DoLP (``polarsky advise --surface``).

    Parameters
    ----------
    region_dolp : float
        The region's measured DoLP.
    surface : dict
        From :func:`resolve_surface`.
    pitch_deg : float, optional
        Elevation of the optical axis (negative = looking down).  On a level surface the
        optical axis meets it at ``90 + pitch_deg`` degrees of incidence.
    region_aolp_deg : float, optional
        The region's AoLP; a level surface's reflection is near 0 (horizontal).

    Returns
    -------
    dict
        The keys of :data:`SURFACE_ESTIMATE_KEYS`: ``incidence_solutions_deg`` [below, above
        Brewster], ``tilt_to_brewster_deg`` (per solution), ``incidence_from_pitch_deg`` (the
        optical axis on a level surface), ``favoured_incidence_deg`` (the solution on the
        geometry's side of Brewster's angle), ``tilt_to_brewster_from_pitch_deg`` and
        ``notes``; the pitch keys are None without a downward ``pitch_deg``.

    References
    ----------
    .. [1] Hecht (2017), section 8.6.
    """
    n = float(surface["index"])
    lo, hi = incidence_from_dolp(region_dolp, n)
    b = brewster_angle_deg(1.0, n)
    name = surface.get("surface") or "this surface"
    if region_dolp >= 0.999:
        notes = [f"the region is fully polarized: you look at it at Brewster's angle ({b:.1f} deg)"]
    else:
        notes = [f"the measured DoLP {region_dolp:.3f} fits two angles of incidence on {name} (n = {n:.4f}): "
                 f"{lo:.1f} deg and {hi:.1f} deg from the normal; light from below or behind the surface and a real "
                 "filter both lower the measured DoLP, so the true angle lies between them (closer to Brewster's "
                 "angle)"]
    out = dict.fromkeys(SURFACE_ESTIMATE_KEYS)
    out.update({"surface": surface.get("surface"), "index": round(n, 6), "index_source": surface.get("index_source"),
                "region_dolp": round(float(region_dolp), 5), "incidence_solutions_deg": [round(lo, 2), round(hi, 2)],
                "brewster_deg": round(b, 3), "tilt_to_brewster_deg": [round(b - lo, 2), round(b - hi, 2)],
                "pitch_deg": None if pitch_deg is None else float(pitch_deg)})
    if pitch_deg is not None and float(pitch_deg) < 0:
        geo = 90.0 + float(pitch_deg)
        fav = hi if geo >= b else lo
        out.update({"incidence_from_pitch_deg": round(geo, 2), "favoured_incidence_deg": round(fav, 2),
                    "tilt_to_brewster_from_pitch_deg": round(b - geo, 2)})
        notes.append(f"with the camera pitched {float(pitch_deg):g} deg the optical axis meets a level surface at "
                     f"{geo:.1f} deg of incidence, {'above' if geo >= b else 'below'} Brewster's angle, so the geometry "
                     f"favours the {fav:.1f} deg solution (the region may lie off the image centre)")
        if lo < geo < hi:
            notes.append(f"the geometric {geo:.1f} deg lies between the two solutions, as expected when light from "
                         "below or behind the surface dilutes the reflection's polarization")
        notes.append(f"to reach Brewster's angle from {geo:.1f} deg: " + tilt_text(geo, b))
    elif pitch_deg is not None:
        notes.append(f"with --pitch-deg {float(pitch_deg):g} the optical axis does not point down at a level surface, "
                     "so the camera geometry cannot choose between the two solutions")
    else:
        notes.append("give --pitch-deg (negative = looking down) to let the camera geometry choose between them; "
                     f"from the lower solution: {tilt_text(lo, b)}; from the upper: {tilt_text(hi, b)}")
    if region_aolp_deg is not None:
        off = (float(region_aolp_deg) + 90.0) % 180.0 - 90.0
        if abs(off) > 20.0:
            notes.append(f"the region's polarization lies {off:+.0f} deg from the image horizontal: the surface is not "
                         "level in the image (camera roll, tilted glass) or the light is not mainly its reflection, "
                         "so treat the angles above with care")
    out["notes"] = notes + [MOVE_CAUTION]
    return out
