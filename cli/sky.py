"""``polarsky sky``: compare a sky bracket with the clear-sky model; orientation from the sky."""

from __future__ import annotations

import click

from polarsky.errors import InputError
from polarsky.geometry.camera import LENS_MODELS
from polarsky.geometry.polarizer import PLACEMENTS
from polarsky.sky.models import SKY_MODELS

from .common import ANGLE_HELP, apply_options, bracket_kwargs, bracket_options, frames_argument, print_json
from .mosaic_options import mosaic_dataset_from_options, mosaic_options, strip_mosaic_options

__all__ = ["command", "geometry_options", "geometry_kwargs", "parse_floats", "mosaic_products"]


def mosaic_products(frames, mosaic: dict, opts: dict):
    """Stokes products of polarization-mosaic frames (``--mosaic``), or None for a bracket."""
    ds = mosaic_dataset_from_options(frames, mosaic, calibration=opts.get("calibration"),
                                     transfer=opts.get("transfer") or "auto", max_pixels=opts.get("max_pixels"),
                                     bracket_values=opts)
    if ds is None:
        return None
    from polarsky.sky.inputs import products_from_dataset

    return products_from_dataset(ds)


def parse_floats(text, name: str, count=None):
    """``"1,2,3"`` -> [1.0, 2.0, 3.0]; InputError naming the option on bad input."""
    if text is None:
        return None
    try:
        vals = [float(p) for p in str(text).replace(" ", "").split(",") if p != ""]
    except ValueError:
        raise InputError(f"{name} {text!r} must be numbers separated by commas") from None
    if count is not None and len(vals) != count:
        raise InputError(f"{name} {text!r} must hold {count} numbers separated by commas")
    return vals


_GEOMETRY = [
    click.option("--when", default=None, metavar="ISO8601",
                 help="Time of the exposure with its UTC offset, e.g. 2024-06-21T14:05:00+02:00 "
                      "(default: EXIF DateTimeOriginal + OffsetTimeOriginal)."),
    click.option("--lat", type=float, default=None, help="Latitude, degrees north (default: EXIF GPS)."),
    click.option("--lon", type=float, default=None, help="Longitude, degrees east, west negative (default: EXIF GPS)."),
    click.option("--altitude-m", type=float, default=None, help="Height above sea level, metres (default: EXIF GPS or 0)."),
    click.option("--pressure-hpa", type=float, default=None,
                 help="Air pressure for refraction, hPa (default: standard atmosphere at the altitude)."),
    click.option("--temperature-c", type=float, default=12.0, show_default=True,
                 help="Air temperature for refraction, deg C."),
    click.option("--delta-t-s", type=float, default=None, help="TT - UT1, seconds (default: estimated for the date)."),
    click.option("--lens", type=click.Choice(list(LENS_MODELS)), default="pinhole", show_default=True,
                 help="Lens projection."),
    click.option("--hfov-deg", type=float, default=None, help="Pinhole: horizontal field of view across the frame, degrees."),
    click.option("--focal-px", type=float, default=None, help="Pinhole: focal length in pixels."),
    click.option("--focal-mm", type=float, default=None,
                 help="Pinhole: focal length in mm (with --sensor-width-mm; default EXIF FocalLength)."),
    click.option("--sensor-width-mm", type=float, default=None, help="Width of the imaged sensor area, mm."),
    click.option("--distortion", default=None, metavar="K1,K2,P1,P2[,K3]",
                 help="Pinhole: OpenCV distortion coefficients."),
    click.option("--fov-deg", type=float, default=None, help="Fisheye: field of view across the image circle, degrees."),
    click.option("--circle-center-px", default=None, metavar="X,Y",
                 help="Fisheye: image-circle centre (column,row); default the image centre."),
    click.option("--circle-radius-px", type=float, default=None,
                 help="Fisheye: image-circle radius; default half the shorter image side."),
    click.option("--yaw-deg", type=float, default=0.0, show_default=True,
                 help="Azimuth of the optical axis, degrees clockwise from true north."),
    click.option("--pitch-deg", type=float, default=0.0, show_default=True,
                 help="Elevation of the optical axis, degrees."),
    click.option("--roll-deg", type=float, default=0.0, show_default=True,
                 help="Roll about the optical axis, clockwise as seen from behind the camera, degrees."),
    click.option("--polarizer", type=click.Choice(list(PLACEMENTS)), default=None,
                 help="Where the polarizer sits: front (filter before the lens) or sensor (micro-polarizers); "
                      "default: what the Stokes estimate recorded (front for brackets)."),
    click.option("--sky-mask", "sky_mask_path", type=click.Path(dir_okay=False, path_type=str), default=None,
                 metavar="PNG", help="Image of the frame size; non-zero pixels are sky the fit may use."),
    click.option("--model", type=click.Choice(list(SKY_MODELS)), default="rayleigh", show_default=True,
                 help="Clear-sky polarization model."),
    click.option("--neutral-point-deg", type=float, default=20.0, show_default=True,
                 help="--model neutral-points: distance of the Babinet/Brewster points from the sun and of the "
                      "Arago/fourth points from the antisun, degrees."),
    click.option("--sun-mask-deg", type=float, default=10.0, show_default=True,
                 help="Radius of the sun disk and aureole left out of the fit, degrees."),
    click.option("--min-elevation-deg", type=float, default=0.0, show_default=True,
                 help="Pixels at or below this elevation are never sky."),
]


def geometry_options(f):
    return apply_options(f, _GEOMETRY)


def geometry_kwargs(kw: dict) -> dict:
    """Pop the geometry options from click's kwargs into ``run_sky`` keyword arguments."""
    out = {k: kw.pop(k) for k in ("when", "lat", "lon", "altitude_m", "pressure_hpa", "temperature_c", "delta_t_s",
                                  "lens", "hfov_deg", "focal_px", "focal_mm", "sensor_width_mm", "fov_deg",
                                  "circle_radius_px", "yaw_deg", "pitch_deg", "roll_deg", "polarizer",
                                  "sky_mask_path", "model", "neutral_point_deg", "sun_mask_deg",
                                  "min_elevation_deg")}
    out["distortion"] = parse_floats(kw.pop("distortion"), "--distortion")
    out["circle_center_px"] = parse_floats(kw.pop("circle_center_px"), "--circle-center-px", 2)
    return out


def _fmt_sigma(v):
    return "undetermined" if v is None else f"± {v:.3f}"


@click.command(name="sky", epilog=ANGLE_HELP)
@frames_argument
@bracket_options
@geometry_options
@click.option("--solve", default=None, metavar="yaw,pitch,roll",
              help="Fit these orientation angles (any subset) to the observed AoLP; the given angles are starting "
                   "values, the others stay fixed.")
@click.option("--pictures/--no-pictures", default=True, show_default=True, help="Write the PNG pictures.")
@click.option("--out", "out_dir", required=True, type=click.Path(file_okay=False, path_type=str),
              help="Folder for sky.json, sky.nc and the pictures.")
@click.option("--json", "as_json", is_flag=True, help="Print sky.json as one JSON object.")
@mosaic_options
def command(frames, out_dir, as_json, solve, pictures, **kw):
    """Compare the sky in FRAME... (a bracket, one stokes.nc, or mosaic frames with --mosaic) with the clear-sky model.

    Reports the sun position (NREL SPA), the fitted maximum DoLP beside the pure-air bound,
    the AoLP/DoLP residuals over the sky pixels used, and with --solve the camera orientation
    recovered from the sky.  Writes sky.json, sky.nc and PNG pictures (observed and model
    AoLP/DoLP, residuals, the sky mask) to --out.
    """
    from polarsky.sky.run import run_sky

    frames = list(frames)
    if not frames and not kw.get("manifest"):
        raise InputError("give the frames of a sky bracket (or one stokes.nc), e.g. polarsky sky f_000deg.tif ... --out DIR")
    mosaic = strip_mosaic_options(kw)
    geo = geometry_kwargs(kw)
    opts = bracket_kwargs(kw)
    stokes = mosaic_products(frames, mosaic, opts)  # a polarization-mosaic camera's frame(s)
    if stokes is not None:
        opts = {}
    res = run_sky(frames, out_dir, stokes=stokes, solve=solve or (), pictures=pictures, **geo, **opts)
    if as_json:
        print_json(res)
        return 0
    click.echo(f"sun: azimuth {res['sun_azimuth_deg']:.2f} deg, elevation {res['sun_elevation_deg']:.2f} deg "
               f"({res['when']}, time from {res['time_source']}, place from {res['place_source']})")
    o = res["orientation"]
    line = f"camera: yaw {res['yaw_deg']:.2f}, pitch {res['pitch_deg']:.2f}, roll {res['roll_deg']:.2f} deg"
    if o.get("source") == "solved":
        line += " (solved: " + ", ".join(f"{a} {_fmt_sigma(o.get(a + '_sigma_deg'))}" for a in o["solved"]) + " deg)"
    click.echo(line + f"; polarizer {res['polarizer']}")
    if o.get("source") == "solved" and len(o["parameters"]) > 1:
        names, corr = o["parameters"], o["correlation"]
        pairs = [f"{names[i]}/{names[j]} {corr[i][j]:+.2f}" for i in range(len(names)) for j in range(i + 1, len(names))]
        click.echo("correlation of the solved angles: " + ", ".join(pairs))
    for note in o.get("notes", []):
        click.echo("note: " + note)
    dm = res["dolp_max"]
    sig = res["dolp_max_sigma"]
    click.echo(f"dolp_max {dm:.3f} ± {sig if sig is not None else float('nan'):.4f} (pure-air bound "
               f"{res['dolp_max_bound']:.3f}, Young 1980)" if dm is not None else "dolp_max: not determined")
    if res["aolp_rms_deg"] is not None:
        click.echo(f"residuals over {res['sky_pixels']} sky pixels: AoLP rms {res['aolp_rms_deg']:.2f} deg, "
                   f"DoLP rms {res['dolp_rms']:.3f}")
    click.echo(f"wrote {', '.join(res['files'])} to {out_dir}")
    click.echo(res["caution"])
    return 0
