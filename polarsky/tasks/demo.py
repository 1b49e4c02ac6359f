"""``polarsky demo``: render the invented harbour scene and its evening sky, run polarsky on them.

Everything lands in one output folder, published whole: the rendered brackets, the outputs of
``stokes``, ``advise`` (with and without a protected region) and ``sky``, and ``demo.json``
comparing what polarsky found with the known truth.
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

    with OutputStage(out_dir, command="demo") as stage:
        out = stage.dir
        scene = hb.render_scene()
        frames = hb.write_bracket(scene, out / "bracket")
        truth = scene.truth()
        region = ",".join(str(v) for v in scene.region_box)
        protect = ",".join(str(v) for v in scene.protect_box)
        summary = run_stokes(frames, out / "stokes", align=True, progress=progress)
        with warnings.catch_warnings():  # the same frames again: their warnings were already shown
            warnings.simplefilter("ignore", PolarskyWarning)
            adv = run_advise(frames, out / "advice", region=region, align=True, progress=progress)
            adv_p = run_advise(frames, out / "advice-protect", region=region, protect=protect, align=True,
                               progress=progress)
        sky_frames = hb.write_sky_bracket(out / "sky-bracket")
        cam = hb.SKY_CAMERA
        sky = run_sky(sky_frames, out / "sky", when=hb.SKY_WHEN, lat=hb.SKY_LAT, lon=hb.SKY_LON,
                      altitude_m=hb.SKY_ALT_M, hfov_deg=cam["hfov_deg"], yaw_deg=hb.SKY_YAW_GUESS_DEG,
                      pitch_deg=cam["pitch_deg"], roll_deg=cam["roll_deg"], solve="yaw")
        report = {
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
            "outputs": ["demo.json", "bracket", "stokes", "advice", "advice-protect", "sky-bracket", "sky"],
        }
        write_json(stage.path("demo.json"), report)
        stage.publish()
    return report
