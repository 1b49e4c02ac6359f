"""The sky comparison itself: orientation fit, model maps, DoLP scale, residuals, files.

Called by :func:`polarsky.tasks.sky.run_sky` inside its output stage.
"""

from __future__ import annotations

import warnings
from pathlib import Path

import numpy as np

from .._version import __version__
from ..conventions import SUN_CAUTION
from ..errors import InputError, PolarskyWarning
from ..sky.features import feature_bands
from ..sky.fit import (MASK_REASONS, channel_mean, describe_mask, fit_dolp_max, residual_stats, sky_mask,
                       wrap_aolp_difference)
from ..sky.orient import fit_orientation, sample_bracket
from ..sky.rayleigh import RHO_AIR_YOUNG1980, dolp_max_bound
from ..sky.skymap import model_maps
from ..write.sky_file import write_sky_nc

__all__ = ["compare", "display_channel"]


def warn_few(n_used: int) -> None:
    if n_used < 50:
        warnings.warn(f"only {n_used} sky pixels are left for the fit (see sky_mask.png or sky_mask_reason in sky.nc); "
                      "the results are not reliable: check the orientation, --sky-mask and the frame",
                      PolarskyWarning, stacklevel=3)


def display_channel(channels) -> int:
    """Index of the channel shown in pictures (G of colour frames, else the first)."""
    for name in ("G", "L"):
        if name in channels:
            return channels.index(name)
    return 0


def compare(products, geom, info, out_dir, *, settings, model, max_fit_samples, seed, inputs):
    """Fit and compare (see the module docs); writes sky.nc and pictures into ``out_dir``, returns sky.json."""
    sky_model = model
    sk = settings.sky
    solve = sk.solve
    sun_mask_deg, min_elevation_deg = sk.sun_mask_deg, sk.min_elevation_deg
    s = products["S"]
    dolp, aolp = products["dolp"], products["aolp"]
    channels = products["channels"]
    c, h, w = dolp.shape
    valid_all = np.all(products["valid"], axis=0) if products["valid"].ndim == 3 else products["valid"]
    user = None if sk.sky_mask is None else sk.sky_mask.as_mask((h, w))
    bands = feature_bands(sun_radius_deg=sun_mask_deg)
    s0 = channel_mean(s[0]) if c > 1 else s[0, 0]
    dolp_mean = channel_mean(dolp) if c > 1 else dolp[0]

    orientation = {"source": "option"}
    if solve:
        # sky pixels independent of the orientation: valid, bright enough, allowed by the user
        usable = valid_all & np.isfinite(dolp_mean) & (dolp_mean <= 1.0)
        if user is not None:
            usable &= user
        if usable.any():
            usable &= s0 >= 0.25 * float(np.median(s0[usable]))
        b = sample_bracket(geom, aolp, dolp, usable, max_samples=max_fit_samples, seed=seed)
        fit = fit_orientation([b], sky_model, solve=solve, search=True)
        pose = fit["poses"][0]
        geom = geom.with_orientation(pose["yaw_deg"], pose["pitch_deg"], pose["roll_deg"])
        # refine once on the full geometric mask of the found orientation
        m1 = model_maps(geom, sky_model, 1.0, want=("scattering_angle", "elevation", "inside", "up"))
        reason1 = sky_mask(inside=m1["inside"], up=m1["up"], valid=valid_all, s0=s0, dolp=dolp_mean,
                           scattering_angle_deg=m1["scattering_angle"], elevation_deg=m1["elevation"], bands=bands,
                           user_mask=user, min_elevation_deg=min_elevation_deg)
        if np.count_nonzero(reason1 == 0) >= 50:
            b = sample_bracket(geom, aolp, dolp, reason1 == 0, max_samples=max_fit_samples, seed=seed + 1)
            fit2 = fit_orientation([b], sky_model, solve=solve, search=False, warn=False)
            fit2["messages"] = fit["messages"] + [m for m in fit2["messages"] if m not in fit["messages"]]
            for m in fit2["messages"]:
                if m not in fit["messages"]:
                    warnings.warn(m, PolarskyWarning, stacklevel=2)
            fit2["alternatives"] = fit.get("alternatives", [])
            fit = fit2
            pose = fit["poses"][0]
            geom = geom.with_orientation(pose["yaw_deg"], pose["pitch_deg"], pose["roll_deg"])
        orientation = {"source": "solved", "solved": list(solve), "parameters": fit["parameters"],
                       "correlation": fit["correlation"], "ties": fit["ties"], "degenerate": fit["degenerate"],
                       "fit_samples": fit["fit_samples"], "alternatives": fit.get("alternatives", []),
                       "notes": fit["messages"]}
        for k, v in pose.items():
            orientation[k] = v

    maps = model_maps(geom, sky_model, 1.0,
                      want=("dolp", "aolp", "scattering_angle", "elevation", "azimuth", "inside", "up"))
    shape = maps["dolp"]
    reason = sky_mask(inside=maps["inside"], up=maps["up"], valid=valid_all, s0=s0, dolp=dolp_mean,
                      scattering_angle_deg=maps["scattering_angle"], elevation_deg=maps["elevation"], bands=bands,
                      user_mask=user, min_elevation_deg=min_elevation_deg)
    used = reason == 0
    n_used = int(np.count_nonzero(used))
    if n_used == 0:
        raise InputError(f"no sky pixel is left for the comparison ({describe_mask(reason)}); check --when, --lat, "
                         "--lon, the orientation (--yaw-deg, --pitch-deg, --roll-deg), the lens and --sky-mask")
    warn_few(n_used)
    shape_used = shape[used]
    joint = fit_dolp_max(dolp[:, used], np.broadcast_to(shape_used, (c, n_used)), seed=seed)
    per_channel = []
    dolp_model = np.empty((c, h, w), dtype=np.float32)
    for k in range(c):
        fk = fit_dolp_max(dolp[k][used], shape_used, seed=seed) if c > 1 else joint
        per_channel.append({"channel": channels[k], "dolp_max": fk["dolp_max"], "dolp_max_sigma": fk["dolp_max_sigma"]})
        np.multiply(shape, np.float32(fk["dolp_max"] if np.isfinite(fk["dolp_max"]) else 0.0), out=dolp_model[k])
    dolp_res = (dolp - dolp_model).astype(np.float32)
    aolp_res = wrap_aolp_difference(aolp, maps["aolp"][None]).astype(np.float32)
    stats = residual_stats(dolp_res, aolp_res, used)
    bound = dolp_max_bound(RHO_AIR_YOUNG1980)
    if np.isfinite(joint["dolp_max"]) and joint["dolp_max"] > bound + 3 * max(joint["dolp_max_sigma"], 1e-3):
        warnings.warn(f"the fitted dolp_max {joint['dolp_max']:.3f} exceeds the pure-air bound {bound:.3f}: "
                      "check the analyzer angles, the polarizer placement and the orientation", PolarskyWarning,
                      stacklevel=2)

    sun_cam = geom.sun_cam
    u, v, ok = geom.lens.project(sun_cam.reshape(3, 1))
    sun_in = bool(ok[0] and -0.5 <= u[0] <= w - 0.5 and -0.5 <= v[0] <= h - 0.5)
    u2, v2, ok2 = geom.lens.project(-sun_cam.reshape(3, 1))
    anti_in = bool(ok2[0] and -0.5 <= u2[0] <= w - 0.5 and -0.5 <= v2[0] <= h - 0.5)
    counts = {MASK_REASONS[k]: int(np.count_nonzero(reason == k)) for k in MASK_REASONS}

    sun = info["sun"]
    result = {
        "sun_azimuth_deg": sun["azimuth_deg"],
        "sun_elevation_deg": sun["elevation_deg"],
        "dolp_max": joint["dolp_max"],
        "dolp_max_sigma": joint["dolp_max_sigma"],
        "dolp_max_bound": bound,
        "depolarization_ratio": RHO_AIR_YOUNG1980,
        "dolp_max_bound_source": "(1 - rho)/(1 + rho), rho = 0.0279 for air (Young 1980)",
        **stats,
        "sky_pixels": n_used,
        "fit_samples": joint["fit_samples"],
        "yaw_deg": geom.yaw_deg,
        "pitch_deg": geom.pitch_deg,
        "roll_deg": geom.roll_deg,
        **{f"{a}_sigma_deg": orientation.get(f"{a}_sigma_deg") for a in ("yaw", "pitch", "roll")},
        "polarizer": geom.placement,
        "model": sky_model.name,
        "model_title": sky_model.title,
        "neutral_point_deg": (float(np.rad2deg(sky_model.delta)) if hasattr(sky_model, "delta") else None),
        "orientation": orientation,
        "channels": per_channel,
        "sun_in_frame": sun_in,
        "antisun_in_frame": anti_in,
        "sun_pixel": [float(u[0]), float(v[0])] if sun_in else None,
        "mask_counts": counts,
        "features": bands,
        "when": info["when"], "time_source": info["time_source"],
        "latitude_deg": info["latitude_deg"], "longitude_deg": info["longitude_deg"],
        "altitude_m": info["altitude_m"], "place_source": info["place_source"],
        "pressure_hpa": sun["pressure_hpa"], "temperature_c": sun["temperature_c"],
        "sun_algorithm": "NREL SPA (Reda & Andreas 2004) via pvlib, refraction included",
        "lens": info["lens"], "focal_source": info["focal_source"],
        "inputs": list(inputs),
        "software_version": __version__,
        "caution": SUN_CAUTION,
        "warnings": [],
        "outputs": [],
    }
    write_sky_nc(Path(out_dir) / "sky.nc", dolp_model=dolp_model, aolp_model=maps["aolp"], dolp_res=dolp_res,
                 aolp_res=aolp_res, maps=maps, reason=reason, channels=channels, result=result)
    if settings.output.pictures:
        k = display_channel(channels)
        line = (f"sun az {sun['azimuth_deg']:.1f}°, el {sun['elevation_deg']:.1f}° | dolp_max {joint['dolp_max']:.3f} "
                f"| yaw {geom.yaw_deg:.1f}° pitch {geom.pitch_deg:.1f}° roll {geom.roll_deg:.1f}° | {geom.placement}")
        from ..write.pictures.sky import save_sky_pictures

        save_sky_pictures(out_dir, geom=geom, bands=bands, observed_dolp=dolp[k], observed_aolp=aolp[k],
                          model_dolp=dolp_model[k], model_aolp=maps["aolp"], dolp_residual=dolp_res[k],
                          aolp_residual=aolp_res[k], scattering_angle=maps["scattering_angle"],
                          reason=reason, channel_name=channels[k], model_title=sky_model.title, summary_line=line)
    return result
