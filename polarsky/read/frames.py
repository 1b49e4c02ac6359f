"""Decoding one frame into native form (shape (C, H, W)), never modified after.

PNG and JPEG are decoded by OpenCV from bytes read by Python (so any file name works),
after a check that the file is complete; TIFF by tifffile (:mod:`polarsky.read.tiff`);
camera raw files by LibRaw (rawpy) with a linear, unscaled decode.  The pixel limit is
checked from the header before decoding, per call; no decoding library's global settings are
changed.

Native values are uint8 or uint16, or float32 for floating-point TIFFs and integer TIFFs
deeper than 16 bits (whose full scale is the format's bit depth, or ``--bit-depth``).  Every
frame is turned as displayed (its EXIF/TIFF Orientation tag, a raw file's LibRaw flip), unless
the caller asks for the stored layout (:mod:`polarsky.read.orientation`).
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
from .orientation import check_orientation, from_libraw_flip, to_display

__all__ = ["Frame", "read_frame", "decode_image"]


@dataclass
class Frame:
    """One decoded frame in native form.

    Attributes
    ----------
    path : Path
    data : ndarray, shape (C, H, W)
        Native values (uint8, uint16, or float32 for float and deeper-than-16-bit TIFFs),
        never modified after reading, in the layout of :attr:`displayed`.
    full_scale : float
        Value of full scale in native units (255, 65535, ``2**bits - 1``, the float scale).
    encoding : str
        ``"srgb"`` or ``"linear"``: the transfer used to decode.
    exposure : float or None
        Relative exposure ``exposure_s * ISO/100 / f_number^2`` from EXIF.
    meta : dict
        What the EXIF said (:func:`polarsky.read.exif.read_metadata`).
    kind : str
        ``"image"`` or ``"raw"``.
    orientation : int
        The file's own Orientation (EXIF/TIFF tag, LibRaw flip for raw files; 1 if none).
    displayed : int
        The orientation applied to :attr:`data` (1 = stored layout).
    bits : int
        Bits per sample of the file (8, 16, 32, ...; 16 for raw files decoded by LibRaw).
    floating : bool
        Floating-point samples (full scale from ``float_scale``; NaN and inf not valid).
    """

    path: Path
    data: np.ndarray
    full_scale: float
    encoding: str
    exposure: float | None = None
    meta: dict = field(default_factory=dict)
    kind: str = "image"
    orientation: int = 1
    displayed: int = 1
    bits: int = 16
    floating: bool = False


def _check_path(path: Path, what: str) -> None:
    problem = path_problem(path)
    if problem is not None:
        raise InputError(f"{what} {path} {problem}; check the path")
    if not path.is_file():
        raise InputError(f"{what} {path} is not a file")


def read_frame(path, *, transfer: str = "auto", max_pixels: int = DEFAULT_MAX_PIXELS, orientation="auto",
               bit_depth: int | None = None, float_scale: float | None = None) -> Frame:
    """Decode one frame into native form, as displayed.

    Parameters
    ----------
    path : path-like
        PNG, TIFF, JPEG (8 or 16 bit, deeper or floating-point TIFF; grey or RGB) or a camera
        raw file.
    transfer : {"auto", "linear", "srgb"}
        ``auto``: 8-bit images sRGB, deeper data and raw files linear.
    max_pixels : int
        Refuse frames with more pixels than this.
    orientation : "auto", int 1..8 or None
        ``auto``: turn the frame as its own tag says; an Orientation value: turn it so;
        ``None``: keep the stored layout.
    bit_depth : int, optional
        Significant bits of integer samples (full scale ``2**bit_depth - 1``); default the
        file's own depth.
    float_scale : float, optional
        Full scale of floating-point samples (default 1.0).

    Returns
    -------
    Frame

    Raises
    ------
    InputError
        Missing, unreadable, truncated or oversized file; values above the full scale.
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
    info: dict = {}
    if kind == "raw":
        data, flip = _read_raw(path)
        info["bits"] = 16
    else:
        data = decode_image(path, info=info)
    if data.shape[1] * data.shape[2] > max_pixels:
        raise InputError(f"frame {path} has {data.shape[1] * data.shape[2]} pixels, more than the limit {max_pixels}; "
                         "raise it with --max-pixels")
    full_scale = _full_scale(path, data, info, bit_depth, float_scale)
    integer = data.dtype.kind in "ui"
    floating = data.dtype.kind == "f"
    encoding = transfer if transfer != "auto" else ("srgb" if (kind == "image" and data.dtype == np.uint8) else "linear")
    meta = read_metadata(path)
    own = from_libraw_flip(flip) if kind == "raw" else int(meta.get("orientation", 1))
    if orientation == "auto":
        shown = own
    elif orientation is None:
        shown = 1
    else:
        shown = check_orientation(orientation)
    if integer and data.dtype not in (np.uint8, np.uint16):
        data = data.astype(np.float32)
    return Frame(path=path, data=to_display(data, shown), full_scale=full_scale, encoding=encoding,
                 exposure=relative_exposure(meta), meta=meta, kind=kind, orientation=own, displayed=shown,
                 bits=int(info.get("bits", 8 * data.dtype.itemsize)), floating=floating)


def _full_scale(path, data, info, bit_depth, float_scale) -> float:
    """Full scale of a frame's native values; InputError when values lie above it."""
    if data.dtype.kind == "f":
        scale = 1.0 if float_scale is None else float(float_scale)
        finite = data[np.isfinite(data)]
        top = float(finite.max()) if finite.size else 0.0
        if top > scale * (1 + 1e-6):
            how = "give its full scale with --float-scale VALUE (the value its writer used for white, e.g. 65535)"
            raise InputError(f"frame {path} is a floating-point image with values up to {top:.6g}, above the assumed "
                             f"full scale {scale:g} ({'0..1' if float_scale is None else '--float-scale'}); {how}")
        return scale
    bits = int(info.get("bits", 8 * data.dtype.itemsize))
    if bit_depth is not None:
        if bit_depth > bits:
            raise InputError(f"--bit-depth {bit_depth} is deeper than frame {path}'s {bits}-bit samples; give at most "
                             f"{bits}")
        full = float(2 ** int(bit_depth) - 1)
        top = int(data.max(initial=0))
        if top > full:
            raise InputError(f"frame {path} holds values up to {top}, above {int(full)} = 2^{bit_depth}-1 of --bit-depth "
                             f"{bit_depth}; give the depth the camera wrote (or leave --bit-depth out)")
        return full
    return float(2 ** bits - 1)


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
        if arr.dtype.kind == "i" and arr.min(initial=0) < 0:
            raise InputError(f"frame {path} holds negative integer values; give unsigned (camera or scanner) data")
        return arr
    if arr.dtype.kind == "f":
        return arr.astype(np.float32, copy=False)
    raise InputError(f"frame {path} has pixel type {arr.dtype}; give 8- or 16-bit images")


def decode_image(path: Path, *, what: str = "frame", info: dict | None = None) -> np.ndarray:
    """Native (C, H, W) values of a PNG, TIFF or JPEG file in its stored layout (RGB order).

    ``info``, when given, receives ``bits`` (bits per sample of the file).
    """
    path = Path(path)
    _check_path(path, what)
    suffix = path.suffix.lower()
    info = {} if info is None else info
    try:
        if suffix in (".tif", ".tiff"):
            from .tiff import read_tiff

            arr, tinfo = read_tiff(path, what=what)
            info.update(tinfo)
        elif suffix in (".png", ".jpg", ".jpeg"):
            import cv2

            data = path.read_bytes()
            check_complete(path, data, what=what)
            arr = cv2.imdecode(np.frombuffer(data, np.uint8), cv2.IMREAD_UNCHANGED | cv2.IMREAD_IGNORE_ORIENTATION)
            if arr is None:
                raise ValueError("the decoder returned nothing")
            if arr.ndim == 3 and arr.shape[2] in (3, 4):
                arr = arr[..., [2, 1, 0] + ([3] if arr.shape[2] == 4 else [])]
            info["bits"] = 8 * arr.dtype.itemsize
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


def _read_raw(path: Path):
    """Linear decode of a camera raw file through LibRaw (rawpy), in the stored layout, and its flip.

    No auto-brightening, gamma (1, 1), unit white balance, camera colour space, LibRaw's
    automatic maximum adjustment off (``adjust_maximum_thr=0``); black and white levels
    applied by LibRaw, so 0 is the black level and 65535 the white level.  ``user_flip=0``
    keeps the sensor layout; the returned LibRaw ``sizes.flip`` says how to display it.
    """
    import rawpy

    try:
        with rawpy.imread(io.BytesIO(path.read_bytes())) as raw:
            flip = int(raw.sizes.flip)
            rgb = raw.postprocess(gamma=(1, 1), no_auto_bright=True, output_bps=16, use_camera_wb=False,
                                  use_auto_wb=False, user_wb=[1.0, 1.0, 1.0, 1.0], output_color=rawpy.ColorSpace.raw,
                                  adjust_maximum_thr=0.0, user_flip=0)
    except Exception as exc:  # noqa: BLE001
        raise InputError(f"raw frame {path} cannot be decoded by LibRaw ({type(exc).__name__}); it may be truncated "
                         "or of a camera LibRaw does not know") from None
    return _to_chw(rgb, path), flip
