"""Frame files written the way cameras, phones and raw converters write them.

EXIF blocks are made by a general-purpose library (Pillow's ``Image.Exif``), JPEG pixels by
OpenCV's real JPEG encoder (the EXIF APP1 segment put right after the start-of-image marker,
where cameras put it, ITU-T T.81 / Exif 2.32 section 4.5.4), PNG eXIf chunks by Pillow,
TIFF and DNG tags by tifffile.
"""

from __future__ import annotations

import struct
from fractions import Fraction
from pathlib import Path

import numpy as np

#: Inverse of each display orientation: the stored frame whose display is a given picture.
INVERSE = {1: 1, 2: 2, 3: 3, 4: 4, 5: 5, 6: 8, 7: 7, 8: 6}


def stored_from_displayed(display: np.ndarray, orientation: int) -> np.ndarray:
    """The stored (sensor-layout) frame (..., H, W) a camera writes for ``display`` with ``orientation``."""
    from polarsky.read.orientation import to_display

    return to_display(display, INVERSE[orientation])


def exif_block(*, orientation=None, exposure_s=None, iso=None, f_number=None, where="exif") -> bytes:
    """EXIF bytes (``Exif\\0\\0`` + TIFF structure) from Pillow; exposure tags in the Exif
    sub-IFD (``where="exif"``, as cameras write them) or in IFD0 (``"ifd0"``, TIFF/EP)."""
    from PIL import Image, TiffImagePlugin

    ex = Image.Exif()
    if orientation is not None:
        ex[0x0112] = int(orientation)
    target = ex.get_ifd(0x8769) if where == "exif" else ex
    if exposure_s is not None:
        t = Fraction(exposure_s).limit_denominator(100000)
        target[0x829A] = TiffImagePlugin.IFDRational(t.numerator, t.denominator)
    if iso is not None:
        target[0x8827] = int(iso)
    if f_number is not None:
        target[0x829D] = TiffImagePlugin.IFDRational(int(round(f_number * 10)), 10)
    return ex.tobytes()


def write_jpeg(path, chw_uint8: np.ndarray, *, quality=95, **exif) -> Path:
    """OpenCV-encoded JPEG of (C, H, W) uint8 (RGB or grey) with an EXIF APP1 segment."""
    import cv2

    a = chw_uint8[0] if chw_uint8.shape[0] == 1 else np.moveaxis(chw_uint8, 0, -1)[..., ::-1]
    ok, buf = cv2.imencode(".jpg", np.ascontiguousarray(a), [cv2.IMWRITE_JPEG_QUALITY, quality])
    assert ok
    data = buf.tobytes()
    if exif:
        payload = exif_block(**exif)
        data = data[:2] + b"\xff\xe1" + struct.pack(">H", len(payload) + 2) + payload + data[2:]
    Path(path).write_bytes(data)
    return Path(path)


def write_png_exif(path, chw: np.ndarray, *, orientation: int) -> Path:
    """A PNG (8 or 16-bit grey) whose eXIf chunk holds the Orientation, written by Pillow."""
    from PIL import Image

    a = chw[0]
    im = Image.fromarray(np.ascontiguousarray(a))  # uint8 -> "L", uint16 -> "I;16"
    ex = Image.Exif()
    ex[0x0112] = int(orientation)
    im.save(path, exif=ex)
    return Path(path)


def write_tiff(path, chw: np.ndarray, *, orientation=None, photometric=None, extratags=()) -> Path:
    """A TIFF of (C, H, W) data (any dtype) with an Orientation tag (274) as cameras write it."""
    import tifffile

    a = chw[0] if chw.shape[0] == 1 else np.moveaxis(chw, 0, -1)
    tags = list(extratags)
    if orientation is not None:
        tags.append((274, "H", 1, int(orientation), True))
    tifffile.imwrite(path, np.ascontiguousarray(a), photometric=photometric, extratags=tags)
    return Path(path)


def write_dng(path, cfa: np.ndarray, *, orientation=1, exposure_s=None, black=0, white=65535) -> Path:
    """A Bayer DNG (RGGB) written by tifffile, with the Orientation and ExposureTime in IFD0 (TIFF/EP)."""
    import tifffile

    tags = [(33421, "H", 2, (2, 2)), (33422, "B", 4, (0, 1, 1, 2)), (50706, "B", 4, (1, 4, 0, 0)),
            (50714, "H", 1, black), (50717, "H", 1, white), (274, "H", 1, int(orientation))]
    if exposure_s is not None:
        t = Fraction(exposure_s).limit_denominator(100000)
        tags.append((33434, "2I", 1, (t.numerator, t.denominator)))
    tifffile.imwrite(path, np.asarray(cfa, dtype=np.uint16), photometric="cfa", extratags=tags)
    return Path(path)
