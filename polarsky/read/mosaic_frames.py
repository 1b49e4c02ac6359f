"""Reading raw mosaic frames: 8/16-bit mono PNG/TIFF, 10/12-bit data in 16-bit containers, DNG.

Values are converted to linear [0, 1] of the format's full scale before any arithmetic:
``(v - black) / (white - black)`` with ``white = 2**bit_depth - 1`` (DNG: the file's white
level).  8-bit files are sRGB-encoded by default (IEC 61966-2-1), everything of 10 bits or
more is linear; ``transfer`` overrides.  Pixels at or above 98 % of full scale, or at or
below the black level, are invalid.  A DNG is read through rawpy: its visible raw CFA
values (``raw_image_visible``), with no demosaicing by LibRaw, and its black and white
levels.
"""

from __future__ import annotations

import io
import warnings
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .._shared.checks import path_problem
from ..conventions import SATURATION_FRACTION, SRGB_NOTE, TRANSFERS
from ..core.transfer import srgb_to_linear
from ..errors import InputError, PolarskyWarning
from .formats import MOSAIC_SUFFIXES, check_complete

__all__ = ["MosaicFrames", "read_mosaic_frame", "read_mosaic_stack"]


@dataclass
class MosaicFrames:
    """Averaged, linearised mosaic data.

    Attributes
    ----------
    values : ndarray, shape (H, W), float32
        Mean over the frames, linear, [0, 1] of full scale.
    invalid : ndarray, shape (H, W), bool
        Saturated or at-black in any frame.
    info : dict
        ``files``, ``bit_depth``, ``black_level``, ``white_level``, ``transfer``, ...
    """

    values: np.ndarray
    invalid: np.ndarray
    info: dict = field(default_factory=dict)


def _read_counts(path: Path):
    """Return (counts ndarray (H, W) of integers, black per pixel or None, white or None, kind)."""
    suffix = path.suffix.lower()
    if suffix == ".dng":
        try:
            import rawpy

            with rawpy.imread(io.BytesIO(path.read_bytes())) as rp:
                counts = np.array(rp.raw_image_visible, copy=True)
                blacks = np.asarray(rp.black_level_per_channel, dtype=np.float64)
                colors = np.array(rp.raw_colors_visible, copy=True)
                black = blacks[colors] if blacks.size else None
                white = float(rp.white_level)
        except InputError:
            raise
        except Exception as exc:  # noqa: BLE001 - any decoder failure is a bad file
            raise InputError(f"{path} cannot be read as a DNG ({type(exc).__name__}: {exc}); "
                             "give a raw DNG whose CFA holds the mosaic") from None
        return counts, black, white, "dng"
    try:
        if suffix in (".tif", ".tiff"):
            from .tiff import read_tiff

            counts, _ = read_tiff(path, what="mosaic frame")
        elif suffix == ".png":
            import cv2

            data = path.read_bytes()
            check_complete(path, data)
            counts = cv2.imdecode(np.frombuffer(data, np.uint8), cv2.IMREAD_UNCHANGED)
            if counts is None:
                raise ValueError("unsupported or damaged image")
        else:
            raise InputError(f"mosaic frame {path} has an unsupported type {suffix or '(none)'!r}; give "
                             f"{', '.join(MOSAIC_SUFFIXES)}")
    except InputError:
        raise
    except Exception as exc:  # noqa: BLE001
        raise InputError(f"{path} cannot be read as an image ({type(exc).__name__}); "
                         "give a mono PNG, TIFF or a DNG") from None
    counts = np.asarray(counts)
    if counts.ndim == 3 and counts.shape[-1] in (3, 4):
        raise InputError(f"{path} has {counts.shape[-1]} colour channels; a mosaic frame must be the "
                         "single-channel raw sensor image (save it as mono 8/16-bit PNG or TIFF)")
    if counts.ndim != 2:
        raise InputError(f"{path} has shape {counts.shape}; a mosaic frame must be a 2-D mono image")
    if counts.dtype.kind not in "ui":
        raise InputError(f"{path} holds {counts.dtype} values; give integer sensor counts (8 or 16 bit)")
    return counts, None, None, "image"


def read_mosaic_frame(path, *, bit_depth=None, black_level=None, transfer="auto", hint_bit_depth=True):
    """Read one mosaic frame as linear values in [0, 1] of full scale.

    Parameters
    ----------
    path : str or Path
        PNG/TIFF (8 or 16 bit, mono) or DNG.
    bit_depth : int, optional
        Significant bits of the data (8, 10, 12, 14 or 16); default: the container's (8 or
        16) or, for a DNG, its white level.  Data that are MSB-aligned in a 16-bit container
        (low bits all zero) are shifted down.
    black_level : float, optional
        Black level in sensor counts; default 0 (DNG: the file's per-channel levels).
    transfer : {"auto", "linear", "srgb"}
        ``auto``: 8-bit files are sRGB-encoded, deeper data linear.
    hint_bit_depth : bool
        Warn when 16-bit data never exceed 12 bits and no ``bit_depth`` was given (off for
        dark frames).

    Returns
    -------
    values : ndarray (H, W) float32
    invalid : ndarray (H, W) bool
    info : dict

    Raises
    ------
    InputError
        Unreadable file, colour image, values above the given bit depth, black level at or
        above full scale, bad transfer name.
    """
    path = Path(path)
    if not path.is_file():
        raise InputError(f"mosaic frame {path} {path_problem(path) or 'is not a file'}; check the path")
    counts, black_px, white, kind = _read_counts(path)
    container = 8 if counts.dtype.itemsize == 1 else 16
    shift = 0
    if bit_depth is not None:
        bd = int(bit_depth)
        if bd not in (8, 10, 12, 14, 16) or bd > 8 * counts.dtype.itemsize:
            raise InputError(f"--bit-depth {bit_depth} does not fit {path} ({counts.dtype} data); "
                             f"give one of 8, 10, 12, 14, 16 up to {8 * counts.dtype.itemsize}")
        full = 2 ** bd - 1
        vmax = int(counts.max())
        if vmax > full:
            step = 2 ** (8 * counts.dtype.itemsize - bd)
            if np.all(counts % step == 0):
                shift = 8 * counts.dtype.itemsize - bd
                counts = counts >> shift
            else:
                raise InputError(f"{path} holds values up to {vmax}, above the {bd}-bit range (max {full}); "
                                 "give the sensor's real --bit-depth")
        white = float(full)
    elif white is None:
        bd = container
        white = float(2 ** container - 1)
        vmax = int(counts.max())
        if hint_bit_depth and container == 16 and 0 < vmax < 4096:
            hint = 10 if vmax < 1024 else 12
            warnings.warn(f"{path.name} holds 16-bit values only up to {vmax}: if the sensor delivers {hint}-bit data, "
                          f"give --bit-depth {hint} so that saturated pixels are detected", PolarskyWarning, stacklevel=3)
    else:
        bd = int(np.ceil(np.log2(white + 1)))
    if black_level is not None:
        black = float(black_level)
        black_px = None
    elif black_px is not None:
        black = float(np.mean(black_px))
    else:
        black = 0.0
    if not (0 <= black < white):
        raise InputError(f"black level {black:g} is outside 0..{white:g} for {path}; "
                         "give --black-level in sensor counts below full scale")
    tr = str(transfer).lower()
    if tr not in TRANSFERS:
        raise InputError(f"transfer {transfer!r} is unknown; give auto, linear or srgb")
    if tr == "auto":
        tr = "srgb" if (bd == 8 and kind != "dng") else "linear"
    c = counts.astype(np.float32)
    b = np.float32(black) if black_px is None else black_px.astype(np.float32)
    vals = (c - b) / (np.float32(white) - b)
    sat = vals >= SATURATION_FRACTION
    dark = c <= b
    if tr == "srgb":
        vals = srgb_to_linear(np.clip(vals, 0, 1))
    info = {
        "file": str(path),
        "bit_depth": bd,
        "black_level": black,
        "white_level": white,
        "transfer": tr,
        "msb_shift": shift,
        "format": kind,
        "saturated": int(sat.sum()),
        "at_black": int(dark.sum()),
    }
    return vals.astype(np.float32, copy=False), sat | dark, info


def read_mosaic_stack(frames, *, bit_depth=None, black_level=None, transfer="auto"):
    """Read several mosaic frames of one scene and average them (noise reduction).

    A pixel is invalid if it is saturated or at black in any frame.

    Returns
    -------
    MosaicFrames
    """
    frames = [Path(f) for f in frames]
    if not frames:
        raise InputError("no mosaic frames given; give at least one FRAME")
    acc = None
    invalid = None
    infos = []
    for f in frames:
        v, inv, info = read_mosaic_frame(f, bit_depth=bit_depth, black_level=black_level, transfer=transfer)
        if acc is None:
            acc = v.astype(np.float32, copy=True)
            invalid = inv
        else:
            if v.shape != acc.shape:
                raise InputError(f"{f} is {v.shape[1]}x{v.shape[0]} pixels but {frames[0]} is "
                                 f"{acc.shape[1]}x{acc.shape[0]}; give frames of one sensor")
            acc += v
            invalid |= inv
        infos.append(info)
        n_bad = info["saturated"] + info["at_black"]
        if n_bad:
            warnings.warn(f"{info['saturated']} pixels saturated and {info['at_black']} at the black level "
                          f"in {f.name} were masked", PolarskyWarning, stacklevel=2)
    acc /= np.float32(len(frames))
    first = infos[0]
    if str(transfer).lower() == "auto" and first["transfer"] == "srgb":
        warnings.warn(SRGB_NOTE, PolarskyWarning, stacklevel=2)
    from .exif import read_metadata

    tag = read_metadata(frames[0]).get("orientation", 1)
    if tag != 1:
        warnings.warn(f"{frames[0].name} says it is shown with orientation {tag}, but mosaic frames are decoded and "
                      "mapped in the sensor's own layout: the maps and their angles are on the sensor's layout, not "
                      "the displayed one", PolarskyWarning, stacklevel=2)
    info = {
        "files": [i["file"] for i in infos],
        "n_frames": len(frames),
        "bit_depth": first["bit_depth"],
        "black_level": first["black_level"],
        "white_level": first["white_level"],
        "transfer": first["transfer"],
        "format": first["format"],
        "masked_pixels": int(invalid.sum()),
        "saturated_px": [i["saturated"] for i in infos],
        "black_px": [i["at_black"] for i in infos],
    }
    return MosaicFrames(acc, invalid, info)
