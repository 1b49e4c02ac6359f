"""Mosaic frames -> Stokes Dataset (the mosaic counterpart of the bracket pipeline)."""

from __future__ import annotations

import json

import numpy as np

from .._version import __version__
from ..errors import InputError
from .decode import decode_mosaic
from .demosaic import validate_method
from .io import read_mosaic_stack
from .layout import check_frame_shape, parse_mosaic

__all__ = ["stokes_from_mosaic_files", "stokes_from_mosaic_values", "ANGLE_CONVENTION"]

ANGLE_CONVENTION = ("degrees in the image plane from the image +x axis (to the right), "
                    "counter-clockwise as seen on the displayed image; AoLP in [0, 180)")


def _core():
    try:
        from ..pipeline import estimate_block
    except ImportError:
        from ._fallback import estimate_block
    try:
        from ..dataset import stokes_dataset
    except ImportError:
        from ._fallback import stokes_dataset
    return estimate_block, stokes_dataset


def _load_calibration(calibration):
    if calibration is None:
        return None
    from ..calibration import Calibration, read_calibration

    return calibration if isinstance(calibration, Calibration) else read_calibration(calibration)


def stokes_from_mosaic_values(values, invalid=None, *, mosaic, mosaic_colour=None, demosaic="bilinear",
                              calibration=None, attrs=None):
    """Stokes Dataset from linear mosaic values already in memory (see :func:`stokes_from_mosaic_files`)."""
    layout = parse_mosaic(mosaic, mosaic_colour)
    method = validate_method(demosaic)
    values = np.asarray(values, dtype=np.float32)
    check_frame_shape(values.shape, layout)
    cal = _load_calibration(calibration)
    dec = decode_mosaic(values, invalid, layout, method.name, cal)
    estimate_block, stokes_dataset = _core()
    products = estimate_block(dec["intensities"], dec["valid"], dec["w"], solve=dec["solve"])
    cal_text = "none"
    if cal is not None:
        parts = []
        if cal.pixel:
            parts.append("per-pixel analysis vectors (flat)")
        if cal.angle_offset_deg is not None or cal.diattenuation is not None:
            parts.append("per-position angle offsets/diattenuation")
        cal_text = f"{cal.kind} calibration {cal.source or ''}: {', '.join(parts) or 'no corrections'}".strip()
    a = {
        "software_version": __version__,
        "source": "polarization mosaic",
        "mosaic": layout.text,
        "mosaic_colour": layout.colour or "none",
        "demosaic": method.name,
        "demosaic_reference": method.reference,
        "output_pixel_size": method.scale,
        "analyzer_angles_deg": json.dumps(list(layout.angles_deg)),
        "analyzer_positions": "row-major 2x2 cell positions 0..3",
        "polarizer": "sensor",
        "calibration": cal_text,
        "calibration_per_pixel": int(bool(dec["per_pixel"])),
        "calibration_file": (cal.source if cal is not None else ""),
        "angle_convention": ANGLE_CONVENTION,
    }
    if method.scale == 2:
        a["grid"] = "output pixel (j, i) covers sensor pixels 2j..2j+1, 2i..2i+1 (centre at 2i+0.5, 2j+0.5)"
    a.update(attrs or {})
    return stokes_dataset(products, channels=dec["channels"], attrs=a)


def stokes_from_mosaic_files(frames, *, mosaic, mosaic_colour=None, demosaic="bilinear", bit_depth=None,
                             black_level=None, calibration=None, transfer="auto", max_pixels=None):
    """Stokes maps from one or several raw frames of a polarization-mosaic camera.

    Parameters
    ----------
    frames : sequence of path
        Mosaic frames of one scene (8/16-bit mono PNG/TIFF, or DNG); several are averaged
        before decoding.
    mosaic : str
        2x2 cell of micro-polarizer angles, rows separated by ``;``, e.g. ``"90,45;135,0"``
        (degrees, image convention).
    mosaic_colour : str, optional
        Bayer order of the polarizer cells on colour sensors (RGGB, BGGR, GRBG, GBRG).
    demosaic : str
        ``superpixel``, ``bilinear`` or ``newton`` (see ``DEMOSAIC_METHODS``).
    bit_depth : int, optional
        Significant bits of the data in 16-bit containers (10, 12, ...).
    black_level : float, optional
        Black level in sensor counts.
    calibration : path or Calibration, optional
        A flat (per-pixel) and/or sky (per-position) calibration.
    transfer : {"auto", "linear", "srgb"}
    max_pixels : int, optional
        Refuse frames with more sensor pixels than this (memory guard).

    Returns
    -------
    xarray.Dataset
        Dims (channel, y, x) with S0, S1, S2, dolp, dolp_unbiased, aolp, sigma_dolp,
        sigma_aolp, residual, valid; attrs record the mosaic, method and calibration.

    Raises
    ------
    InputError
        Bad mosaic string, frame size not a multiple of the cell, unreadable frames,
        calibration for another sensor or layout.
    """
    layout = parse_mosaic(mosaic, mosaic_colour)
    validate_method(demosaic)
    stack = read_mosaic_stack(frames, bit_depth=bit_depth, black_level=black_level, transfer=transfer)
    check_frame_shape(stack.values.shape, layout, source=str(stack.info["files"][0]))
    if max_pixels is not None and stack.values.size > int(max_pixels):
        h, w = stack.values.shape
        raise InputError(f"mosaic frames are {w}x{h} = {stack.values.size} pixels, above --max-pixels {int(max_pixels)}; "
                         "raise --max-pixels or crop the frames to a multiple of the cell")
    info = stack.info
    attrs = {
        "input_files": json.dumps(info["files"]),
        "n_frames_averaged": info["n_frames"],
        "transfer": info["transfer"],
        "bit_depth": info["bit_depth"],
        "black_level": info["black_level"],
        "white_level": info["white_level"],
        "masked_raw_pixels": info["masked_pixels"],
    }
    return stokes_from_mosaic_values(stack.values, stack.invalid, mosaic=layout, mosaic_colour=mosaic_colour,
                                     demosaic=demosaic, calibration=calibration, attrs=attrs)
