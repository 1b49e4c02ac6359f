"""Sky planning: how much a filter can darken the sky of a frame not yet shot, and how evenly.

The predicted polarization comes from the same model code ``polarsky sky`` compares brackets
with (:func:`polarsky.sky.skymap.model_maps` with a model of :mod:`polarsky.sky.models`):
DoLP ``P`` and AoLP ``psi`` per pixel for the lens and orientation given.  A filter of
diattenuation ``D`` at ``theta`` passes ``1/2 (1 + D P cos 2(theta - psi))`` of a sky
pixel's light, where a filter at a random angle passes ``1/2``; the darkening is therefore

.. math:: \\Delta(\\theta) = -\\log_2\\bigl(1 + D P \\cos 2(\\theta - \\psi)\\bigr)\\ \\text{stops},

the reference of ``polarsky advise``.  The recommended angle minimizes the sky's summed
light, in closed form from the summed Stokes vector (:func:`polarsky.advice.angle.best_angle_for_region`),
each pixel weighted by a sky radiance model (:mod:`polarsky.plan.radiance`).  A negative
darkening means the pixel gets brighter than with the filter at a random angle.

The sky part of the frame: pixels that see the scene, above the horizon and
``min_elevation_deg``, farther than ``sun_mask_deg`` from the sun, and inside the sky mask.

References
----------
.. [1] S. Chandrasekhar, *Radiative Transfer*, Oxford (1950) (single scattering).
.. [2] K. L. Coulson, *Polarization and Intensity of Light in the Atmosphere*, A. Deepak
   (1988) (the clear-sky pattern; the band of strongest polarization 90 degrees from the sun).
.. [3] E. Collett, *Field Guide to Polarization*, SPIE (2005), p. 12 (Malus's law).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..advice.angle import best_angle_for_region
from ..errors import InputError
from .unevenness import describe_unevenness

__all__ = ["SkySetup", "SkyPlan", "darkening_stops", "plan_at", "DEFAULT_DOLP_MAX_SOURCE", "EXAMPLE_EXTINCTIONS"]

#: Where the default maximum DoLP of the clear sky (0.7, the options table's default) comes from.
DEFAULT_DOLP_MAX_SOURCE = (
    "a typical clear sky at a low-altitude site: about 0.7 at low aerosol load, falling to 0.4 in turbid air over "
    "bright ground (Kreuter, Emde & Blumthaler, Atmos. Res. 98, 363 (2010)); 0.70-0.85 at 3.4 km (Dahlberg, Pust & "
    "Shaw, Opt. Express 19, 16008 (2011))")
#: Extinction ratios of the example real filters quoted beside an ideal-filter plan.
EXAMPLE_EXTINCTIONS = (30, 300)


@dataclass(frozen=True)
class SkySetup:
    """What a sky plan needs besides the sun: the frame, the model and the sky part.

    Attributes
    ----------
    lens : Lens
        The frame's lens model (its size is the planned frame's).
    model : sky model of :mod:`polarsky.sky.models`
    placement : str
        ``front`` or ``sensor``.
    dolp_max : float
        Maximum DoLP of the sky (scales the model).
    diattenuation : float
        Of the filter (1 = ideal).
    radiance : RadianceModel
        Weighs the sky's pixels (:mod:`polarsky.plan.radiance`).
    yaw_deg, pitch_deg, roll_deg : float
        Orientation of the camera.
    min_elevation_deg, sun_mask_deg : float
        The sky part lies above this elevation and farther than this from the sun.
    sky_mask, region_mask : ndarray (h, w) bool or None
        The sky mask and the region to darken.
    """

    lens: object
    model: object
    placement: str
    dolp_max: float
    diattenuation: float
    radiance: object
    yaw_deg: float
    pitch_deg: float
    roll_deg: float
    min_elevation_deg: float = 0.0
    sun_mask_deg: float = 10.0
    sky_mask: np.ndarray | None = None
    region_mask: np.ndarray | None = None


@dataclass
class SkyPlan:
    """A plan for one sun position and heading: its numbers, maps and geometry."""

    numbers: dict
    maps: dict
    geom: object


def darkening_stops(dolp, aolp_deg, angle_deg, *, diattenuation=1.0):
    """Per-pixel darkening in stops at filter angle ``angle_deg``: ``-log2(1 + D P cos 2(theta - psi))``.

    Relative to the filter at a random angle (negative = brighter); limited to 30 stops where
    an ideal filter would remove everything.

    References
    ----------
    .. [1] Collett (2005), p. 12 (Malus's law in Stokes form).

    Examples
    --------
    >>> round(float(darkening_stops(0.5, 0.0, 90.0)), 6)
    1.0
    """
    p = np.asarray(dolp, dtype=np.float64)
    dd = 2.0 * np.deg2rad(float(angle_deg) - np.asarray(aolp_deg, dtype=np.float64))
    return -np.log2(np.maximum(1.0 + float(diattenuation) * p * np.cos(dd), 2.0 ** -30))


def _stats(stops, sel) -> tuple:
    v = stops[sel]
    return round(float(v.mean()), 4), round(float(v.min()), 4), round(float(v.max()), 4)


def _no_sky_message(st: SkySetup, seen, above, away) -> str:
    if not seen.any():
        return (f"the frame holds no sky: with --pitch-deg {st.pitch_deg:g} and this lens the whole frame lies below "
                "the horizon; raise --pitch-deg")
    if not above.any():
        return (f"the frame holds no sky above --min-elevation-deg {st.min_elevation_deg:g}; raise --pitch-deg or "
                "lower --min-elevation-deg")
    if not away.any():
        return (f"the frame's sky lies entirely within {st.sun_mask_deg:g} deg of the sun (--sun-mask-deg): turn away "
                "from the sun (never aim at it through the viewfinder)")
    return "--sky-mask leaves no sky pixel in the frame; paint the sky non-zero in the mask"


def _in_frame(lens, vec) -> bool:
    u, v, ok = lens.project(np.asarray(vec, dtype=np.float64).reshape(3, 1))
    return bool(ok[0] and -0.5 <= u[0] <= lens.width - 0.5 and -0.5 <= v[0] <= lens.height - 0.5)


def _centre(st: SkySetup, geom) -> tuple:
    """Scattering angle (deg) and predicted DoLP at the principal point."""
    from ..sky.skymap import model_at_rays

    ray, _ = st.lens.rays_at(np.array([st.lens.cx]), np.array([st.lens.cy]))
    q = model_at_rays(st.model, geom.sun_cam, geom.up_cam, tuple(np.ravel(c).astype(np.float64) for c in ray),
                      st.placement, want=("shape", "scattering_angle"))
    return float(q["scattering_angle"][0]), float(q["shape"][0]) * st.dolp_max


def plan_at(st: SkySetup, sun: dict, *, yaw_deg=None, words: bool = True) -> SkyPlan:
    """The plan for one sun position (``azimuth_deg``, ``elevation_deg``) and heading.

    Parameters
    ----------
    st : SkySetup
    sun : dict
        From :func:`polarsky.sky.sun.sun_position`.
    yaw_deg : float, optional
        Heading instead of ``st.yaw_deg`` (a sweep over headings).
    words : bool
        Also describe the unevenness (:func:`polarsky.plan.unevenness.describe_unevenness`).

    Returns
    -------
    SkyPlan
        ``numbers``: ``best_angle_deg``, ``darkening_stops`` (mean over the sky part at the
        best angle, with the filter's diattenuation), ``darkening_stops_min`` / ``_max`` /
        ``_range``, their ideal-filter versions, ``darkening_stops_total`` (of the sky's
        summed light), ``darkening_stops_examples`` (ER 30 and 300), ``sky_dolp``,
        ``sky_aolp_deg``, ``sky_pixels``, ``sky_fraction``, ``scattering_angle_center_deg``,
        ``dolp_center``, ``sun_in_frame``, ``antisun_in_frame``, the region's values (None
        without a region) and the unevenness; ``maps``: ``dolp``, ``aolp``,
        ``scattering_angle``, ``sky``, ``darkening_stops`` (NaN outside the sky part),
        ``region``.

    Raises
    ------
    InputError
        The sun below the horizon, or no sky in the frame.
    """
    from ..sky.skymap import SkyGeometry, model_maps

    if sun["elevation_deg"] <= 0.0:
        raise InputError(f"the sun is below the horizon at {sun['when']} (elevation {sun['elevation_deg']:.1f} deg): "
                         "there is no daylit sky to darken; choose a daytime --when (or check its UTC offset)")
    yaw = st.yaw_deg if yaw_deg is None else float(yaw_deg)
    geom = SkyGeometry(st.lens, yaw, st.pitch_deg, st.roll_deg, sun["azimuth_deg"], sun["elevation_deg"], st.placement)
    m = model_maps(geom, st.model, st.dolp_max, want=("dolp", "aolp", "scattering_angle", "elevation", "inside", "up"))
    seen = m["inside"] & m["up"] & np.isfinite(m["dolp"])
    above = seen & (m["elevation"] > st.min_elevation_deg)
    away = above & (m["scattering_angle"] > st.sun_mask_deg)
    sky = away if st.sky_mask is None else away & st.sky_mask
    if not sky.any():
        raise InputError(_no_sky_message(st, seen, above, away))
    p = m["dolp"].astype(np.float64)
    psi = np.deg2rad(m["aolp"].astype(np.float64))
    rad = st.radiance.radiance(90.0 - m["elevation"].astype(np.float64), m["scattering_angle"].astype(np.float64),
                               90.0 - sun["elevation_deg"])
    wc, ws = rad * p * np.cos(2 * psi), rad * p * np.sin(2 * psi)

    def summed(sel):
        return np.array([rad[sel].sum(), wc[sel].sum(), ws[sel].sum()])

    best = best_angle_for_region(summed(sky), diattenuation=st.diattenuation)
    ang = best["best_angle_deg"]
    stops = darkening_stops(p, m["aolp"], ang, diattenuation=st.diattenuation)
    mean, lo, hi = _stats(stops, sky)
    mean_i, lo_i, hi_i = _stats(darkening_stops(p, m["aolp"], ang), sky)
    scat_c, dolp_c = _centre(st, geom)
    nums = {
        "best_angle_deg": ang, "darkening_stops": mean, "darkening_stops_min": lo, "darkening_stops_max": hi,
        "darkening_stops_range": round(hi - lo, 4), "darkening_stops_ideal": mean_i,
        "darkening_stops_min_ideal": lo_i, "darkening_stops_max_ideal": hi_i,
        "darkening_stops_total": best["reduction_stops"],
        "darkening_stops_examples": {str(er): _stats(darkening_stops(p, m["aolp"], ang, diattenuation=(er - 1) / (er + 1)),
                                                     sky)[0] for er in EXAMPLE_EXTINCTIONS},
        "sky_dolp": best["region_dolp"], "sky_aolp_deg": best["region_aolp_deg"], "sky_pixels": int(sky.sum()),
        "sky_fraction": round(float(sky.mean()), 4), "scattering_angle_center_deg": round(scat_c, 3),
        "dolp_center": round(dolp_c, 4), "sun_in_frame": _in_frame(st.lens, geom.sun_cam),
        "antisun_in_frame": _in_frame(st.lens, -geom.sun_cam), "yaw_deg": yaw,
    }
    nums.update(_region(st, sky, summed, p, m["aolp"], stops))
    if words:
        nums.update(describe_unevenness(stops, sky, m["scattering_angle"]))
    maps = {"dolp": m["dolp"], "aolp": m["aolp"], "scattering_angle": m["scattering_angle"], "sky": sky,
            "darkening_stops": np.where(sky, stops, np.nan).astype(np.float32), "region": st.region_mask}
    return SkyPlan(numbers=nums, maps=maps, geom=geom)


REGION_KEYS = ("region_pixels", "region_best_angle_deg", "region_darkening_stops", "region_darkening_stops_min",
               "region_darkening_stops_max", "region_darkening_stops_at_best_angle")


def _region(st: SkySetup, sky, summed, p, aolp, stops) -> dict:
    """The region's own plan (all None without a region)."""
    if st.region_mask is None:
        return dict.fromkeys(REGION_KEYS)
    sel = sky & st.region_mask
    if not sel.any():
        raise InputError("--region holds no sky pixel of the frame; choose a region in the sky")
    rb = best_angle_for_region(summed(sel), diattenuation=st.diattenuation)
    rmean, rlo, rhi = _stats(darkening_stops(p, aolp, rb["best_angle_deg"], diattenuation=st.diattenuation), sel)
    return dict(zip(REGION_KEYS, (int(sel.sum()), rb["best_angle_deg"], rmean, rlo, rhi,
                                  round(float(stops[sel].mean()), 4))))
