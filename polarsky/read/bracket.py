"""A bracket: frames of one scene through a filter at several angles, read and made linear.

Frames stay in their native integer form (uint8/uint16, shape (C, H, W)) and become linear
float32 values row block by row block (:meth:`Bracket.linear_block`), so a large frame never
exists in float form all at once.  Radiometry follows the project conventions: 8-bit images
are sRGB-encoded by default, deeper data and raw files linear; values are scaled to [0, 1]
of full scale and divided by the relative exposure; pixels at or above 98 % of full scale in
any frame, at the black level, or NaN/inf (floating-point TIFFs), are not valid.  With a
camera response curve (``--response``, :mod:`polarsky.read.response_file`) 8-bit frames are
linearized by that curve instead of the assumed sRGB one.

All frames of a bracket are shown in one display orientation (:mod:`polarsky.read.orientation`):
the first frame's tag, or ``--orientation``; a camera pointing up may flip the tag from frame
to frame while the sensor and the filter stayed put, so frames are never turned one by one.
"""

from __future__ import annotations

import os
import warnings
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .._shared.checks import check_distinct_files
from ..conventions import SATURATION_FRACTION, SRGB_NOTE
from ..core.stokes import check_angles
from ..core.transfer import srgb_lut, srgb_to_linear
from ..errors import InputError, PolarskyWarning
from .frames import read_frame
from .manifest import read_manifest
from .names import ANGLE_TOKEN_HELP, angle_from_name

__all__ = ["Bracket", "load_bracket", "bracket_files"]


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
    angle_source : str
        ``"option"``, ``"manifest"`` or ``"file names"``.
    exposure_source : str
        ``"none"``, ``"manifest"`` or ``"exif"``.
    coverage : ndarray (H, W) bool or None
        Pixels inside every aligned frame (None: all).
    orientation : int
        Display orientation applied to every frame (1..8).
    angle_map : tuple (sign, turn_deg)
        Given angles ``a`` are ``sign * a + turn_deg`` on the displayed image.
    exposure_metadata : ndarray (N,) or None
        Relative exposure from the manifest or EXIF (also when not applied).
    rotations_deg, scales : ndarray (N,) or None
        Roll (counter-clockwise as displayed) and scale of each frame relative to the first,
        removed by alignment.
    response : ResponseCurve or None
        The camera response curve 8-bit frames were linearized with.
    """

    frames: list
    angles_deg: np.ndarray
    exposure_scale: np.ndarray
    shifts_px: np.ndarray
    angle_source: str = "option"
    exposure_source: str = "none"
    coverage: np.ndarray | None = field(default=None, repr=False)
    orientation: int = 1
    angle_map: tuple = (1, 0.0)
    exposure_metadata: np.ndarray | None = None
    rotations_deg: np.ndarray | None = None
    scales: np.ndarray | None = None
    response: object = None

    @property
    def display_angles_deg(self) -> np.ndarray:
        """Analyzer angles on the displayed image (before any roll correction), degrees."""
        sign, turn = self.angle_map
        return sign * self.angles_deg + turn

    @property
    def n(self) -> int:
        return len(self.frames)

    @property
    def shape(self) -> tuple:
        return self.frames[0].data.shape[1:]

    @property
    def n_channels(self) -> int:
        return self.frames[0].data.shape[0]

    @property
    def channels(self) -> list:
        return ["L"] if self.n_channels == 1 else ["R", "G", "B"]

    @property
    def encodings(self) -> list:
        return [f.encoding for f in self.frames]

    @property
    def paths(self) -> list:
        return [f.path for f in self.frames]

    @property
    def full_scale(self) -> float:
        return max(fr.full_scale for fr in self.frames)

    @property
    def srgb(self) -> bool:
        return any(e in ("srgb", "response") for e in self.encodings)

    def linear_block(self, r0: int, r1: int, out=None, *, count_rows=None):
        """Linear, exposure-normalized float32 values of rows ``r0:r1``.

        ``count_rows`` ``(c0, c1)`` limits the saturated/black counts to those rows (the
        block's own rows when it was read with context rows).

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
            floating = raw.dtype.kind == "f"
            blk = raw <= 0 if floating else raw == 0
            if floating:
                sat &= np.isfinite(raw)  # NaN and inf are not valid, counted apart
            c0, c1 = (0, h) if count_rows is None else (count_rows[0] - r0, count_rows[1] - r0)
            counts[k, 0] = int(sat[:, c0:c1].sum())
            counts[k, 1] = int(blk[:, c0:c1].sum())
            invalid |= sat
            invalid |= blk
            if fr.encoding == "response":
                for ci in range(c):
                    np.take(self.response.lut[min(ci, self.response.lut.shape[0] - 1)], raw[ci], out=out[k, ci])
            elif fr.encoding == "srgb" and not floating:
                np.take(srgb_lut(int(fr.full_scale) + 1), raw, out=out[k])
            else:
                np.multiply(raw, np.float32(1.0 / fr.full_scale), out=out[k], casting="unsafe")
                if fr.encoding == "srgb":
                    out[k] = srgb_to_linear(np.clip(out[k], 0, 1))
            if floating:
                bad = ~np.isfinite(raw)
                if bad.any():
                    invalid |= bad
                    out[k][bad] = 0.0
            scale = self.exposure_scale[k]
            if scale != 1.0:
                out[k] *= np.float32(1.0 / scale)
        if self.coverage is not None:
            invalid |= ~self.coverage[None, r0:r1]
        return out, invalid, counts


def bracket_files(frames=(), read=None):
    """Frame files, analyzer angles (degrees), exposures and their sources, without decoding.

    The same files and manifest give the same bracket in every command and in the batch.

    Returns
    -------
    files : list of Path
    angles : list of float
    exposures_s : list of float or None, or None
    angle_source : str
    """
    from ..options.settings import ReadSettings

    read = read or ReadSettings()
    files = [Path(f) for f in frames]
    if read.manifest is not None:
        if read.angles is not None:
            raise InputError("give either --angles or --manifest, not both")
        man = read_manifest(read.manifest)
        m_files, m_angles, m_exp = list(man.files), list(man.angles_deg), list(man.exposures_s)
        if files:
            lookup = {os.path.realpath(p): i for i, p in enumerate(m_files)}
            order = []
            for f in files:
                if os.path.realpath(f) not in lookup:
                    raise InputError(f"frame {f} is not listed in manifest {read.manifest}; add it or leave the frames "
                                     "out to use the manifest's list")
                order.append(lookup[os.path.realpath(f)])
            m_files = [m_files[i] for i in order]
            m_angles = [m_angles[i] for i in order]
            m_exp = [m_exp[i] for i in order]
        return m_files, m_angles, (m_exp if any(e is not None for e in m_exp) else None), "manifest"
    if not files:
        raise InputError("no frames given; name the frame files or give --manifest FILE.csv")
    if read.angles is not None:
        if len(read.angles) != len(files):
            raise InputError(f"--angles gives {len(read.angles)} angle(s) for {len(files)} frame(s); give one angle per "
                             "frame, in frame order")
        return files, list(read.angles), None, "option"
    angles = []
    for f in files:
        a = angle_from_name(f)
        if a is None:
            raise InputError(f"cannot tell the analyzer angle of {f.name}: give --angles 0,45,90,135, a --manifest, "
                             f"or put {ANGLE_TOKEN_HELP}")
        angles.append(a)
    return files, angles, None, "file names"


def load_bracket(frames=(), read=None) -> Bracket:
    """Read the frames of a bracket and work out their analyzer angles and exposures.

    Parameters
    ----------
    frames : sequence of path-like
        Frame files in order (may be empty with a manifest).
    read : ReadSettings, optional
        Angles, manifest, transfer and pixel limit (:class:`polarsky.options.settings.ReadSettings`).

    Returns
    -------
    Bracket

    Raises
    ------
    InputError
        For any problem the user can fix (see the message).
    """
    from ..options.settings import ReadSettings

    read = read or ReadSettings()
    files, angles, explicit, source = bracket_files(frames, read)
    if len(files) < 3:
        raise InputError(f"{len(files)} frame(s) given; a linear Stokes estimate needs at least 3 frames at distinct "
                         "analyzer angles")
    check_distinct_files(files, angles)
    angles = np.asarray(angles, dtype=np.float64)
    check_angles(angles)
    if read.response is not None and read.transfer != "auto":
        raise InputError(f"--response and --transfer {read.transfer} both say how to linearize the frames; give one")
    from .._shared.threads import thread_map

    loaded = thread_map(lambda f: read_frame(f, transfer=read.transfer, max_pixels=read.max_pixels, orientation=None,
                                             bit_depth=read.bit_depth, float_scale=read.float_scale),
                        files, order_warnings_by=[Path(f).name for f in files])
    _check_same_layout(loaded)
    for fr in loaded:
        if (fr.data >= SATURATION_FRACTION * fr.full_scale).all():
            raise InputError(f"frame {fr.path} is saturated everywhere (>= 98% of full scale); shorten the exposure "
                             "and shoot it again")
        if fr.data.dtype.kind == "f":
            bad = int((~np.isfinite(fr.data)).sum())
            if bad:
                warnings.warn(f"{bad} pixel values of {fr.path.name} are NaN or infinite; they are not valid",
                              PolarskyWarning, stacklevel=2)
    _linearization(loaded, read)
    orientation, angle_map = _display(loaded, read)
    meta_exp, exposure_source = None, "none"
    if explicit is not None:
        if any(e is None for e in explicit):
            raise InputError("exposure_s is given for some frames but not all; give it for every frame or for none")
        meta_exp, exposure_source = np.asarray(explicit, dtype=np.float64), "manifest"
    elif all(fr.exposure is not None for fr in loaded):
        meta_exp, exposure_source = np.asarray([fr.exposure for fr in loaded], dtype=np.float64), "exif"
    elif any(fr.exposure is not None for fr in loaded) and read.exposure == "metadata":
        missing = ", ".join(fr.path.name for fr in loaded if fr.exposure is None)
        warnings.warn(f"EXIF exposure is missing in {missing}; frames were not normalized for exposure (give "
                      "exposure_s in a --manifest, or --exposure auto)", PolarskyWarning, stacklevel=2)
    meta_scale = None if meta_exp is None else meta_exp / meta_exp[0]
    scale = np.ones(len(loaded))
    if read.exposure == "metadata" and meta_scale is not None and not np.allclose(meta_scale, 1.0):
        scale = meta_scale
    if read.exposure != "metadata":
        exposure_source = "none"  # "auto" is set when the estimate is applied
    return Bracket(frames=loaded, angles_deg=angles, exposure_scale=scale, shifts_px=np.zeros((len(loaded), 2)),
                   angle_source=source, exposure_source=exposure_source, orientation=orientation, angle_map=angle_map,
                   exposure_metadata=meta_scale, response=read.response)


def _linearization(loaded, read) -> None:
    """Apply ``--response`` to 8-bit frames, or note that the sRGB curve is assumed."""
    eight = [fr for fr in loaded if fr.data.dtype == np.uint8]
    if read.response is not None:
        deep = [fr for fr in loaded if fr.data.dtype != np.uint8]
        if deep:
            raise InputError(f"--response linearizes 8-bit frames, but {deep[0].path.name} has {deep[0].bits}-bit "
                             "values (read as linear); leave --response out for these frames")
        n_curve = read.response.lut.shape[0]
        if n_curve not in (1, loaded[0].data.shape[0]):
            raise InputError(f"response curve {read.response.source} has {n_curve} channel(s) but the frames have "
                             f"{loaded[0].data.shape[0]}; make the curve from frames of the same kind")
        for fr in loaded:
            fr.encoding = "response"
    elif eight and read.transfer == "auto":
        warnings.warn(SRGB_NOTE, PolarskyWarning, stacklevel=3)


def _display(loaded, read):
    """Turn every frame to one display orientation; return it and the map of the given angles."""
    from .orientation import ANGLE_MAP, ORIENTATION_NAMES, describe, to_display

    if read.orientation == "auto":
        chosen = loaded[0].orientation
        odd = [fr.path.name for fr in loaded if fr.orientation != chosen]
        if odd:
            warnings.warn(f"the Orientation tags of the bracket differ ({', '.join(odd)} differ from "
                          f"{loaded[0].path.name}'s {chosen}); all frames are shown as {loaded[0].path.name} "
                          f"({describe(chosen)}); give --orientation to choose another", PolarskyWarning, stacklevel=3)
    else:
        chosen = int(read.orientation)
    for fr in loaded:
        fr.data = to_display(fr.data, chosen)
        fr.displayed = chosen
    if read.angle_frame == "displayed" or chosen == 1:
        return chosen, (1, 0.0)
    sign, turn = ANGLE_MAP[chosen]
    what = ORIENTATION_NAMES[chosen]
    warnings.warn(f"frames are shown {what} (orientation {chosen}); the analyzer angles, taken on the camera's own "
                  f"layout (--angle-frame camera), are {'mirrored and ' if sign < 0 else ''}turned with the image by "
                  f"{turn:+g} deg on the displayed image", PolarskyWarning, stacklevel=3)
    return chosen, (sign, turn)


def _check_same_layout(loaded) -> None:
    first = loaded[0]
    for fr in loaded[1:]:
        if fr.data.shape[1:] != first.data.shape[1:]:
            h0, w0 = first.data.shape[1:]
            h1, w1 = fr.data.shape[1:]
            raise InputError(f"frame {fr.path.name} is {w1}x{h1} but {first.path.name} is {w0}x{h0}; all frames of a "
                             "bracket must have the same size")
        if fr.data.shape[0] != first.data.shape[0]:
            raise InputError(f"frame {fr.path.name} has {fr.data.shape[0]} channel(s) but {first.path.name} has "
                             f"{first.data.shape[0]}; use all-grey or all-RGB frames")
