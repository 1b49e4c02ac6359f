"""Analyzer calibrations: what they hold, how they are stored, how they change the estimate.

A calibration corrects the nominal analyzer model ``I_k = 1/2 (S0 + S1 cos 2theta_k +
S2 sin 2theta_k)`` of each frame (bracket) or micro-polarizer (mosaic camera).  It is
stored as a NetCDF-4 file (``CAL.nc``) whose attrs say what kind it is and where it came
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
``method`` (text), and for mosaics ``mosaic`` and ``sensor_shape``.
"""

from __future__ import annotations

import datetime as _dt
import json
import os
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ._version import __version__
from .errors import InputError

__all__ = ["Calibration", "read_calibration", "write_calibration", "FORMAT_VERSION"]

FORMAT_VERSION = "1"


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


def write_calibration(path, cal: Calibration, *, inputs=(), method: str = "") -> Path:
    """Write ``cal`` to ``path`` (NetCDF-4) atomically: temporary name, then rename."""
    import xarray as xr

    path = Path(path)
    data_vars = {}
    for name in ("angle_offset_deg", "diattenuation"):
        arr = getattr(cal, name)
        if arr is None:
            continue
        a = np.asarray(arr, dtype=np.float64)
        dims = ("channel",) if a.ndim == 1 else ("position", "channel")
        data_vars[name] = (dims, a, {"units": "degree" if name.endswith("_deg") else "1"})
        if name in cal.uncertainty:
            data_vars["sigma_" + name] = (dims, np.asarray(cal.uncertainty[name], dtype=np.float64),
                                          {"units": "degree" if name.endswith("_deg") else "1",
                                           "long_name": f"standard uncertainty of {name}"})
    for name, arr in cal.pixel.items():
        data_vars[name] = (("channel", "y", "x"), np.asarray(arr, dtype=np.float32),
                           {"units": "degree" if name.endswith("_deg") else "1"})
    attrs = {k: (json.dumps(v) if not isinstance(v, (str, int, float)) else v) for k, v in cal.attrs.items()}
    attrs.update(
        polarsky_calibration=FORMAT_VERSION,
        kind=cal.kind,
        created=_dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds"),
        software_version=__version__,
        inputs=json.dumps([str(p) for p in inputs]),
        method=method,
    )
    ds = xr.Dataset(data_vars, attrs=attrs)
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = path.with_name(f".{path.name}.tmp-{os.getpid()}")
    try:
        ds.to_netcdf(tmp, engine="h5netcdf")
        os.replace(tmp, path)
    finally:
        if tmp.exists():
            tmp.unlink()
    return path


def read_calibration(path) -> Calibration:
    """Read a calibration file written by :func:`write_calibration`.

    Raises
    ------
    InputError
        The file is missing, unreadable or not a polarsky calibration.
    """
    import xarray as xr

    path = Path(path)
    if not path.is_file():
        raise InputError(f"calibration file {path} does not exist; make one with 'polarsky calibrate'")
    try:
        with xr.open_dataset(path, engine="h5netcdf") as ds:
            ds = ds.load()
    except Exception as exc:  # noqa: BLE001 - any decoding failure is a bad file
        raise InputError(f"calibration file {path} cannot be read ({type(exc).__name__}); "
                         "give a CAL.nc written by 'polarsky calibrate'") from None
    if "polarsky_calibration" not in ds.attrs:
        raise InputError(f"{path} is not a polarsky calibration file (no 'polarsky_calibration' attribute)")
    attrs = {}
    for k, v in ds.attrs.items():
        if isinstance(v, str) and v[:1] in "[{":
            try:
                v = json.loads(v)
            except ValueError:
                pass
        attrs[k] = v
    cal = Calibration(
        kind=str(ds.attrs.get("kind", "")),
        angle_offset_deg=ds["angle_offset_deg"].values if "angle_offset_deg" in ds else None,
        diattenuation=ds["diattenuation"].values if "diattenuation" in ds else None,
        pixel={k: ds[k].values for k in ds.data_vars if k.startswith("pixel_")},
        uncertainty={k[6:]: ds[k].values for k in ds.data_vars if k.startswith("sigma_")},
        attrs=attrs,
        source=str(path),
    )
    return cal
