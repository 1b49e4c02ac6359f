"""``polarsky calibrate flat``: per-pixel bench calibration of a polarization-mosaic sensor."""

from __future__ import annotations

import click

from polarsky.write.jsonio import print_json

from .options import frames_command, pop_settings

GROUPS = ("read", "mosaic", "calibrate")
EXCLUDE = ("manifest", "max_pixels", "demosaic", "bracket_size", "pose", "reference_dolp_max", "per_position",
           # bracket-only reading options and the response-curve command's own
           "orientation", "angle_frame", "exposure", "response", "float_scale", "exposures", "response_method")


@frames_command("flat", groups=GROUPS, exclude=EXCLUDE, short_help='Per-pixel calibration of a mosaic sensor from bench frames.',
                out_help='Folder for calibration.nc and calibration.json (replaced whole).',
                epilog="")
def command(frames, out_dir, as_json, **kw):
    """Fit each pixel's gain, diattenuation and orientation from bench FRAME... .

    Shoot a uniform, unpolarized source (integrating sphere or diffuser) through a reference
    linear polarizer turned to known angles (--angles, in frame order, e.g. 0:180:10): at
    least 3, typically 12 to 36 spread over 180 degrees, one FRAME per angle. If the angles
    are the reference's ring readings, the calibrated angles are on that ring's scale.
    """
    from polarsky.tasks.calibrate_flat import run_calibrate_flat

    summary = run_calibrate_flat(list(frames), out_dir, **pop_settings(kw, *GROUPS, exclude=EXCLUDE))
    if as_json:
        print_json(summary)
        return 0
    h, w = summary["sensor_shape"]
    click.echo(f"flat calibration of a {w}x{h} mosaic ({summary['mosaic']}, colour {summary['mosaic_color'] or 'none'}) "
               f"from {summary['n_frames']} frames and {summary['n_dark_frames']} dark frames")
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
               f"{summary['saturated_pixels']}; median orientation uncertainty "
               f"{summary['median_pixel_angle_sigma_deg']} deg")
    click.echo(f"wrote {summary['calibration_file']}")
    return 0
