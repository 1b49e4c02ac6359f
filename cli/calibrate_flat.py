"""``polarsky calibrate flat``: per-pixel bench calibration of a polarization-mosaic sensor."""

from __future__ import annotations

import json
from pathlib import Path

import click
import numpy as np

from polarsky.errors import InputError
from polarsky.mosaic.layout import BAYER_ORDERS

__all__ = ["command", "parse_angle_list"]


def parse_angle_list(text) -> list:
    """Parse ``"0,15,30"`` or a range ``"0:180:5"`` (start:stop:step, stop excluded), degrees."""
    s = str(text).strip()
    try:
        if ":" in s:
            parts = [float(v) for v in s.split(":")]
            if len(parts) != 3 or parts[2] <= 0:
                raise ValueError
            return [float(v) for v in np.arange(parts[0], parts[1] - 1e-9, parts[2])]
        return [float(v) for v in s.replace(";", ",").split(",") if v.strip()]
    except ValueError:
        raise InputError(f"--angles {text!r} is not a list of numbers; give e.g. 0,15,30,... or 0:180:15") from None


@click.command(name="flat")
@click.argument("frames", nargs=-1, required=True, type=click.Path(dir_okay=False))
@click.option("--angles", required=True, metavar="LIST",
              help="Reference-polarizer angle of each FRAME in degrees (image convention), in the frames' order: "
                   "0,15,30,... or start:stop:step such as 0:180:10. If these are filter-ring readings, the "
                   "calibrated angles are on that ring's scale.")
@click.option("--out", "out", required=True, type=click.Path(dir_okay=False), help="Calibration file to write (CAL.nc).")
@click.option("--mosaic", required=True, metavar="CELL", help="Nominal 2x2 micro-polarizer angles, e.g. \"90,45;135,0\".")
@click.option("--mosaic-colour", default=None, type=click.Choice(BAYER_ORDERS, case_sensitive=False),
              help="Bayer order of the polarizer cells on colour sensors.")
@click.option("--dark", "dark", multiple=True, type=click.Path(dir_okay=False),
              help="Dark frame (lens capped, same exposure); repeat for several. Averaged and subtracted; finds hot pixels.")
@click.option("--bit-depth", default=None, type=click.Choice(["8", "10", "12", "14", "16"]),
              help="Significant bits of data in 16-bit containers.")
@click.option("--black-level", default=None, type=float, metavar="COUNTS", help="Black level in raw counts.")
@click.option("--transfer", default="auto", show_default=True, type=click.Choice(["auto", "linear", "srgb"]),
              help="Transfer function of the files (auto: 8-bit sRGB, deeper linear).")
@click.option("--json", "as_json", is_flag=True, help="Print the summary as one JSON object.")
def command(frames, angles, out, mosaic, mosaic_colour, dark, bit_depth, black_level, transfer, as_json):
    """Fit each pixel's gain, diattenuation and orientation from bench FRAMES.

    Shoot a uniform, unpolarized source (integrating sphere or diffuser) through a reference
    linear polarizer turned to known angles: at least 3, typically 12 to 36 spread over 180
    degrees, one FRAME per angle. Writes CAL.nc for 'polarsky stokes --mosaic ... --calibration CAL.nc'.
    """
    from polarsky.calibration import write_calibration
    from polarsky.mosaic.flatcal import fit_flat_files, flat_calibration, flat_summary

    angle_list = parse_angle_list(angles)
    fit = fit_flat_files(frames, angle_list, mosaic=mosaic, mosaic_colour=mosaic_colour, dark=list(dark),
                         bit_depth=None if bit_depth is None else int(bit_depth), black_level=black_level,
                         transfer=transfer)
    summary = flat_summary(fit)
    cal = flat_calibration(fit, summary)
    path = write_calibration(out, cal, inputs=list(frames) + list(dark),
                             method="per-pixel analysis-vector fit (calibration-matrix approach, Powell & Gruev 2013, "
                                    "Opt. Express 21(18) 21039)")
    summary["out"] = str(Path(path))
    if as_json:
        click.echo(json.dumps(summary))
        return 0
    click.echo(f"flat calibration of a {summary['sensor_shape'][1]}x{summary['sensor_shape'][0]} mosaic "
               f"({summary['mosaic']}, colour {summary['mosaic_colour']}) from {summary['n_frames']} frames"
               f" and {summary['n_dark_frames']} dark frames")
    click.echo(f"{'pos':>3} {'col':>3} {'nominal':>7} {'err mean':>8} {'err rms':>7} {'err p5..p95':>15} "
               f"{'ER p50':>7} {'ER p5..p95':>15} {'gain sd':>7}")
    for p in summary["positions"]:
        if "angle_error_rms_deg" not in p:
            continue
        lo, _, hi = p["angle_error_p05_p50_p95_deg"]
        elo, emed, ehi = (float("inf") if v is None else v for v in p["extinction_ratio_p05_p50_p95"])
        click.echo(f"{p['position']:>3} {p.get('colour', '-'):>3} {p['nominal_angle_deg']:>7g} "
                   f"{p['angle_error_mean_deg']:>8.3f} {p['angle_error_rms_deg']:>7.3f} {lo:>7.2f}..{hi:<7.2f} "
                   f"{emed:>7.1f} {elo:>7.1f}..{ehi:<7.1f} {p['gain_std']:>7.4f}")
    click.echo(f"dead pixels {summary['dead_pixels']}, hot pixels {summary['hot_pixels']}, saturated "
               f"{summary['saturated_pixels']}; median orientation uncertainty {summary['median_sigma_angle_deg']} deg")
    click.echo(f"wrote {path}")
    return 0
