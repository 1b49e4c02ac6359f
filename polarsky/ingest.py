"""Reading a polarizer bracket: frames, analyzer angles, exposure and radiometry.

Frames are kept in their native integer form (uint8/uint16, shape (C, H, W)) and turned
into linear float32 values block by block (:meth:`Bracket.linear_block`) so that large
frames never exist in float form all at once.

Radiometry follows the project conventions: 8-bit images are sRGB-encoded by default and
decoded with the IEC 61966-2-1 transfer function, 16-bit images and raw files are linear;
values are scaled to [0, 1] of full scale and divided by the relative exposure; pixels at
or above 98 % of full scale in any frame, or at the black level, are not valid.
"""

from __future__ import annotations

import csv
import re
import warnings
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .errors import InputError, PolarskyWarning
from .transfer import TRANSFERS, srgb_lut

__all__ = [
    "Frame",
    "Bracket",
    "load_bracket",
    "read_frame",
    "read_manifest",
    "parse_angles",
    "angle_from_name",
    "exposure_from_exif",
    "IMAGE_SUFFIXES",
    "RAW_SUFFIXES",
    "DEFAULT_MAX_PIXELS",
    "SATURATION_FRACTION",
]

IMAGE_SUFFIXES = {".png", ".tif", ".tiff", ".jpg", ".jpeg"}
RAW_SUFFIXES = {".dng", ".cr2", ".cr3", ".nef", ".nrw", ".arw", ".srf", ".sr2", ".raf", ".orf",
                ".rw2", ".pef", ".srw", ".raw", ".rwl", ".iiq", ".3fr", ".erf", ".kdc", ".mrw", ".x3f"}
#: Largest frame (pixels) read unless the caller raises the limit (``--max-pixels``).
DEFAULT_MAX_PIXELS = 250_000_000
#: Fraction of full scale at and above which a pixel counts as saturated.
SATURATION_FRACTION = 0.98

_ANGLE_TOKEN = re.compile(r"(?<![0-9.])(-?\d+(?:\.\d+)?)\s*deg(?![a-z])", re.IGNORECASE)


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
        ``"srgb"`` or ``"linear"``: the transfer actually used to decode.
    exposure : float or None
        ``exposure_s * ISO / f_number^2`` from EXIF or the manifest (relative units).
    meta : dict
        EXIF values that were found (exposure_s, iso, f_number, datetime, ...).
    """

    path: Path
    data: np.ndarray
    full_scale: float
    encoding: str
    exposure: float | None = None
    meta: dict = field(default_factory=dict)
    kind: str = "image"


def parse_angles(text) -> list[float]:
    """Parse ``"0,45,90,135"`` (or a sequence) into a list of floats (degrees)."""
    if isinstance(text, (list, tuple, np.ndarray)):
        items = list(text)
    else:
        items = [t for t in re.split(r"[,\s]+", str(text).strip()) if t]
    try:
        return [float(t) for t in items]
    except (TypeError, ValueError):
        raise InputError(f"--angles {text!r} is not a comma-separated list of numbers (degrees), e.g. 0,45,90,135") from None


def angle_from_name(path) -> float | None:
    """Analyzer angle from a ``<number>deg`` token in a file name (``pier_045deg.tif`` -> 45)."""
    found = _ANGLE_TOKEN.findall(Path(path).stem)
    if len(found) != 1:
        return None
    return float(found[0])


def read_manifest(path) -> tuple[list[Path], list[float], list[float | None]]:
    """Read a manifest CSV with columns ``file,angle_deg`` and optional ``exposure_s``.

    File names are relative to the manifest's folder.

    Returns
    -------
    files, angles_deg, exposures_s
    """
    path = Path(path)
    if not path.is_file():
        raise InputError(f"manifest {path} does not exist; give a CSV with columns file,angle_deg[,exposure_s]")
    try:
        with open(path, newline="", encoding="utf-8-sig") as fh:
            rows = list(csv.DictReader(fh))
    except (OSError, UnicodeDecodeError, csv.Error) as exc:
        raise InputError(f"manifest {path} cannot be read as CSV ({exc}); give columns file,angle_deg[,exposure_s]") from None
    if not rows:
        raise InputError(f"manifest {path} has no rows; give one row per frame with columns file,angle_deg")
    cols = {c.strip().lower() for c in rows[0].keys() if c}
    missing = {"file", "angle_deg"} - cols
    if missing:
        raise InputError(f"manifest {path} lacks column(s) {', '.join(sorted(missing))}; needed: file,angle_deg[,exposure_s]")
    files, angles, exposures = [], [], []
    for i, row in enumerate(rows, start=2):
        row = {(k or "").strip().lower(): (v or "").strip() for k, v in row.items()}
        f = path.parent / row["file"]
        if not f.is_file():
            raise InputError(f"manifest {path} line {i} names {row['file']!r}, which does not exist next to the manifest")
        try:
            a = float(row["angle_deg"])
        except ValueError:
            raise InputError(f"manifest {path} line {i}: angle_deg {row['angle_deg']!r} is not a number") from None
        e = None
        if row.get("exposure_s"):
            try:
                e = float(row["exposure_s"])
            except ValueError:
                raise InputError(f"manifest {path} line {i}: exposure_s {row['exposure_s']!r} is not a number") from None
            if not e > 0:
                raise InputError(f"manifest {path} line {i}: exposure_s must be positive, got {e}")
        files.append(f)
        angles.append(a)
        exposures.append(e)
    return files, angles, exposures


def _ratio(value) -> float | None:
    try:
        v = value.values[0] if hasattr(value, "values") else value
        if hasattr(v, "num"):
            return float(v.num) / float(v.den) if v.den else None
        return float(v)
    except (TypeError, ValueError, IndexError, ZeroDivisionError):
        return None


def exposure_from_exif(path) -> dict:
    """EXIF exposure time, ISO, f-number, capture time and GPS of a file (what is present).

    Returns a dict with some of ``exposure_s``, ``iso``, ``f_number``, ``datetime_original``,
    ``offset_time_original``, ``focal_length_mm``, ``gps`` (raw exifread tags).
    """
    import logging

    import exifread

    logging.getLogger("exifread").setLevel(logging.ERROR)
    out: dict = {}
    try:
        with open(path, "rb") as fh:
            tags = exifread.process_file(fh, details=False)
    except Exception:  # noqa: BLE001 - no EXIF is not an error
        return out
    t = _ratio(tags.get("EXIF ExposureTime")) if "EXIF ExposureTime" in tags else None
    if t:
        out["exposure_s"] = t
    for key in ("EXIF ISOSpeedRatings", "EXIF PhotographicSensitivity"):
        if key in tags:
            iso = _ratio(tags[key])
            if iso:
                out["iso"] = iso
                break
    if "EXIF FNumber" in tags:
        fn = _ratio(tags["EXIF FNumber"])
        if fn:
            out["f_number"] = fn
    if "EXIF FocalLength" in tags:
        fl = _ratio(tags["EXIF FocalLength"])
        if fl:
            out["focal_length_mm"] = fl
    for key, name in (("EXIF DateTimeOriginal", "datetime_original"), ("EXIF OffsetTimeOriginal", "offset_time_original")):
        if key in tags:
            out[name] = str(tags[key]).strip()
    gps = {k: tags[k] for k in tags if k.startswith("GPS ")}
    if gps:
        out["gps"] = gps
    return out


def _pixel_count_from_header(path: Path) -> int | None:
    suffix = path.suffix.lower()
    try:
        if suffix in {".tif", ".tiff"}:
            import tifffile

            with tifffile.TiffFile(path) as tf:
                shape = tf.pages[0].shape
            return int(shape[0]) * int(shape[1]) if len(shape) >= 2 else None
        from PIL import Image

        Image.MAX_IMAGE_PIXELS = None
        with Image.open(path) as im:
            return im.size[0] * im.size[1]
    except Exception:  # noqa: BLE001 - the decoder reports the real problem
        return None


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
    if not path.exists():
        raise InputError(f"frame {path} does not exist; check the path")
    if not path.is_file():
        raise InputError(f"frame {path} is not a file")
    suffix = path.suffix.lower()
    if suffix not in IMAGE_SUFFIXES | RAW_SUFFIXES:
        raise InputError(f"frame {path} has an unsupported type {suffix!r}; give PNG, TIFF, JPEG or a camera raw file")
    if suffix in IMAGE_SUFFIXES:
        n = _pixel_count_from_header(path)
        if n is not None and n > max_pixels:
            raise InputError(f"frame {path} has {n} pixels, more than the limit {max_pixels}; raise it with --max-pixels or crop the frames")
    if suffix in RAW_SUFFIXES:
        data, full_scale, kind = _read_raw(path), 65535.0, "raw"
    else:
        data, kind = _read_image(path), "image"
        full_scale = float(np.iinfo(data.dtype).max) if data.dtype.kind in "ui" else 1.0
    if data.shape[1] * data.shape[2] > max_pixels:
        raise InputError(f"frame {path} has {data.shape[1] * data.shape[2]} pixels, more than the limit {max_pixels}; raise it with --max-pixels")
    if transfer == "auto":
        encoding = "srgb" if (kind == "image" and data.dtype == np.uint8) else "linear"
    else:
        encoding = transfer
    meta = exposure_from_exif(path)
    exposure = None
    if "exposure_s" in meta:
        exposure = meta["exposure_s"] * meta.get("iso", 100.0) / 100.0 / (meta.get("f_number", 1.0) ** 2)
    return Frame(path=path, data=data, full_scale=full_scale, encoding=encoding, exposure=exposure, meta=meta, kind=kind)


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


def _read_image(path: Path) -> np.ndarray:
    suffix = path.suffix.lower()
    try:
        if suffix in {".tif", ".tiff"}:
            import tifffile

            arr = tifffile.imread(path)
            if arr.ndim == 3 and arr.shape[0] in (3, 4) and arr.shape[2] not in (1, 2, 3, 4):
                arr = np.moveaxis(arr, 0, 2)
        elif suffix == ".png":
            import cv2
            from PIL import Image

            Image.MAX_IMAGE_PIXELS = None
            with Image.open(path) as im:  # checks chunk CRCs and the end marker
                im.verify()
            arr = cv2.imread(str(path), cv2.IMREAD_UNCHANGED)
            if arr is None:
                raise ValueError("decoder returned nothing")
            if arr.ndim == 3:
                arr = arr[..., [2, 1, 0] + ([3] if arr.shape[2] == 4 else [])] if arr.shape[2] in (3, 4) else arr
        else:
            from PIL import Image

            Image.MAX_IMAGE_PIXELS = None
            with Image.open(path) as im:
                im.load()
                if im.mode not in ("L", "RGB", "I;16", "LA", "RGBA"):
                    im = im.convert("RGB")
                arr = np.asarray(im)
    except InputError:
        raise
    except Exception as exc:  # noqa: BLE001 - every decoder failure means a bad file
        raise InputError(f"frame {path} cannot be decoded ({type(exc).__name__}: {exc}); it may be truncated or not an image") from None
    return _to_chw(arr, path)


def _read_raw(path: Path) -> np.ndarray:
    """Linear decode of a camera raw file through LibRaw (rawpy).

    No auto-brightening, gamma (1, 1), unit white balance, camera colour space, LibRaw's
    automatic maximum adjustment off (``adjust_maximum_thr=0``); black and white levels
    applied by LibRaw, so 0 is the black level and 65535 the white level.
    """
    import rawpy

    try:
        with rawpy.imread(str(path)) as raw:
            rgb = raw.postprocess(
                gamma=(1, 1),
                no_auto_bright=True,
                output_bps=16,
                use_camera_wb=False,
                use_auto_wb=False,
                user_wb=[1.0, 1.0, 1.0, 1.0],
                output_color=rawpy.ColorSpace.raw,
                adjust_maximum_thr=0.0,
                user_flip=0,
            )
    except Exception as exc:  # noqa: BLE001
        raise InputError(f"raw frame {path} cannot be decoded by LibRaw ({type(exc).__name__}: {exc}); it may be truncated") from None
    return _to_chw(rgb, path)


@dataclass
class Bracket:
    """Frames of one scene through a linear analyzer at several angles.

    Attributes
    ----------
    frames : list of Frame
    angles_deg : ndarray, shape (N,)
        Analyzer angles in the user's frame (degrees).
    exposure_scale : ndarray, shape (N,)
        Relative exposure of each frame (values are divided by it).
    shifts_px : ndarray, shape (N, 2)
        ``(dx, dy)`` applied to each frame by alignment (zeros if not aligned).
    """

    frames: list
    angles_deg: np.ndarray
    exposure_scale: np.ndarray
    shifts_px: np.ndarray
    angle_source: str = "option"
    exposure_source: str = "none"

    @property
    def n(self) -> int:
        return len(self.frames)

    @property
    def shape(self) -> tuple[int, int]:
        return self.frames[0].data.shape[1:]

    @property
    def n_channels(self) -> int:
        return self.frames[0].data.shape[0]

    @property
    def channels(self) -> list[str]:
        return ["L"] if self.n_channels == 1 else ["R", "G", "B"]

    @property
    def encodings(self) -> list[str]:
        return [f.encoding for f in self.frames]

    @property
    def paths(self) -> list[Path]:
        return [f.path for f in self.frames]

    def linear_block(self, r0: int, r1: int, out=None):
        """Linear, exposure-normalized float32 values of rows ``r0:r1``.

        Returns
        -------
        values : ndarray, shape (N, C, r1-r0, W), float32
        invalid : ndarray, shape (C, r1-r0, W), bool
            Saturated (>= 98 % full scale) or black in any frame, or outside a shifted frame.
        counts : ndarray, shape (N, 2), int
            Saturated and black pixel counts per frame within the block.
        """
        n, c = self.n, self.n_channels
        w = self.shape[1]
        h = r1 - r0
        if out is None:
            out = np.empty((n, c, h, w), dtype=np.float32)
        invalid = np.zeros((c, h, w), dtype=bool)
        counts = np.zeros((n, 2), dtype=np.int64)
        for k, fr in enumerate(self.frames):
            raw = fr.data[:, r0:r1]
            sat = raw >= SATURATION_FRACTION * fr.full_scale
            blk = raw == 0
            counts[k, 0] = int(sat.sum())
            counts[k, 1] = int(blk.sum())
            invalid |= sat
            invalid |= blk
            if fr.encoding == "srgb":
                levels = int(fr.full_scale) + 1
                lut = _lut(levels)
                np.take(lut, raw, out=out[k])
            else:
                np.multiply(raw, np.float32(1.0 / fr.full_scale), out=out[k], casting="unsafe")
            scale = self.exposure_scale[k]
            if scale != 1.0:
                out[k] *= np.float32(1.0 / scale)
        if getattr(self, "_coverage", None) is not None:
            invalid |= ~self._coverage[None, r0:r1]
        return out, invalid, counts


_LUTS: dict = {}


def _lut(levels: int) -> np.ndarray:
    if levels not in _LUTS:
        _LUTS[levels] = srgb_lut(levels)
    return _LUTS[levels]


def load_bracket(
    frames=(),
    *,
    angles_deg=None,
    manifest=None,
    transfer: str = "auto",
    exposures_s=None,
    max_pixels: int | None = None,
) -> Bracket:
    """Read the frames of a bracket and work out their analyzer angles and exposures.

    Parameters
    ----------
    frames : sequence of path-like
        Frame files in order.  May be empty when ``manifest`` is given.
    angles_deg : str or sequence of float, optional
        Analyzer angle of each frame, in frame order (degrees).
    manifest : path-like, optional
        CSV with columns ``file,angle_deg[,exposure_s]``.
    transfer : {"auto", "linear", "srgb"}
    exposures_s : sequence of float, optional
        Exposure times overriding EXIF.
    max_pixels : int, optional
        Pixel limit per frame (default :data:`DEFAULT_MAX_PIXELS`).

    Returns
    -------
    Bracket

    Raises
    ------
    InputError
        For any problem the user can fix (see the message).
    """
    from .stokes import check_angles

    max_pixels = DEFAULT_MAX_PIXELS if max_pixels is None else int(max_pixels)
    frames = [Path(f) for f in frames]
    man_exposures = None
    if manifest is not None:
        if angles_deg is not None:
            raise InputError("give either --angles or --manifest, not both")
        m_files, m_angles, man_exposures = read_manifest(manifest)
        if frames:
            lookup = {p.resolve(): i for i, p in enumerate(m_files)}
            order = []
            for f in frames:
                if f.resolve() not in lookup:
                    raise InputError(f"frame {f} is not listed in manifest {manifest}; add it or leave the frames out to use the manifest's list")
                order.append(lookup[f.resolve()])
            m_files = [m_files[i] for i in order]
            m_angles = [m_angles[i] for i in order]
            man_exposures = [man_exposures[i] for i in order]
        frames, angles, source = m_files, m_angles, "manifest"
    elif angles_deg is not None:
        angles = parse_angles(angles_deg)
        if len(angles) != len(frames):
            raise InputError(f"--angles gives {len(angles)} angle(s) for {len(frames)} frame(s); give one angle per frame, in frame order")
        source = "option"
    else:
        if not frames:
            raise InputError("no frames given; name the frame files or give --manifest FILE.csv")
        angles = []
        for f in frames:
            a = angle_from_name(f)
            if a is None:
                raise InputError(f"cannot tell the analyzer angle of {f.name}: give --angles 0,45,90,135, a --manifest, or put one '<number>deg' token in each file name (pier_045deg.tif)")
            angles.append(a)
        source = "file names"
    if not frames:
        raise InputError("no frames given; name the frame files or give --manifest FILE.csv")
    if len(frames) < 3:
        raise InputError(f"{len(frames)} frame(s) given; a linear Stokes estimate needs at least 3 frames at distinct analyzer angles")
    for f in frames:
        if not Path(f).exists():
            raise InputError(f"frame {f} does not exist; check the path")
    angles = np.asarray(angles, dtype=np.float64)
    check_angles(angles)

    loaded = [read_frame(f, transfer=transfer, max_pixels=max_pixels) for f in frames]
    first = loaded[0]
    for fr in loaded[1:]:
        if fr.data.shape[1:] != first.data.shape[1:]:
            h0, w0 = first.data.shape[1:]
            h1, w1 = fr.data.shape[1:]
            raise InputError(f"frame {fr.path.name} is {w1}x{h1} but {first.path.name} is {w0}x{h0}; all frames of a bracket must have the same size")
        if fr.data.shape[0] != first.data.shape[0]:
            raise InputError(f"frame {fr.path.name} has {fr.data.shape[0]} channel(s) but {first.path.name} has {first.data.shape[0]}; use all-grey or all-RGB frames")
    for fr in loaded:
        sat = fr.data >= SATURATION_FRACTION * fr.full_scale
        if sat.all():
            raise InputError(f"frame {fr.path} is saturated everywhere (>= 98% of full scale); shorten the exposure and shoot it again")

    # Exposure normalization: manifest/option > EXIF; relative to the first frame.
    exp = None
    exposure_source = "none"
    explicit = exposures_s if exposures_s is not None else man_exposures
    if explicit is not None and any(e is not None for e in explicit):
        if any(e is None for e in explicit):
            raise InputError("exposure_s is given for some frames but not all; give it for every frame or for none")
        exp = np.asarray(explicit, dtype=np.float64)
        exposure_source = "manifest" if exposures_s is None else "option"
    elif all(fr.exposure is not None for fr in loaded):
        exp = np.asarray([fr.exposure for fr in loaded], dtype=np.float64)
        exposure_source = "exif"
    elif any(fr.exposure is not None for fr in loaded):
        warnings.warn("EXIF exposure is present in some frames only; frames were not normalized for exposure",
                      PolarskyWarning, stacklevel=2)
    scale = np.ones(len(loaded)) if exp is None else exp / exp[0]
    if exp is not None and np.allclose(scale, 1.0):
        scale = np.ones(len(loaded))
    return Bracket(frames=loaded, angles_deg=angles, exposure_scale=scale,
                   shifts_px=np.zeros((len(loaded), 2)), angle_source=source, exposure_source=exposure_source)
