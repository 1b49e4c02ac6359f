"""Camera metadata from EXIF: one reader for exposure, capture time, place and lens.

Cameras write ExposureTime, ISO and FNumber in the Exif sub-IFD, TIFF/EP writers in IFD0;
both are read.  Every command and the batch discovery use :func:`read_metadata`, so a file's
capture time or exposure means the same everywhere.

References
----------
.. [1] CIPA DC-008-2019 / JEITA CP-3451E, *Exchangeable image file format for digital still
   cameras: Exif Version 2.32* (ExposureTime, FNumber, PhotographicSensitivity,
   DateTimeOriginal, SubSecTimeOriginal, OffsetTimeOriginal, FocalLength,
   FocalLengthIn35mmFilm, Orientation, GPS tags).
.. [2] ISO 12234-2:2001, TIFF/EP (the same tags in IFD0).
"""

from __future__ import annotations

import contextlib
import datetime as _dt
import logging
import re

__all__ = ["read_metadata", "relative_exposure", "ORIENTATIONS"]

#: EXIF Orientation values (1..8) and what they mean for the stored pixels.
ORIENTATIONS = {1: "as stored", 2: "mirrored left-right", 3: "rotated 180 deg", 4: "mirrored top-bottom",
                5: "transposed", 6: "rotated 90 deg clockwise for display", 7: "transversed",
                8: "rotated 90 deg counter-clockwise for display"}


def _ratio(v) -> float | None:
    """A number from an EXIF value (exifread Ratio, tag with values, plain number)."""
    try:
        if hasattr(v, "values"):
            v = v.values
        if isinstance(v, (list, tuple)):
            if not v:
                return None
            v = v[0]
        if hasattr(v, "num") and hasattr(v, "den"):
            return float(v.num) / float(v.den) if v.den else None
        return float(v)
    except (TypeError, ValueError, ZeroDivisionError):
        return None


def _dms(tag) -> float:
    vals = tag.values
    return _ratio(vals[0]) + _ratio(vals[1]) / 60.0 + _ratio(vals[2]) / 3600.0


@contextlib.contextmanager
def _quiet_exifread():
    """Keep exifread's warnings ("file does not have exif data") off stderr for one call."""
    log = logging.getLogger("exifread")
    old = log.level
    log.setLevel(logging.CRITICAL)
    try:
        yield
    finally:
        log.setLevel(old)


def _tag(tags, name):
    """A tag from the Exif sub-IFD or, failing that, IFD0 (TIFF/EP)."""
    return tags.get(f"EXIF {name}") or tags.get(f"Image {name}")


def _first_number(tags, *names):
    for name in names:
        t = _tag(tags, name)
        if t is not None:
            v = _ratio(t)
            if v is not None and v > 0:
                return v
    return None


_PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"


def _may_hold_exif(path) -> bool:
    """False for a PNG file without an ``eXIf`` chunk (chunks are skipped by their lengths,
    image data unread); True for any other file."""
    import struct

    try:
        with open(path, "rb") as fh:
            if fh.read(8) != _PNG_SIGNATURE:
                return True
            while True:
                head = fh.read(8)
                if len(head) < 8:
                    return False
                length, kind = struct.unpack(">I4s", head)
                if kind == b"eXIf":
                    return True
                if kind == b"IEND":
                    return False
                fh.seek(length + 4, 1)
    except OSError:
        return True


def read_metadata(path) -> dict:
    """What a frame's EXIF says (keys present only when found and sensible).

    Returns
    -------
    dict
        ``exposure_s``, ``iso``, ``f_number``, ``focal_mm``, ``focal_35mm``,
        ``orientation`` (1..8), ``when`` (aware datetime from DateTimeOriginal with
        OffsetTimeOriginal, or the GPS time in UTC), ``when_naive`` (ISO text of a
        DateTimeOriginal without offset), ``capture_time_s`` (DateTimeOriginal with
        sub-seconds as seconds on the camera's clock, for grouping frames), ``latitude_deg``,
        ``longitude_deg``, ``altitude_m``.
    """
    if not _may_hold_exif(path):
        return {}
    import exifread

    try:
        with _quiet_exifread(), open(path, "rb") as fh:
            tags = exifread.process_file(fh, details=False)
    except Exception:  # noqa: BLE001 - unreadable EXIF means no EXIF
        return {}
    out: dict = {}
    for key, names in (("exposure_s", ("ExposureTime",)), ("iso", ("ISOSpeedRatings", "PhotographicSensitivity")),
                       ("f_number", ("FNumber",)), ("focal_mm", ("FocalLength",)),
                       ("focal_35mm", ("FocalLengthIn35mmFilm",))):
        v = _first_number(tags, *names)
        if v is not None:
            out[key] = v
    o = _ratio(tags.get("Image Orientation"))
    if o is not None and int(o) in ORIENTATIONS:
        out["orientation"] = int(o)
    dto = _tag(tags, "DateTimeOriginal") or tags.get("Image DateTime")
    if dto is not None:
        try:
            naive = _dt.datetime.strptime(str(dto.values).strip(), "%Y:%m:%d %H:%M:%S")
        except ValueError:
            naive = None
        if naive is not None:
            seconds = naive.replace(tzinfo=_dt.timezone.utc).timestamp()
            sub = _tag(tags, "SubSecTimeOriginal")
            if sub is not None and str(sub.values).strip().isdigit():
                digits = str(sub.values).strip()
                seconds += int(digits) / 10 ** len(digits)
            out["capture_time_s"] = seconds
            off = _tag(tags, "OffsetTimeOriginal") or _tag(tags, "OffsetTime")
            text = str(off.values).strip() if off is not None else ""
            if re.fullmatch(r"[+-]\d{2}:\d{2}", text):
                sign = 1 if text[0] == "+" else -1
                hh, mm = text[1:].split(":")
                out["when"] = naive.replace(tzinfo=_dt.timezone(sign * _dt.timedelta(hours=int(hh), minutes=int(mm))))
            else:
                out["when_naive"] = naive.isoformat()
    if "when" not in out and "GPS GPSDate" in tags and "GPS GPSTimeStamp" in tags:
        try:
            d = _dt.datetime.strptime(str(tags["GPS GPSDate"].values).strip(), "%Y:%m:%d")
            h, m, s = (_ratio(x) for x in tags["GPS GPSTimeStamp"].values)
            out["when"] = (d + _dt.timedelta(hours=h, minutes=m, seconds=s)).replace(tzinfo=_dt.timezone.utc)
            out.pop("when_naive", None)
        except (ValueError, IndexError, TypeError):
            pass
    try:
        if "GPS GPSLatitude" in tags and "GPS GPSLongitude" in tags:
            lat = _dms(tags["GPS GPSLatitude"])
            lon = _dms(tags["GPS GPSLongitude"])
            if str(tags.get("GPS GPSLatitudeRef", "N")).strip().upper().startswith("S"):
                lat = -lat
            if str(tags.get("GPS GPSLongitudeRef", "E")).strip().upper().startswith("W"):
                lon = -lon
            out["latitude_deg"], out["longitude_deg"] = lat, lon
        if "GPS GPSAltitude" in tags:
            alt = _ratio(tags["GPS GPSAltitude"])
            ref = tags.get("GPS GPSAltitudeRef")
            if ref is not None and str(ref.values[0] if isinstance(ref.values, list) else ref.values) == "1":
                alt = -alt
            out["altitude_m"] = alt
    except (ZeroDivisionError, IndexError, AttributeError, ValueError, TypeError):
        pass
    return out


def relative_exposure(meta: dict) -> float | None:
    """``exposure_s * ISO/100 / f_number^2`` (relative light per pixel value), or None.

    A missing ISO counts as 100 and a missing f-number as 1, so frames that share them
    compare correctly.
    """
    t = meta.get("exposure_s")
    if not t:
        return None
    return t * meta.get("iso", 100.0) / 100.0 / (meta.get("f_number", 1.0) ** 2)
