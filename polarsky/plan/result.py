"""The results of ``polarsky plan sky`` and ``polarsky plan glare``: one builder each, every key present.

``plan_sky.json`` / ``plan sky --json`` and ``plan_glare.json`` / ``plan glare --json`` hold
the keys of :data:`PLAN_SKY_KEYS` and :data:`PLAN_GLARE_KEYS` in that order, null where they
do not apply (docs/schemas/plan_sky.schema.json, plan_glare.schema.json).
"""

from __future__ import annotations

from .._version import __version__
from ..advice.ring import RING_KEYS, ring_keys
from .glare import GLARE_ANGLE_NOTE, GLARE_NUMBER_KEYS
from .sky import DEFAULT_DOLP_MAX_SOURCE, REGION_KEYS
from .unevenness import UNEVENNESS_KEYS

__all__ = ["plan_sky_result", "plan_glare_result", "PLAN_SKY_KEYS", "PLAN_GLARE_KEYS", "STOPS_REFERENCE"]

STOPS_REFERENCE = ("stops are relative to the filter at a random angle (the mean over a full turn), as in "
                   "'polarsky advise'; negative = brighter; the filter's own loss on unpolarized light (about 1 stop) "
                   "is not counted")
ANGLE_CONVENTION = ("degrees counter-clockwise from the image +x axis as displayed (the filter's transmission axis); "
                    "with a ring calibration the *_ring_reading_deg keys give the same on the filter ring's scale")
SKY_LIMITS = ("single-scattering clear-sky prediction: haze, cloud, bright ground and the horizon lower the real DoLP "
              "(scale it with --dolp-max); what the model does not know, it cannot predict")
SUN_ALGORITHM = "NREL SPA (Reda & Andreas 2004) via pvlib, refraction included"

_SKY_NUMBERS = ("best_angle_deg", "darkening_stops", "darkening_stops_min", "darkening_stops_max",
                "darkening_stops_range", "darkening_stops_ideal", "darkening_stops_min_ideal",
                "darkening_stops_max_ideal", "darkening_stops_total", "darkening_stops_examples", "sky_dolp",
                "sky_aolp_deg", "sky_pixels", "sky_fraction", "scattering_angle_center_deg", "dolp_center",
                "sun_in_frame", "antisun_in_frame")

#: Keys of ``plan_sky.json`` (``polarsky plan sky --json``), in order.
PLAN_SKY_KEYS = (("software_version", "when", "latitude_deg", "longitude_deg", "altitude_m", "sun_azimuth_deg",
                  "sun_elevation_deg", "sun_algorithm", "yaw_deg", "pitch_deg", "roll_deg", "lens", "width_px",
                  "height_px", "polarizer", "model", "model_title", "dolp_max", "dolp_max_source", "dolp_max_bound",
                  "radiance_model", "radiance_model_text", "extinction_ratio", "sun_mask_deg", "min_elevation_deg",
                  "sky_mask")
                 + _SKY_NUMBERS + UNEVENNESS_KEYS + ("region",) + REGION_KEYS
                 + ("calibration",) + RING_KEYS + ("best_ring_reading_deg", "region_best_ring_reading_deg")
                 + ("sweep_time", "sweep_yaw", "reference", "angle_convention", "limits", "caution", "warnings",
                    "outputs"))

#: Keys of ``plan_glare.json`` (``polarsky plan glare --json``), in order.
PLAN_GLARE_KEYS = (("software_version", "surface", "surface_description", "index_source", "wavelength_nm",
                    "temperature_c") + GLARE_NUMBER_KEYS + ("calibration",) + RING_KEYS
                   + ("best_ring_reading_deg", "sweep", "reference", "angle_convention", "caution", "warnings",
                      "outputs"))


def _ordered(values: dict, keys) -> dict:
    unknown = set(values) - set(keys)
    if unknown:
        raise KeyError(f"unknown plan key(s): {', '.join(sorted(unknown))}")
    return {k: values.get(k) for k in keys}


def plan_sky_result(plan, *, sun: dict, place: dict, setup, model_title: str, dolp_max_given: bool,
                    extinction=None, sky_mask=None, region=None, calibration=None, ring: dict, sweeps: dict,
                    caution: str) -> dict:
    """The sky plan's result (the keys of :data:`PLAN_SKY_KEYS`).

    Parameters
    ----------
    plan : SkyPlan
        From :func:`polarsky.plan.sky.plan_at` at the planned time and heading.
    sun : dict
        Sun position with ``when`` (ISO text).
    place : dict
        ``latitude_deg``, ``longitude_deg``, ``altitude_m``.
    setup : SkySetup
    model_title : str
        The sky model used, in words.
    dolp_max_given : bool
        Whether the maximum DoLP was given (else the default and its source are stated).
    extinction, sky_mask, region : optional
        The extinction ratio and the texts of the sky mask and region as given.
    calibration : dict, optional
        The calibration (the glossary's object), with ``ring`` its ring offset
        (:func:`polarsky.advice.ring.ring_of_calibration`).
    sweeps : dict
        ``"time"`` and ``"yaw"``: :func:`polarsky.plan.sweep.sweep_sky` results or None.
    """
    from ..sky.rayleigh import dolp_max_bound

    n = plan.numbers
    lens = setup.lens
    values = {k: n[k] for k in _SKY_NUMBERS + UNEVENNESS_KEYS + REGION_KEYS}
    values.update(
        software_version=__version__, when=sun["when"], **place, sun_azimuth_deg=round(sun["azimuth_deg"], 4),
        sun_elevation_deg=round(sun["elevation_deg"], 4), sun_algorithm=SUN_ALGORITHM, yaw_deg=n["yaw_deg"],
        pitch_deg=setup.pitch_deg, roll_deg=setup.roll_deg, lens=lens.describe(), width_px=lens.width,
        height_px=lens.height, polarizer=setup.placement, model=setup.model.name, model_title=model_title,
        dolp_max=setup.dolp_max, dolp_max_source="given with --dolp-max" if dolp_max_given else DEFAULT_DOLP_MAX_SOURCE,
        dolp_max_bound=round(dolp_max_bound(), 5), radiance_model=setup.radiance.name,
        radiance_model_text=setup.radiance.text, extinction_ratio=extinction, sun_mask_deg=setup.sun_mask_deg,
        min_elevation_deg=setup.min_elevation_deg, sky_mask=sky_mask, region=region, calibration=calibration,
        sweep_time=sweeps.get("time"), sweep_yaw=sweeps.get("yaw"), reference=STOPS_REFERENCE,
        angle_convention=ANGLE_CONVENTION, limits=SKY_LIMITS, caution=caution, warnings=[])
    values.update(ring_keys(ring, {"best_ring_reading_deg": n["best_angle_deg"],
                                   "region_best_ring_reading_deg": n["region_best_angle_deg"]}))
    return _ordered(values, PLAN_SKY_KEYS)


def plan_glare_result(numbers: dict, *, surface: dict, calibration=None, ring: dict, sweep=None,
                      caution: str) -> dict:
    """The glare plan's result (the keys of :data:`PLAN_GLARE_KEYS`).

    ``numbers`` from :func:`polarsky.plan.glare.glare_plan`, ``surface`` from
    :func:`polarsky.advice.surface.resolve_surface`, ``sweep`` the rows of
    :func:`polarsky.plan.glare.glare_sweep` (or None).
    """
    values = dict(numbers)
    values.update({k: surface[k] for k in ("surface", "surface_description", "index_source", "wavelength_nm",
                                           "temperature_c")})
    values.update(software_version=__version__, calibration=calibration, sweep=sweep, reference=STOPS_REFERENCE,
                  angle_convention=GLARE_ANGLE_NOTE, caution=caution, warnings=[])
    values.update(ring_keys(ring, {"best_ring_reading_deg": numbers["best_angle_deg"]}))
    return _ordered(values, PLAN_GLARE_KEYS)
