"""``polarsky demo``: render the invented harbour scene and its evening sky, run polarsky on them.

Everything lands in one output folder, published whole: the plans made before any frame
exists (``plan sky`` for the evening look, ``plan glare`` for the harbour water), the rendered
brackets, the outputs of ``stokes``, ``advise`` (with and without a protected region, and the
angle of incidence from the water's DoLP) and ``sky``, and ``demo.json`` comparing what
polarsky found with the known truth and the plans with what the rendered brackets show.
"""

from __future__ import annotations

import warnings

from ..errors import PolarskyWarning

__all__ = ["run_demo"]


def run_demo(out_dir, *, progress: bool = False) -> dict:
    """Render the demo into ``out_dir`` and run the pipeline on it as a user would."""
    from ..synthetic import harbour as hb
    from ..write.jsonio import write_json
    from ..write.stage import OutputStage
    from .advise import run_advise
    from .sky import run_sky
    from .stokes import run_stokes

    with OutputStage(out_dir, command="demo", relocate=True) as stage:
        out = stage.dir
        planned, glare = _plan_first(out)
        scene = hb.render_scene()
        frames = hb.write_bracket(scene, out / "bracket")
        truth = scene.truth()
        region = ",".join(str(v) for v in scene.region_box)
        protect = ",".join(str(v) for v in scene.protect_box)
        summary = run_stokes(frames, out / "stokes", align=True, progress=progress)
        with warnings.catch_warnings():  # the same frames again: their warnings were already shown
            warnings.simplefilter("ignore", PolarskyWarning)
            adv = run_advise(frames, out / "advice", region=region, align=True, surface="water", progress=progress)
            adv_p = run_advise(frames, out / "advice-protect", region=region, protect=protect, align=True,
                               progress=progress)
        sky_frames = hb.write_sky_bracket(out / "sky-bracket")
        cam = hb.SKY_CAMERA
        sky = run_sky(sky_frames, out / "sky", when=hb.SKY_WHEN, lat=hb.SKY_LAT, lon=hb.SKY_LON,
                      altitude_m=hb.SKY_ALT_M, hfov_deg=cam["hfov_deg"], yaw_deg=hb.SKY_YAW_GUESS_DEG,
                      pitch_deg=cam["pitch_deg"], roll_deg=cam["roll_deg"], solve="yaw")
        report = {
            "plan": {"sky": _compare_sky(planned, sky_frames), "glare": _compare_glare(glare, adv)},
            "frames": [str(p.relative_to(out)) for p in frames],
            "region": region,
            "protect": protect,
            "true_shifts_px": [list(s) for s in scene.shifts_px],
            "measured_shifts_px": summary.get("shifts_px"),
            "best_angle_deg": adv["best_angle_deg"],
            "true_best_angle_deg": truth["region"]["best_angle_deg"],
            "reduction_stops": adv["reduction_stops"],
            "true_reduction_stops": truth["region"]["reduction_stops"],
            "contrast_best_angle_deg": adv_p["best_angle_deg"],
            "true_contrast_best_angle_deg": truth["contrast"]["best_angle_deg"],
            "contrast_gain": adv_p["contrast_gain"],
            "true_contrast_gain": truth["contrast"]["contrast_gain"],
            "mean_dolp": summary.get("mean_dolp"),
            "sky_frames": [str(p.relative_to(out)) for p in sky_frames],
            "sun_azimuth_deg": sky["sun_azimuth_deg"],
            "sun_elevation_deg": sky["sun_elevation_deg"],
            "sky_yaw_deg": sky["yaw_deg"],
            "true_sky_yaw_deg": cam["yaw_deg"],
            "sky_yaw_guess_deg": hb.SKY_YAW_GUESS_DEG,
            "sky_dolp_max": sky["dolp_max"],
            "true_sky_dolp_max": hb.SKY_DOLP_MAX,
            "rms_aolp_residual_deg": sky["rms_aolp_residual_deg"],
            "outputs": ["demo.json", "plan-sky", "plan-glare", "bracket", "stokes", "advice", "advice-protect",
                        "sky-bracket", "sky"],
        }
        write_json(stage.path("demo.json"), report)
        stage.publish()
    return report


def _plan_first(out):
    """The plans of both shots, before any frame exists: the evening sky and the glare off the water."""
    from ..synthetic import harbour as hb
    from .plan_glare import run_plan_glare
    from .plan_sky import plan_sky, publish_plan_sky

    h, w = hb.SKY_SIZE
    planned = plan_sky(when=hb.SKY_WHEN, lat=hb.SKY_LAT, lon=hb.SKY_LON, altitude_m=hb.SKY_ALT_M, size_px=(w, h),
                       **hb.SKY_CAMERA)
    publish_plan_sky(planned, out / "plan-sky")
    glare = run_plan_glare(out / "plan-glare", surface="water", incidence_deg=hb.water_incidence_deg(),
                           roll_deg=hb.CAMERA_ROLL_DEG, sweep="0,85,5")
    return planned, glare


def _compare_sky(planned, sky_frames) -> dict:
    """The sky plan beside what the rendered sky bracket shows over the plan's sky part.

    The measured advice comes from the one advice function (the region sums of the plan's sky
    pixels); the measured darkening per pixel from the bracket's Stokes maps at that angle.
    """
    import numpy as np

    from ..advice.regions import region_stokes_sum
    from ..advice.result import advice_result
    from ..plan.sky import darkening_stops
    from ..read.masks import Region
    from ..synthetic import harbour as hb
    from ._common import resolve_settings
    from .sky import stokes_products

    p = stokes_products(sky_frames, resolve_settings())
    s, sky = p["S"], planned.plan.maps["sky"]
    sums, n = region_stokes_sum(s[0], s[1], s[2], p["valid"], sky)
    adv = advice_result({"region": sums}, {"region": n}, region=Region("the plan's sky part"),
                        analyzer_angles_deg=hb.ANGLES_DEG, inputs=p["inputs"])
    s0, s1, s2 = (np.sum(v, axis=0, dtype=np.float64) for v in s)
    ok = sky & np.all(p["valid"], axis=0) & (s0 > 0)
    stops = darkening_stops(np.hypot(s1, s2)[ok] / s0[ok], np.degrees(0.5 * np.arctan2(s2[ok], s1[ok])),
                            adv["best_angle_deg"])
    r = planned.result
    out = {"predicted_best_angle_deg": r["best_angle_deg"], "measured_best_angle_deg": adv["best_angle_deg"]}
    for key, value in (("darkening_stops", stops.mean()), ("darkening_stops_min", stops.min()),
                       ("darkening_stops_max", stops.max())):
        out[f"predicted_{key}"], out[f"measured_{key}"] = r[key], round(float(value), 4)
    out.update(predicted_darkening_stops_total=r["darkening_stops_total"],
               measured_darkening_stops_total=adv["reduction_stops"], predicted_dolp_max=r["dolp_max"],
               true_dolp_max=hb.SKY_DOLP_MAX, unevenness_text=r["unevenness_text"])
    return out


def _compare_glare(glare: dict, adv: dict) -> dict:
    """The glare plan beside what advise found on the harbour bracket (with the incidence from its DoLP)."""
    est = adv["surface_estimate"]
    return {"incidence_deg": glare["incidence_deg"], "index": glare["index"], "brewster_deg": glare["brewster_deg"],
            "predicted_best_angle_deg": glare["best_angle_deg"], "measured_best_angle_deg": adv["best_angle_deg"],
            "predicted_reflection_dolp": glare["reflection_dolp"], "measured_region_dolp": adv["region_dolp"],
            "predicted_reduction_stops_ideal": glare["reduction_stops_ideal"],
            "measured_reduction_stops": adv["reduction_stops"],
            "incidence_solutions_deg": est["incidence_solutions_deg"]}
