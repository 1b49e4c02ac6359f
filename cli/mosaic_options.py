"""Command-line options for polarization-mosaic cameras, shared by commands that read frames.

``@mosaic_options`` adds ``--mosaic --mosaic-colour --demosaic --bit-depth --black-level``
to a click command; :func:`mosaic_dataset_from_options` turns the parsed values into the
Stokes Dataset, or returns ``None`` when ``--mosaic`` was not given (a bracket).
"""

from __future__ import annotations


import click

from polarsky.errors import InputError
from polarsky.mosaic.methods import DEMOSAIC_METHODS
from polarsky.mosaic.layout import BAYER_ORDERS

from .common import apply_options

__all__ = ["mosaic_options", "mosaic_dataset_from_options", "mosaic_run_from_options", "strip_mosaic_options",
           "MOSAIC_OPTION_NAMES"]

MOSAIC_OPTION_NAMES = ("mosaic", "mosaic_colour", "demosaic", "bit_depth", "black_level")

_OPTIONS = [
    click.option("--mosaic", default=None, metavar="CELL",
                 help="Frames come from a polarization-mosaic camera whose 2x2 cell holds these micro-polarizer "
                      "angles, rows separated by ';', e.g. \"90,45;135,0\" (degrees, image convention: from +x, "
                      "counter-clockwise as displayed). Each FRAME is then one raw sensor image; several are averaged."),
    click.option("--mosaic-colour", default=None, type=click.Choice(BAYER_ORDERS, case_sensitive=False),
                 help="Colour mosaic sensor: Bayer order of the 2x2 polarizer cells (colour repeats every 4x4 "
                      "pixels); gives R,G,B channels."),
    click.option("--demosaic", default="bilinear", show_default=True,
                 type=click.Choice(list(DEMOSAIC_METHODS), case_sensitive=False),
                 help="Mosaic decoding: superpixel (half resolution), bilinear, or newton (edge-directed "
                      "Newton-polynomial interpolation after Li et al. 2019)."),
    click.option("--bit-depth", default=None, type=click.Choice(["8", "10", "12", "14", "16"]),
                 help="Significant bits of raw data stored in 16-bit containers (default: the container's)."),
    click.option("--black-level", default=None, type=float, metavar="COUNTS",
                 help="Sensor black level in raw counts (default 0; DNG: the file's)."),
]


def mosaic_options(func):
    """Click decorator adding the mosaic options (keyword arguments ``mosaic``, ``mosaic_colour``,
    ``demosaic``, ``bit_depth``, ``black_level``)."""
    return apply_options(func, _OPTIONS)


def mosaic_dataset_from_options(frames, options, *, calibration=None, transfer="auto", max_pixels=None,
                                bracket_values=None):
    """Stokes Dataset for mosaic frames, or ``None`` when ``--mosaic`` is absent.

    Parameters
    ----------
    frames : sequence of path
    options : dict
        The command's keyword arguments (at least the mosaic option names).
    calibration, transfer, max_pixels
        Passed on to :func:`polarsky.mosaic.stokes_from_mosaic_files`.
    bracket_values : dict, optional
        Library keyword arguments of the bracket options (``angles_deg``, ``manifest``,
        ``extinction``, ``angle_offset_deg``, ``align``); any that is set together with
        ``--mosaic`` is an error.

    Raises
    ------
    InputError
        Mosaic-only options without ``--mosaic``, bracket options with it, or any bad input.
    """
    mosaic = options.get("mosaic")
    if mosaic is None:
        extra = [f"--{k.replace('_', '-')}" for k in ("mosaic_colour", "bit_depth", "black_level")
                 if options.get(k) is not None]
        if extra:
            raise InputError(f"{', '.join(extra)} apply only to mosaic frames; add --mosaic CELL (e.g. \"90,45;135,0\") "
                             "or drop them")
        return None
    _check_bracket_only(bracket_values)
    from polarsky.mosaic import stokes_from_mosaic_files

    bd = options.get("bit_depth")
    return stokes_from_mosaic_files(
        list(frames),
        mosaic=mosaic,
        mosaic_colour=options.get("mosaic_colour"),
        demosaic=options.get("demosaic") or "bilinear",
        bit_depth=None if bd is None else int(bd),
        black_level=options.get("black_level"),
        calibration=calibration,
        transfer=transfer,
        max_pixels=max_pixels,
    )


def strip_mosaic_options(kwargs):
    """Remove the mosaic options from a command's kwargs (returns them as a dict)."""
    return {k: kwargs.pop(k, None) for k in MOSAIC_OPTION_NAMES}




#: Bracket-only library options that make no sense with --mosaic (name on the command line, unset value).
_BRACKET_ONLY = {"angles_deg": ("--angles", None), "manifest": ("--manifest", None),
                 "extinction": ("--extinction", None), "angle_offset_deg": ("--angle-offset", 0.0),
                 "align": ("--align", False)}


def _check_bracket_only(bracket_opts):
    for key, (flag, unset) in _BRACKET_ONLY.items():
        v = (bracket_opts or {}).get(key, unset)
        if v not in (unset, None):
            raise InputError(f"{flag} describes a bracket of frames and cannot be used with --mosaic "
                             f"(the mosaic fixes the analyzer angles); drop {flag}")


def mosaic_run_from_options(frames, out_dir, options, *, bracket_opts=None):
    """Write the Stokes outputs of mosaic frames (as ``polarsky stokes`` does for brackets).

    Parameters
    ----------
    frames : sequence of path
    out_dir : path
    options : dict
        The mosaic options (see :func:`strip_mosaic_options`).
    bracket_opts : dict, optional
        The library keyword arguments of the bracket options (``cli.common.bracket_kwargs``);
        ``transfer``, ``calibration``, ``max_pixels`` and the noise options are used, the
        bracket-only ones must be unset.

    Returns
    -------
    dict or None
        The summary, or ``None`` when ``--mosaic`` is absent (nothing done).
    """
    if options.get("mosaic") is None:
        mosaic_dataset_from_options(frames, options)  # raises if mosaic-only options were given
        return None
    b = dict(bracket_opts or {})
    _check_bracket_only(b)
    from polarsky.mosaic import run_mosaic_stokes
    from polarsky.pipeline import NoiseModel

    noise = None
    if any(k in b for k in ("gain_e_per_dn", "read_noise_dn", "noise")):
        noise = NoiseModel(gain_e_per_dn=b.get("gain_e_per_dn"), read_noise_dn=float(b.get("read_noise_dn") or 1.0),
                           source=b.get("noise") or "auto")
    bd = options.get("bit_depth")
    return run_mosaic_stokes(
        list(frames), out_dir,
        mosaic=options["mosaic"], mosaic_colour=options.get("mosaic_colour"),
        demosaic=options.get("demosaic") or "bilinear", bit_depth=None if bd is None else int(bd),
        black_level=options.get("black_level"), calibration=b.get("calibration"),
        transfer=b.get("transfer") or "auto", max_pixels=b.get("max_pixels"), noise=noise,
    )
