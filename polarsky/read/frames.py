"""Decoding one frame into native form (uint8/uint16, shape (C, H, W)), never modified after.

PNG and JPEG are decoded by OpenCV from bytes read by Python (so any file name works),
after a check that the file is complete; TIFF by tifffile; camera raw files by LibRaw
(rawpy) with a linear, unscaled decode.  The pixel limit is checked from the header before
decoding, per call; no decoding library's global settings are changed.
"""

from __future__ import annotations

import io
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .._shared.checks import path_problem
from ..conventions import DEFAULT_MAX_PIXELS, TRANSFERS
from ..errors import InputError
from .exif import read_metadata, relative_exposure
from .formats import check_complete, frame_kind, header_pixels

__all__ = ["Frame", "read_frame", "decode_image"]


@dataclass
class Frame:
    """One decoded frame in native form.

    Attributes
    ----------
    path : Path
    data : ndarray, shape (C, H, W)
        Native values (uint8 or uint16), never modified after reading.
    full_scale : float
        Value of full scale in native units (255, 65535).
    encoding : str
        ``"srgb"`` or ``"linear"``: the transfer used to decode.
    exposure : float or None
        Relative exposure ``exposure_s * ISO/100 / f_number^2`` from EXIF.
    meta : dict
        What the EXIF said (:func:`polarsky.read.exif.read_metadata`).
    kind : str
        ``"image"`` or ``"raw"``.
    """

    path: Path
    data: np.ndarray
    full_scale: float
    encoding: str
    exposure: float | None = None
    meta: dict = field(default_factory=dict)
    kind: str = "image"


def _check_path(path: Path, what: str) -> None:
    problem = path_problem(path)
    if problem is not None:
        raise InputError(f"{what} {path} {problem}; check the path")
    if not path.is_file():
        raise InputError(f"{what} {path} is not a file")


def read_frame(path, *, transfer: str = "auto", max_pixels: int = DEFAULT_MAX_PIXELS) -> Frame:
    """Decode one frame into native form.

    Parameters
    ----------
    path : path-like
        PNG, TIFF, JPEG (8 or 16 bit, grey or RGB) or a camera raw file.
    transfer : {"auto", "linear", "srgb"}
        ``auto``: 8-bit images sRGB, 16-bit images and raw files linear.
    max_pixels : int
        Refuse frames with more pixels than this.

    Returns
    -------
    Frame

    Raises
    ------
    InputError
        Missing, unreadable, truncated or oversized file.
    """
    path = Path(path)
    if transfer not in TRANSFERS:
        raise InputError(f"--transfer {transfer!r} is not one of {', '.join(TRANSFERS)}")
    _check_path(path, "frame")
    kind = frame_kind(path)
    n = header_pixels(path) if kind == "image" else None
    if n is not None and n > max_pixels:
        raise InputError(f"frame {path} has {n} pixels, more than the limit {max_pixels}; raise it with --max-pixels "
                         "or crop the frames")
    if kind == "raw":
        data, full_scale = _read_raw(path), 65535.0
    else:
        data = decode_image(path)
        full_scale = float(np.iinfo(data.dtype).max)
    if data.shape[1] * data.shape[2] > max_pixels:
        raise InputError(f"frame {path} has {data.shape[1] * data.shape[2]} pixels, more than the limit {max_pixels}; "
                         "raise it with --max-pixels")
    encoding = transfer if transfer != "auto" else ("srgb" if (kind == "image" and data.dtype == np.uint8) else "linear")
    meta = read_metadata(path)
    return Frame(path=path, data=data, full_scale=full_scale, encoding=encoding, exposure=relative_exposure(meta),
                 meta=meta, kind=kind)


def _to_chw(arr: np.ndarray, path: Path) -> np.ndarray:
    if arr.ndim == 2:
        arr = arr[None]
    elif arr.ndim == 3:
        c = arr.shape[2]
        if c in (2, 4):  # drop alpha
            arr = arr[..., : c - 1]
        if arr.shape[2] not in (1, 3):
            raise InputError(f"frame {path} has {arr.shape[2]} channels; give grey or RGB images")
        arr = np.ascontiguousarray(np.moveaxis(arr, 2, 0))
    else:
        raise InputError(f"frame {path} has {arr.ndim} dimensions; give a single grey or RGB image")
    if arr.dtype == np.uint8 or arr.dtype == np.uint16:
        return arr
    if arr.dtype.kind in "ui":
        return arr.astype(np.uint16) if arr.max(initial=0) <= 65535 else (arr / (arr.max() / 65535)).astype(np.uint16)
    if arr.dtype.kind == "f":
        return np.round(np.clip(arr, 0, 1) * 65535).astype(np.uint16)
    raise InputError(f"frame {path} has pixel type {arr.dtype}; give 8- or 16-bit images")


def decode_image(path: Path, *, what: str = "frame") -> np.ndarray:
    """Native (C, H, W) values of a PNG, TIFF or JPEG file (RGB order for colour)."""
    path = Path(path)
    _check_path(path, what)
    suffix = path.suffix.lower()
    try:
        if suffix in (".tif", ".tiff"):
            import tifffile

            arr = tifffile.imread(path)
            if arr.ndim == 3 and arr.shape[0] in (3, 4) and arr.shape[2] not in (1, 2, 3, 4):
                arr = np.moveaxis(arr, 0, 2)
        elif suffix in (".png", ".jpg", ".jpeg"):
            import cv2

            data = path.read_bytes()
            check_complete(path, data, what=what)
            arr = cv2.imdecode(np.frombuffer(data, np.uint8), cv2.IMREAD_UNCHANGED | cv2.IMREAD_IGNORE_ORIENTATION)
            if arr is None:
                raise ValueError("the decoder returned nothing")
            if arr.ndim == 3 and arr.shape[2] in (3, 4):
                arr = arr[..., [2, 1, 0] + ([3] if arr.shape[2] == 4 else [])]
        else:
            raise InputError(f"{what} {path} has an unsupported type {suffix or '(none)'!r}; give PNG, TIFF or JPEG")
    except InputError:
        raise
    except PermissionError as exc:
        raise InputError(f"{what} {path} cannot be read ({exc.strerror}); check its permissions") from None
    except Exception as exc:  # noqa: BLE001 - every decoder failure means a bad file
        raise InputError(f"{what} {path} cannot be decoded ({type(exc).__name__}); it may be truncated or not an "
                         "image") from None
    return _to_chw(np.asarray(arr), path)


def _read_raw(path: Path) -> np.ndarray:
    """Linear decode of a camera raw file through LibRaw (rawpy).

    No auto-brightening, gamma (1, 1), unit white balance, camera colour space, LibRaw's
    automatic maximum adjustment off (``adjust_maximum_thr=0``); black and white levels
    applied by LibRaw, so 0 is the black level and 65535 the white level.
    """
    import rawpy

    try:
        with rawpy.imread(io.BytesIO(path.read_bytes())) as raw:
            rgb = raw.postprocess(gamma=(1, 1), no_auto_bright=True, output_bps=16, use_camera_wb=False,
                                  use_auto_wb=False, user_wb=[1.0, 1.0, 1.0, 1.0], output_color=rawpy.ColorSpace.raw,
                                  adjust_maximum_thr=0.0, user_flip=0)
    except Exception as exc:  # noqa: BLE001
        raise InputError(f"raw frame {path} cannot be decoded by LibRaw ({type(exc).__name__}); it may be truncated "
                         "or of a camera LibRaw does not know") from None
    return _to_chw(rgb, path)
