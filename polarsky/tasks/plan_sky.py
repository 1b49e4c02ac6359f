"""``polarsky plan sky``: how much a filter can darken the sky of a frame not yet shot.

Reads the settings (time, place, lens and orientation exactly as ``polarsky sky`` takes them,
the region as ``advise`` takes it, the plan's own options), computes the sun position (NREL
SPA), plans the shot and the sweeps (:mod:`polarsky.plan`) and, with ``out_dir``, writes
``plan_sky.json`` and the pictures, published whole.
"""

from __future__ import annotations

from dataclasses import dataclass

from ._common import load_calibration, resolve_settings

__all__ = ["plan_sky", "run_plan_sky", "publish_plan_sky", "PlannedSky"]


@dataclass
class PlannedSky:
    """A sky plan: the result (``plan_sky.json``), the plan at ``--when`` (maps for pictures)."""

    result: dict
    plan: object


def _sun(when, place: dict, g) -> dict:
    from ..sky.sun import sun_position

    sun = sun_position(when, place["latitude_deg"], place["longitude_deg"], altitude_m=place["altitude_m"],
                       pressure_hpa=g.pressure_hpa, temperature_c=g.temperature_c, delta_t_s=g.delta_t_s)
    sun["when"] = when.isoformat()
    return sun


def _setup(settings):
    """The plan's SkySetup, the sky model's title and the calibration (or None)."""
    from ..core.stokes import diattenuation_from_extinction
    from ..plan.sky import SkySetup
    from ..registries import SKY_RADIANCE_MODELS
    from ..sky.models import get_model
    from .sky import lens_of

    g, sk, pl, est = settings.geometry, settings.sky, settings.plan, settings.estimate
    w, h = pl.size_px
    model = get_model(sk.model, **({"neutral_point_deg": sk.neutral_point_deg} if sk.model == "neutral-points" else {}))
    region = settings.advise.region
    st = SkySetup(lens=lens_of(g, w, h), model=model, placement=g.polarizer or "front", dolp_max=float(pl.dolp_max),
                  diattenuation=1.0 if est.extinction is None else diattenuation_from_extinction(est.extinction),
                  radiance=SKY_RADIANCE_MODELS.get(pl.radiance), yaw_deg=float(g.yaw_deg), pitch_deg=float(g.pitch_deg),
                  roll_deg=float(g.roll_deg), min_elevation_deg=float(sk.min_elevation_deg),
                  sun_mask_deg=float(sk.sun_mask_deg),
                  sky_mask=None if sk.sky_mask is None else sk.sky_mask.as_mask((h, w)),
                  region_mask=None if region is None else region.as_mask((h, w)))
    cal = load_calibration(est.calibration)
    return st, model.title, cal


def plan_sky(settings=None, **options) -> PlannedSky:
    """Plan a sky shot (and the sweeps asked for); nothing is written.

    Parameters
    ----------
    settings : polarsky.Settings, optional
    **options
        Any setting by name: ``when``, ``lat``, ``lon`` (required), ``altitude_m``, lens and
        orientation (``lens``, ``hfov_deg``, ``yaw_deg``, ``pitch_deg``, ``roll_deg``, ...),
        ``polarizer``, the sky part (``sky_mask``, ``sun_mask_deg``, ``min_elevation_deg``,
        ``model``, ``neutral_point_deg``), ``region``, ``extinction``, ``calibration`` (a ring
        calibration), and the plan's ``size_px``, ``dolp_max``, ``radiance``, ``sweep_time``,
        ``sweep_yaw``.

    Returns
    -------
    PlannedSky

    Raises
    ------
    InputError
        Bad or missing values, the sun below the horizon, no sky in the frame, a calibration
        that is not a ring calibration.
    """
    from ..advice.ring import ring_of_calibration
    from ..conventions import SUN_CAUTION
    from ..options.syntax import sweep_times
    from ..plan.result import plan_sky_result
    from ..plan.sky import plan_at
    from ..plan.sweep import sweep_sky
    from ..sky.sun import resolve_time_place
    from ..write.summary import calibration_facts

    settings = resolve_settings(settings, options)
    g, pl = settings.geometry, settings.plan
    tp = resolve_time_place(when=g.when, lat=g.lat, lon=g.lon, altitude_m=g.altitude_m)
    place = {k: tp[k] for k in ("latitude_deg", "longitude_deg", "altitude_m")}
    st, model_title, cal = _setup(settings)
    ring = ring_of_calibration(cal)
    sun = _sun(tp["when"], place, g)
    plan = plan_at(st, sun)
    sweeps = {}
    if pl.sweep_time is not None:
        steps = [{"when": t.isoformat(), "sun": _sun(t, place, g), "yaw_deg": st.yaw_deg}
                 for t in sweep_times(pl.sweep_time, tp["when"])]
        sweeps["time"] = sweep_sky(st, steps, kind="time", ring_offset_deg=ring["ring_offset_deg"])
    if pl.sweep_yaw is not None:
        steps = [{"when": sun["when"], "sun": sun, "yaw_deg": y} for y in pl.sweep_yaw]
        sweeps["yaw"] = sweep_sky(st, steps, kind="yaw", ring_offset_deg=ring["ring_offset_deg"])
    region, mask = settings.advise.region, settings.sky.sky_mask
    result = plan_sky_result(plan, sun=sun, place=place, setup=st, model_title=model_title,
                             dolp_max_given="dolp_max" in settings.given, extinction=settings.estimate.extinction,
                             sky_mask=None if mask is None else mask.text, region=None if region is None else region.text,
                             calibration=calibration_facts(cal), ring=ring, sweeps=sweeps, caution=SUN_CAUTION)
    return PlannedSky(result=result, plan=plan)


def publish_plan_sky(planned: PlannedSky, out_dir, *, pictures: bool = True) -> dict:
    """Write ``plan_sky.json`` and the pictures into ``out_dir`` (published whole); returns the result."""
    from ._common import publish_result

    result = planned.result

    def draw(folder):
        from ..write.pictures.plan import sky_plan_pictures, sky_sweep_picture

        names = sky_plan_pictures(planned.plan, result, folder)
        return names + [sky_sweep_picture(result[f"sweep_{kind}"], result, kind, folder) for kind in ("time", "yaw")
                        if result[f"sweep_{kind}"] is not None]

    return publish_result(out_dir, result, "plan_sky.json", command="plan sky", draw=draw if pictures else None)


def run_plan_sky(out_dir=None, settings=None, **options) -> dict:
    """``polarsky plan sky``: :func:`plan_sky` and, with ``out_dir``, :func:`publish_plan_sky`.

    Returns
    -------
    dict
        ``plan_sky.json`` (docs/schemas/plan_sky.schema.json); ``outputs`` is None without
        ``out_dir``.
    """
    from ..write.stage import check_out_dir

    settings = resolve_settings(settings, options)
    if out_dir is not None:
        check_out_dir(out_dir)
    planned = plan_sky(settings)
    if out_dir is None:
        return planned.result
    return publish_plan_sky(planned, out_dir, pictures=settings.output.pictures)
