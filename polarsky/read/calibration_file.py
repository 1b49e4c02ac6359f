"""Reading a calibration file (``calibration.nc``, see :mod:`polarsky.estimate.calibration`)."""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ..errors import InputError
from .stokes_file import decode_attrs

__all__ = ["read_calibration", "find_calibration"]


def find_calibration(path) -> Path:
    """The calibration file named by ``--calibration``: the file, or the folder holding it."""
    from ..estimate.calibration import FILE_NAME
    from .formats import file_in_folder

    return file_in_folder(path, FILE_NAME, what="calibration", maker="polarsky calibrate")


def read_calibration(path):
    """Read a calibration written by :func:`polarsky.write.calibration_file.write_calibration`.

    Parameters
    ----------
    path : path-like
        ``calibration.nc`` or the folder holding it.

    Returns
    -------
    polarsky.estimate.calibration.Calibration

    Raises
    ------
    InputError
        The file is missing, unreadable or not a polarsky calibration.
    """
    import h5py

    from ..estimate.calibration import Calibration

    p = find_calibration(path)
    try:
        with h5py.File(p, "r") as f:
            attrs = decode_attrs(dict(f.attrs))
            data = {name: np.asarray(v[...]) for name, v in f.items()
                    if isinstance(v, h5py.Dataset) and name not in ("channel", "position", "y", "x")}
    except Exception as exc:  # noqa: BLE001 - any decoding failure is a bad file
        raise InputError(f"calibration file {p} cannot be read ({type(exc).__name__}); give the calibration.nc "
                         "written by 'polarsky calibrate'") from None
    if "polarsky_calibration" not in attrs:
        raise InputError(f"{p} is not a polarsky calibration file (no 'polarsky_calibration' attribute)")
    uncertainty = {}
    for name, arr in data.items():
        if "_sigma" in name:
            base, _, unit = name.partition("_sigma")
            uncertainty[base + unit] = arr
    return Calibration(
        kind=str(attrs.get("kind", "")),
        angle_offset_deg=data.get("angle_offset_deg"),
        diattenuation=data.get("diattenuation"),
        pixel={k: v for k, v in data.items() if k.startswith("pixel_")},
        uncertainty=uncertainty,
        attrs=attrs,
        source=str(p),
    )
