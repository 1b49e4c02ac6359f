"""Analyzer calibrations: what they hold, how they are stored, how they change the estimate.

A calibration corrects the nominal analyzer model ``I_k = 1/2 (S0 + S1 cos 2theta_k +
S2 sin 2theta_k)`` of each frame (bracket) or micro-polarizer (mosaic camera).  It is
stored as a NetCDF-4 file (``calibration.nc`` in the folder a ``polarsky calibrate`` command
writes; :mod:`polarsky.read.calibration_file`, :mod:`polarsky.write.calibration_file`) whose attrs say what kind it is and where it came
from, and whose variables may hold:

``angle_offset_deg`` (channel) or (position, channel)
    Added to the nominal analyzer angle; ``position`` is the index 0..3 of a micro-polarizer
    within the mosaic's 2x2 cell (row-major) for mosaic cameras.
``diattenuation`` same dims as ``angle_offset_deg``
    Effective diattenuation of the analyzer (1 = ideal).
``pixel_gain``, ``pixel_diattenuation``, ``pixel_angle_deg`` (channel, y, x)
    Per-pixel analysis vectors (bench flat-field calibration of a mosaic sensor): each
    pixel's own transmittance, diattenuation and absolute transmission-axis angle.

Required attrs: ``polarsky_calibration`` (format version), ``kind`` (e.g. ``"sky"``,
``"flat"``), ``created``, ``software_version``, ``inputs`` (JSON list of input files),
``method`` (text), and for mosaics ``mosaic``, ``sensor_shape`` and, for colour sensors,
``mosaic_color`` (absent for monochrome sensors).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..core.stokes import analysis_matrix, diattenuation_from_extinction
from ..errors import InputError

__all__ = ["Calibration", "FORMAT_VERSION", "FILE_NAME", "analysis_matrices", "applied_analysis"]

#: Version of the calibration file format.
FORMAT_VERSION = "1"
#: Name of the calibration file inside a calibrate command's output folder.
FILE_NAME = "calibration.nc"


@dataclass
class Calibration:
    """Analyzer corrections; any field may be ``None`` (= no correction).

    Attributes
    ----------
    kind : str
        ``"sky"`` (from a clear-sky fit) or ``"flat"`` (bench, per pixel), ...
    angle_offset_deg : ndarray or None
        Offset added to nominal analyzer angles, degrees; shape (channel,) or
        (position, channel).
    diattenuation : ndarray or None
        Effective diattenuation, same shape as ``angle_offset_deg``.
    pixel : dict of str -> ndarray
        Per-pixel arrays (``pixel_gain``, ``pixel_diattenuation``, ``pixel_angle_deg``),
        each (channel, y, x).
    uncertainty : dict of str -> ndarray
        Standard uncertainties of the fitted fields (same keys, ``sigma_`` prefix dropped).
    attrs : dict
        Provenance and layout (``mosaic``, ``sensor_shape``, ``channels``, ...).
    """

    kind: str
    angle_offset_deg: np.ndarray | None = None
    diattenuation: np.ndarray | None = None
    pixel: dict = field(default_factory=dict)
    uncertainty: dict = field(default_factory=dict)
    attrs: dict = field(default_factory=dict)
    source: str = ""

    def channel_params(self, channel_index: int, position: int | None = None):
        """Return ``(angle_offset_deg, diattenuation)`` for one channel (and mosaic position)."""

        def pick(arr, default):
            if arr is None:
                return default
            a = np.asarray(arr, dtype=np.float64)
            if a.ndim == 2:
                a = a[position if position is not None else 0]
            if a.ndim == 0:
                return float(a)
            return float(a[channel_index if a.size > 1 else 0])

        return pick(self.angle_offset_deg, 0.0), pick(self.diattenuation, None)




def analysis_matrices(angles_deg, n_channels: int, *, extinction=None, angle_offset: float = 0.0,
                      calibration: Calibration | None = None):
    """Per-channel analysis matrices of a bracket, shape (C, N, 3), and what was applied.

    The filter's angle offset (``--angle-offset``) and a calibration's offset add to the
    nominal angles; the diattenuation is the extinction ratio's if given, else the
    calibration's, else 1 (ideal).

    Returns
    -------
    w : ndarray (C, N, 3)
    applied : dict
        ``angle_offset_deg`` and ``diattenuation`` per channel.
    """
    cal = calibration
    d_opt = None if extinction is None else diattenuation_from_extinction(extinction)
    if cal is not None and cal.pixel:
        raise InputError(f"calibration {cal.source} holds per-pixel (mosaic sensor) corrections; use it with --mosaic "
                         "frames")
    if cal is not None and cal.angle_offset_deg is not None:
        n_cal = np.asarray(cal.angle_offset_deg).shape[-1]
        if n_cal not in (1, n_channels):
            raise InputError(f"calibration {cal.source} has {n_cal} channel(s) but the frames have {n_channels}; use a "
                             "calibration made with the same kind of frames")
    mats = []
    applied = {"angle_offset_deg": [], "diattenuation": []}
    for ci in range(n_channels):
        off, d_cal = (0.0, None) if cal is None else cal.channel_params(ci)
        d = d_opt if d_opt is not None else (d_cal if d_cal is not None else 1.0)
        offset = float(angle_offset) + off
        mats.append(analysis_matrix(angles_deg, diattenuation=d, angle_offset_deg=offset))
        applied["angle_offset_deg"].append(offset)
        applied["diattenuation"].append(d)
    return np.stack(mats), applied


def applied_analysis(attrs: dict, n_channels: int):
    """Angle offset and diattenuation per channel that a Stokes estimate already applied.

    Read back from its ``analysis_matrix`` (rows ``1/2 [1, D cos 2(a + off), D sin 2(a + off)]``)
    and ``analyzer_angles_deg``.
    """
    off = np.zeros(n_channels)
    dia = np.ones(n_channels)
    w = attrs.get("analysis_matrix")
    angles = attrs.get("analyzer_angles_deg")
    if w is None or angles is None:
        return off, dia
    w = np.asarray(w, dtype=np.float64)
    a = np.deg2rad(np.asarray(angles, dtype=np.float64))
    if w.ndim != 3 or w.shape[0] not in (1, n_channels) or w.shape[1] != a.size:
        return off, dia
    for c in range(n_channels):
        row = w[min(c, w.shape[0] - 1)]
        d = np.hypot(row[:, 1], row[:, 2]) / row[:, 0]
        phase = 0.5 * np.arctan2(row[:, 2], row[:, 1]) - a
        off[c] = float(np.rad2deg(np.angle(np.mean(np.exp(2j * phase))) / 2))
        dia[c] = float(np.mean(d))
    return off, dia
