"""The file formats polarsky reads, and cheap checks of their headers.

One list of formats serves every command and the batch discovery, so a file that one path
reads is never skipped or rejected by another.  The pixel limit (``--max-pixels``) is checked
from the header before anything is decoded; nothing here changes a decoding library's
global settings.
"""

from __future__ import annotations

import struct
import zlib
from pathlib import Path

from ..errors import InputError

__all__ = ["IMAGE_SUFFIXES", "RAW_SUFFIXES", "FRAME_SUFFIXES", "MOSAIC_SUFFIXES", "STOKES_SUFFIXES",
           "is_frame", "frame_kind", "header_pixels", "check_complete", "file_in_folder"]

#: Image files (8/16-bit grey or RGB; TIFF also float).
IMAGE_SUFFIXES = (".png", ".tif", ".tiff", ".jpg", ".jpeg")
#: Camera raw files decoded through LibRaw.
RAW_SUFFIXES = (".dng", ".cr2", ".cr3", ".nef", ".nrw", ".arw", ".srf", ".sr2", ".raf", ".orf", ".rw2", ".pef",
                ".srw", ".raw", ".rwl", ".iiq", ".3fr", ".erf", ".kdc", ".mrw", ".x3f")
#: Every frame of a bracket.
FRAME_SUFFIXES = IMAGE_SUFFIXES + RAW_SUFFIXES
#: Raw frames of a polarization-mosaic camera (mono PNG/TIFF holding sensor counts, or DNG).
MOSAIC_SUFFIXES = (".png", ".tif", ".tiff", ".dng")
#: A Stokes result written by ``polarsky stokes``.
STOKES_SUFFIXES = (".nc",)


def is_frame(path) -> bool:
    """Whether ``path`` has the suffix of a frame polarsky reads (case-insensitive)."""
    return Path(path).suffix.lower() in FRAME_SUFFIXES


def frame_kind(path) -> str:
    """``"image"`` or ``"raw"``; InputError naming the file for any other suffix."""
    suffix = Path(path).suffix.lower()
    if suffix in IMAGE_SUFFIXES:
        return "image"
    if suffix in RAW_SUFFIXES:
        return "raw"
    raise InputError(f"frame {path} has an unsupported type {suffix or '(none)'!r}; give PNG, TIFF, JPEG or a camera "
                     "raw file")


def file_in_folder(path, file_name: str, *, what: str, maker: str) -> Path:
    """The file an option names: ``path`` itself, or ``file_name`` inside the folder ``path``.

    InputError naming ``what`` (``"calibration"``) and the command that makes it when missing.
    """
    p = Path(path)
    if p.is_dir():
        p = p / file_name
    if not p.is_file():
        from .._shared.checks import path_problem

        raise InputError(f"{what} {path} {path_problem(p) or 'is not a file'}; give the {file_name} (or the folder) "
                         f"written by '{maker}'")
    return p


def _png_size(head: bytes):
    if head[:8] != b"\x89PNG\r\n\x1a\n" or head[12:16] != b"IHDR":
        return None
    w, h = struct.unpack(">II", head[16:24])
    return w, h


def _jpeg_size(fh):
    fh.seek(0)
    if fh.read(2) != b"\xff\xd8":
        return None
    while True:
        b = fh.read(1)
        while b and b != b"\xff":
            b = fh.read(1)
        while b == b"\xff":
            b = fh.read(1)
        if not b:
            return None
        marker = b[0]
        if marker in (0xD8, 0x01) or 0xD0 <= marker <= 0xD7:
            continue
        seg = fh.read(2)
        if len(seg) < 2:
            return None
        length = struct.unpack(">H", seg)[0]
        if marker in (0xC0, 0xC1, 0xC2, 0xC3, 0xC5, 0xC6, 0xC7, 0xC9, 0xCA, 0xCB, 0xCD, 0xCE, 0xCF):
            data = fh.read(5)
            if len(data) < 5:
                return None
            h, w = struct.unpack(">HH", data[1:5])
            return w, h
        fh.seek(length - 2, 1)


def header_pixels(path) -> int | None:
    """Pixel count (width x height) read from the file header, or None when unknown.

    PNG (IHDR), JPEG (start of frame) and TIFF (first page) are read without decoding.
    """
    path = Path(path)
    suffix = path.suffix.lower()
    try:
        if suffix in (".tif", ".tiff"):
            import tifffile

            with tifffile.TiffFile(path) as tf:
                shape = tf.pages[0].shape
            return int(shape[0]) * int(shape[1]) if len(shape) >= 2 else None
        with open(path, "rb") as fh:
            head = fh.read(24)
            size = _png_size(head) if suffix == ".png" else (_jpeg_size(fh) if suffix in (".jpg", ".jpeg") else None)
        return None if size is None else int(size[0]) * int(size[1])
    except Exception:  # noqa: BLE001 - the decoder reports the real problem
        return None


def check_complete(path, data: bytes, *, what: str = "frame") -> None:
    """Refuse a truncated or damaged PNG or JPEG before decoding it.

    PNG: every chunk's CRC (ISO/IEC 15948, section 5.3) and the IEND chunk; JPEG: the end of
    image marker (ITU-T T.81, B.2.1).  Decoders fill the missing part of a truncated file
    with grey and carry on, which would give a silently wrong result.
    """
    suffix = Path(path).suffix.lower()
    bad = None
    if suffix == ".png":
        pos = 8
        seen_end = False
        if data[:8] != b"\x89PNG\r\n\x1a\n":
            bad = "it does not start with the PNG signature"
        while bad is None and pos + 8 <= len(data):
            length, ctype = struct.unpack(">I4s", data[pos:pos + 8])
            end = pos + 12 + length
            if end > len(data):
                bad = f"chunk {ctype.decode('latin-1')!r} is cut short"
                break
            crc = struct.unpack(">I", data[end - 4:end])[0]
            if zlib.crc32(data[pos + 4:end - 4]) & 0xFFFFFFFF != crc:
                bad = f"chunk {ctype.decode('latin-1')!r} fails its CRC check"
                break
            pos = end
            if ctype == b"IEND":
                seen_end = True
                break
        if bad is None and not seen_end:
            bad = "it has no IEND chunk (truncated)"
    elif suffix in (".jpg", ".jpeg"):
        tail = data[-64:].rstrip(b"\x00")
        if data[:2] != b"\xff\xd8":
            bad = "it does not start with a JPEG marker"
        elif not tail.endswith(b"\xff\xd9"):
            bad = "it has no end-of-image marker (truncated)"
    if bad:
        fix = "copy the file again from the camera or card" if what == "frame" else "save the image again"
        raise InputError(f"{what} {path} cannot be decoded: {bad}; {fix}")
