"""EXIF of frames: PNG files are parsed only when they hold an eXIf chunk."""

from __future__ import annotations

import numpy as np

from polarsky.read.exif import read_metadata


def test_png_without_exif_chunk_is_not_parsed_but_one_with_it_is(tmp_path):
    # the eXIf chunk: PNG Specification, Third Edition (W3C), chunk eXIf holds a TIFF-format EXIF block
    import struct
    import zlib

    import cv2

    from polarsky.read.exif import _may_hold_exif

    plain = tmp_path / "plain.png"
    cv2.imwrite(str(plain), np.zeros((4, 4), np.uint8))
    assert not _may_hold_exif(plain) and read_metadata(plain) == {}
    data = plain.read_bytes()
    tiff = b"MM\x00*\x00\x00\x00\x08\x00\x01\x01\x12\x00\x03\x00\x00\x00\x01\x00\x06\x00\x00\x00\x00\x00\x00"
    chunk = struct.pack(">I", len(tiff)) + b"eXIf" + tiff + struct.pack(">I", zlib.crc32(b"eXIf" + tiff))
    at = data.index(b"IEND") - 4  # before IEND: after the image data, as some writers place it
    tagged = tmp_path / "tagged.png"
    tagged.write_bytes(data[:at] + chunk + data[at:])
    assert _may_hold_exif(tagged)
    assert _may_hold_exif(tmp_path / "missing.png")  # unreadable: let the EXIF reader decide
