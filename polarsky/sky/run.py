"""``run_sky``: compare a sky bracket with the clear-sky model and write the results.

Writes into ``out_dir``: ``sky.json`` (the returned dict), ``sky.nc`` (model, residual and
geometry maps) and the PNG pictures.  Used by ``polarsky sky`` and the batch helper.
"""

from __future__ import annotations

import datetime as _dt
import json
import os
import warnings
from pathlib import Path

import numpy as np

from .._version import __version__
from ..errors import InputError, PolarskyWarning
from ..geometry.camera import LENS_MODELS, make_lens
from ..geometry.polarizer import PLACEMENTS
from .features import feature_bands
from .fit import MASK_REASONS, fit_dolp_max, residual_stats, sky_mask, wrap_aolp_difference
from .inputs import load_stokes
from .models import get_model
from .orient import fit_orientation, parse_solve, sample_bracket
from .rayleigh import RHO_AIR_YOUNG1980, dolp_max_bound
from .skymap import SkyGeometry, model_maps
from .sun import read_exif, resolve_time_place, sun_position

__all__ = ["run_sky", "prepare_sky", "SUN_CAUTION", "BRACKET_KEYS"]

#: Options passed through to the bracket path (``polarsky.pipeline.stokes_from_files``).
BRACKET_KEYS = ("angles_deg", "manifest", "transfer", "extinction", "angle_offset_deg", "align",
                "calibration", "max_pixels", "gain_e_per_dn", "read_noise_dn", "noise", "exposures_s")

SUN_CAUTION = ("caution: never look at the sun through a viewfinder, lens or polarizer, and do not leave a "
               "camera aimed at the sun; follow local safety rules and your equipment's instructions")


def _user_mask(path, shape):
    if path is None:
        return None
    import imageio.v3 as iio

    p = Path(path)
    if not p.is_file():
        raise InputError(f"--sky-mask {p} does not exist")
    try:
        # read from bytes: a failed decode must not leave the file open
        m = np.asarray(iio.imread(p.read_bytes(), extension=p.suffix.lower() or ".png"))
    except Exception as exc:  # noqa: BLE001
        raise InputError(f"--sky-mask {p} cannot be read as an image ({type(exc).__name__})") from None
    if m.ndim == 3:
        m = m[..., :3].max(axis=-1) if m.shape[-1] in (3, 4) else m.max(axis=-1)
    if m.shape != tuple(shape):
        raise InputError(f"--sky-mask {p} is {m.shape[1]}x{m.shape[0]} pixels but the frames are "
                         f"{shape[1]}x{shape[0]}; give a mask of the frame size (non-zero = sky)")
    return m != 0


def _display_channel(channels):
    for name in ("G", "L"):
        if name in channels:
            return channels.index(name)
    return 0


def prepare_sky(frames=(), *, stokes=None, when=None, lat=None, lon=None, altitude_m=None, pressure_hpa=None,
                temperature_c=12.0, delta_t_s=None, lens="pinhole", hfov_deg=None, focal_px=None, focal_mm=None,
                sensor_width_mm=None, distortion=None, fov_deg=None, circle_center_px=None,
                circle_radius_px=None, yaw_deg=0.0, pitch_deg=0.0, roll_deg=0.0, polarizer=None,
                **bracket_options):
    """Load the Stokes estimate and build the geometry (shared by the sky and calibrate commands).

    Returns
    -------
    products : dict
        From :func:`polarsky.sky.inputs.load_stokes` (``S``, ``dolp``, ``aolp``, ``valid``,
        ``channels``, ``attrs``).
    geom : SkyGeometry
    info : dict
        Sun, time/place and lens facts for the JSON output.
    """
    unknown = set(bracket_options) - set(BRACKET_KEYS) - {"progress"}
    if unknown:
        raise TypeError(f"unknown option(s): {', '.join(sorted(unknown))}")
    if lens not in LENS_MODELS:
        raise InputError(f"--lens {lens!r} is not known; choose one of {', '.join(LENS_MODELS)}")
    if polarizer is not None and polarizer not in PLACEMENTS:
        raise InputError(f"--polarizer {polarizer!r} must be one of {', '.join(PLACEMENTS)}")
    products = stokes if stokes is not None else load_stokes(frames, **{k: v for k, v in bracket_options.items()
                                                                        if k in BRACKET_KEYS})
    first = Path(frames[0]) if frames else None
    if first is None and bracket_options.get("manifest"):
        from ..ingest import read_manifest

        listed = read_manifest(bracket_options["manifest"])[0]
        first = Path(listed[0]) if listed else None
    exif = read_exif(first) if first is not None and first.suffix.lower() not in (".nc", ".nc4", ".h5") else {}
    tp = resolve_time_place(when=when, lat=lat, lon=lon, altitude_m=altitude_m, exif=exif)
    sun = sun_position(tp["when"], tp["latitude_deg"], tp["longitude_deg"], altitude_m=tp["altitude_m"],
                       pressure_hpa=pressure_hpa, temperature_c=temperature_c, delta_t_s=delta_t_s)
    c, h, w = products["dolp"].shape
    focal_source = "option"
    if lens == "pinhole" and hfov_deg is None and focal_px is None and focal_mm is None:
        if "focal_mm" in exif and sensor_width_mm is not None:
            focal_mm, focal_source = exif["focal_mm"], "exif FocalLength"
        elif "focal_35mm" in exif:
            # 35 mm equivalent focal length refers to the 43.27 mm diagonal (CIPA DC-008)
            focal_px, focal_source = exif["focal_35mm"] * np.hypot(w, h) / 43.2666, "exif FocalLengthIn35mmFilm"
    lens_obj = make_lens(lens, w, h, hfov_deg=hfov_deg, focal_px=focal_px, focal_mm=focal_mm,
                         sensor_width_mm=sensor_width_mm, distortion=distortion, fov_deg=fov_deg,
                         circle_center_px=circle_center_px, circle_radius_px=circle_radius_px)
    attrs = products.get("attrs", {})
    if polarizer is None:
        # the placement the Stokes estimate recorded; mosaic sensors carry their polarizers on the sensor
        recorded = str(attrs.get("polarizer", "") or "")
        mosaic = str(attrs.get("mosaic", "") or "").strip() not in ("", "none", "None", "0")
        polarizer = recorded if recorded in PLACEMENTS else ("sensor" if mosaic else "front")
    for name, val in (("--yaw-deg", yaw_deg), ("--pitch-deg", pitch_deg), ("--roll-deg", roll_deg)):
        if not np.isfinite(float(val)):
            raise InputError(f"{name} {val} is not a number")
    if not -90.0 <= float(pitch_deg) <= 90.0:
        raise InputError(f"--pitch-deg {pitch_deg:g} must lie in [-90, 90] (elevation of the optical axis)")
    geom = SkyGeometry(lens_obj, float(yaw_deg), float(pitch_deg), float(roll_deg), sun["azimuth_deg"],
                       sun["elevation_deg"], polarizer)
    info = {
        "when": tp["when"].isoformat(), "time_source": tp["time_source"],
        "latitude_deg": tp["latitude_deg"], "longitude_deg": tp["longitude_deg"], "altitude_m": tp["altitude_m"],
        "place_source": tp["place_source"], "sun": sun, "lens": lens_obj.describe(), "focal_source": focal_source,
    }
    return products, geom, info


def _write_json(path: Path, obj):
    tmp = path.with_name(f".{path.name}.tmp-{os.getpid()}")
    try:
        tmp.write_text(json.dumps(obj, indent=2, allow_nan=False) + "\n")
        os.replace(tmp, path)
    finally:
        if tmp.exists():
            tmp.unlink()


def _jsonable(x):
    if isinstance(x, dict):
        return {k: _jsonable(v) for k, v in x.items()}
    if isinstance(x, (list, tuple)):
        return [_jsonable(v) for v in x]
    if isinstance(x, (np.floating, float)):
        return float(x) if np.isfinite(x) else None
    if isinstance(x, np.integer):
        return int(x)
    if isinstance(x, np.bool_):
        return bool(x)
    return x


def run_sky(frames, out_dir, *, stokes=None, solve=(), sky_mask_path=None, model="rayleigh",
            neutral_point_deg: float = 20.0, sun_mask_deg: float = 10.0, min_elevation_deg: float = 0.0, pictures: bool = True,
            max_fit_samples: int = 20_000, seed: int = 0, **options) -> dict:
    """Compare a sky bracket with the clear-sky model; write sky.json, sky.nc and pictures.

    Parameters
    ----------
    frames : list of path
        The bracket's frames (or one ``stokes.nc``).
    out_dir : path
        Output directory (created).
    stokes : dict, optional
        Pre-loaded products (see :func:`polarsky.sky.inputs.load_stokes`) instead of frames.
    solve : str or tuple of str
        Orientation angles to fit (any of yaw, pitch, roll).
    sky_mask_path : path, optional
        PNG of the frame size, non-zero = sky the fit may use.
    model : str
        Sky model name (:data:`polarsky.sky.models.SKY_MODELS`).
    neutral_point_deg : float
        For ``model="neutral-points"``: distance of each neutral point from the sun or
        antisun, degrees.
    sun_mask_deg : float
        Radius of the sun-disk-and-aureole mask, degrees.
    min_elevation_deg : float
        Pixels at or below this elevation are never sky.
    **options
        Time/place, lens, orientation and polarizer options of :func:`prepare_sky`, and the
        bracket options (``angles_deg``, ``manifest``, ...).

    Returns
    -------
    dict
        The ``sky.json`` content.
    """
    out_dir = Path(out_dir)
    solve = parse_solve(",".join(solve) if isinstance(solve, (list, tuple)) else solve)
    sky_model = get_model(model, **({"neutral_point_deg": neutral_point_deg} if model == "neutral-points" else {}))
    if not (0 <= neutral_point_deg < 60):
        raise InputError(f"--neutral-point-deg {neutral_point_deg:g} must lie in [0, 60)")
    if not (0 <= sun_mask_deg < 90):
        raise InputError(f"--sun-mask-deg {sun_mask_deg:g} must lie in [0, 90)")
    from ..pipeline import OutputStage

    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", PolarskyWarning)
        products, geom, info = prepare_sky(frames, stokes=stokes, **options)
        # everything is written to a hidden staging folder and published at the end, so a
        # failed run leaves no partial outputs
        with OutputStage(out_dir) as stage:
            result = _run(products, geom, info, stage.dir, solve=solve, sky_model=sky_model,
                          sky_mask_path=sky_mask_path, sun_mask_deg=sun_mask_deg,
                          min_elevation_deg=min_elevation_deg, pictures=pictures,
                          max_fit_samples=max_fit_samples, seed=seed, frames=frames)
            result["warnings"] = [str(w.message) for w in caught if issubclass(w.category, PolarskyWarning)]
            result = _jsonable(result)
            _write_json(stage.dir / "sky.json", result)
            stage.publish()
    for wmsg in caught:  # hand the warnings on to the caller
        warnings.warn_explicit(wmsg.message, wmsg.category, wmsg.filename, wmsg.lineno)
    return result


def _run(products, geom, info, out_dir, *, solve, sky_model, sky_mask_path, sun_mask_deg, min_elevation_deg,
         pictures, max_fit_samples, seed, frames):
    s = products["S"]
    dolp, aolp = products["dolp"], products["aolp"]
    channels = products["channels"]
    c, h, w = dolp.shape
    valid_all = np.all(products["valid"], axis=0) if products["valid"].ndim == 3 else products["valid"]
    user = _user_mask(sky_mask_path, (h, w))
    bands = feature_bands(sun_radius_deg=sun_mask_deg)
    s0 = np.nanmean(s[0], axis=0) if c > 1 else s[0, 0]
    dolp_mean = np.nanmean(dolp, axis=0) if c > 1 else dolp[0]

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
                       "samples": fit["samples"], "alternatives": fit.get("alternatives", []),
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
    if n_used < 50:
        warnings.warn(f"only {n_used} sky pixels are left for the fit (see sky_mask.png or sky_mask_reason in sky.nc); the results are "
                      "not reliable - check the orientation, --sky-mask and the frame", PolarskyWarning, stacklevel=2)
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
        "aolp_rms_deg": stats["aolp_rms_deg"],
        "dolp_rms": stats["dolp_rms"],
        "aolp_mad_deg": stats["aolp_mad_deg"],
        "dolp_mad": stats["dolp_mad"],
        "aolp_bias_deg": stats["aolp_bias_deg"],
        "sky_pixels": n_used,
        "yaw_deg": geom.yaw_deg,
        "pitch_deg": geom.pitch_deg,
        "roll_deg": geom.roll_deg,
        "polarizer": geom.placement,
        "model": sky_model.name,
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
        "inputs": [str(f) for f in frames],
        "software_version": __version__,
        "caution": SUN_CAUTION,
    }
    for ang in ("yaw", "pitch", "roll"):
        if f"{ang}_sigma_deg" in orientation:
            result[f"{ang}_sigma_deg"] = orientation[f"{ang}_sigma_deg"]
    out_dir.mkdir(parents=True, exist_ok=True)
    _write_nc(out_dir / "sky.nc", dolp_model=dolp_model, aolp_model=maps["aolp"],
              dolp_res=dolp_res, aolp_res=aolp_res, maps=maps, reason=reason, channels=channels, result=result)
    files = ["sky.json", "sky.nc"]
    if pictures:
        k = _display_channel(channels)
        line = (f"sun az {sun['azimuth_deg']:.1f}°, el {sun['elevation_deg']:.1f}° | dolp_max {joint['dolp_max']:.3f} "
                f"| yaw {geom.yaw_deg:.1f}° pitch {geom.pitch_deg:.1f}° roll {geom.roll_deg:.1f}° | {geom.placement}")
        from .pictures import save_sky_pictures

        files += save_sky_pictures(out_dir, geom=geom, bands=bands, observed_dolp=dolp[k], observed_aolp=aolp[k],
                                   model_dolp=dolp_model[k], model_aolp=maps["aolp"], dolp_residual=dolp_res[k],
                                   aolp_residual=aolp_res[k], scattering_angle=maps["scattering_angle"],
                                   reason=reason, channel_name=channels[k], summary_line=line)
    result["files"] = files
    return result


def _write_nc(path: Path, *, dolp_model, aolp_model, dolp_res, aolp_res, maps, reason, channels, result):
    """Write sky.nc (NetCDF-4 via h5netcdf, uncompressed) under a temporary name, then rename."""
    import h5netcdf
    import h5py

    cyx, yx = ("channel", "y", "x"), ("y", "x")
    f32 = np.float32
    variables = {
        "dolp_model": (cyx, dolp_model, "1", "model DoLP (fitted dolp_max)"),
        "aolp_model": (yx, aolp_model, "degree", "model AoLP, image convention"),
        "dolp_residual": (cyx, dolp_res, "1", "observed minus model DoLP"),
        "aolp_residual": (cyx, aolp_res, "degree", "observed minus model AoLP, wrapped to [-90, 90)"),
        "scattering_angle": (yx, maps["scattering_angle"], "degree",
                             "angle between the sun and the viewing direction"),
        "elevation": (yx, maps["elevation"], "degree", "elevation of the viewing direction above the horizon"),
        "azimuth": (yx, maps["azimuth"], "degree", "azimuth of the viewing direction, clockwise from true north"),
    }
    attrs = {k: (json.dumps(_jsonable(v)) if isinstance(v, (bool, np.bool_)) or not isinstance(v, (str, int, float))
                 else v)
             for k, v in _jsonable(result).items() if v is not None and k not in ("features",)}
    attrs["angle_convention"] = ("degrees in the image plane from the image +x axis, counter-clockwise as displayed; "
                                 "AoLP in [0, 180)")
    attrs["created"] = _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds")
    c, h, w = dolp_model.shape
    tmp = path.with_name(f".{path.name}.tmp-{os.getpid()}")
    try:
        with h5netcdf.File(tmp, "w") as f:
            f.dimensions = {"channel": c, "y": h, "x": w}
            ch = f.create_variable("channel", ("channel",), dtype=h5py.string_dtype())
            ch[:] = np.array(list(channels), dtype=object)
            f.create_variable("y", ("y",), data=np.arange(h, dtype=np.int32))
            f.create_variable("x", ("x",), data=np.arange(w, dtype=np.int32))
            for name, (dims, arr, units, long_name) in variables.items():
                v = f.create_variable(name, dims, dtype=f32, fillvalue=f32(np.nan))
                v[...] = np.asarray(arr, dtype=f32)
                v.attrs["units"] = units
                v.attrs["long_name"] = long_name
            v = f.create_variable("sky_mask_reason", yx, dtype=np.uint8)
            v[...] = reason
            v.attrs["units"] = "1"
            v.attrs["long_name"] = "why a pixel was (not) used for the fit"
            v.attrs["flag_values"] = np.array(sorted(MASK_REASONS), dtype=np.uint8)
            v.attrs["flag_meanings"] = " ".join(
                MASK_REASONS[k].replace(",", "").replace("(", "").replace(")", "").replace(" ", "_")
                for k in sorted(MASK_REASONS))
            for k, val in attrs.items():
                f.attrs[k] = val
        os.replace(tmp, path)
    finally:
        if tmp.exists():
            tmp.unlink()
