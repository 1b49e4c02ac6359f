"""Options shared by the sub-commands that read a bracket."""

from __future__ import annotations

import json
import sys

import click

from polarsky.ingest import DEFAULT_MAX_PIXELS

__all__ = ["frames_argument", "bracket_options", "bracket_kwargs", "print_json", "ANGLE_HELP", "apply_options"]

ANGLE_HELP = ("Angles are degrees counter-clockwise from the image's +x axis as displayed. If you give "
              "filter-ring readings instead of absolute angles, results are ring readings on the same scale.")


def frames_argument(f):
    return click.argument("frames", nargs=-1, type=click.Path(dir_okay=False, path_type=str))(f)


_OPTIONS = [
    click.option("--angles", "angles", metavar="A,B,C...", default=None,
                 help="Analyzer angle of each frame in frame order, degrees (e.g. 0,45,90,135). "
                      "Without --angles or --manifest, each file name must hold a '<number>deg' token."),
    click.option("--manifest", type=click.Path(dir_okay=False, path_type=str), default=None,
                 help="CSV with columns file,angle_deg and optional exposure_s (files relative to it)."),
    click.option("--transfer", type=click.Choice(["auto", "linear", "srgb"]), default="auto", show_default=True,
                 help="How pixel values encode light: auto = 8-bit sRGB, 16-bit and raw linear."),
    click.option("--extinction", type=float, default=None, metavar="ER",
                 help="Extinction ratio Tmax/Tmin of the polarizer (default: ideal)."),
    click.option("--angle-offset", "angle_offset_deg", type=float, default=0.0, show_default=True, metavar="DEG",
                 help="Offset added to every analyzer angle (the true zero of your filter ring), degrees."),
    click.option("--align/--no-align", default=False, show_default=True,
                 help="Register frames to the first (sub-pixel, on edges) before the estimate."),
    click.option("--calibration", type=click.Path(dir_okay=False, path_type=str), default=None, metavar="CAL.nc",
                 help="Apply a calibration made by 'polarsky calibrate'."),
    click.option("--gain-e-per-dn", type=float, default=None, help="Sensor gain for the noise model, electrons per file unit."),
    click.option("--read-noise-dn", type=float, default=1.0, show_default=True, help="Read noise, file units."),
    click.option("--noise", type=click.Choice(["auto", "model", "residual"]), default="auto", show_default=True,
                 help="Uncertainties from the noise model or, with >3 frames, from the fit residual."),
    click.option("--max-pixels", type=int, default=DEFAULT_MAX_PIXELS, show_default=True,
                 help="Refuse frames larger than this many pixels."),
]


def apply_options(f, options):
    """Apply click option decorators so that ``--help`` lists them in the given order."""
    for opt in reversed(options):
        f = opt(f)
    return f


def bracket_options(f):
    """Add the bracket-reading and estimate options to a click command."""
    return apply_options(f, _OPTIONS)


def bracket_kwargs(kw: dict) -> dict:
    """Pop the bracket options from click's kwargs into library keyword arguments."""
    out = {
        "angles_deg": kw.pop("angles"),
        "manifest": kw.pop("manifest"),
        "transfer": kw.pop("transfer"),
        "extinction": kw.pop("extinction"),
        "angle_offset_deg": kw.pop("angle_offset_deg"),
        "align": kw.pop("align"),
        "calibration": kw.pop("calibration"),
        "gain_e_per_dn": kw.pop("gain_e_per_dn"),
        "read_noise_dn": kw.pop("read_noise_dn"),
        "noise": kw.pop("noise"),
        "max_pixels": kw.pop("max_pixels"),
    }
    return out


def print_json(obj) -> None:
    sys.stdout.write(json.dumps(obj, allow_nan=False, default=str) + "\n")


def progress_wanted(as_json: bool) -> bool:
    return (not as_json) and sys.stderr.isatty()
