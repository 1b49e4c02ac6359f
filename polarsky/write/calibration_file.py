"""Writing a calibration file (``calibration.nc``, see :mod:`polarsky.estimate.calibration`)."""

from __future__ import annotations

import datetime as _dt
from pathlib import Path

import numpy as np

from ..estimate.calibration import FORMAT_VERSION, Calibration
from .netcdf import NetCDFFile, base_attrs

__all__ = ["write_calibration", "publish_calibration"]


def write_calibration(path, cal: Calibration, *, inputs=(), method: str = "") -> Path:
    """Write ``cal`` to ``path`` (NetCDF-4) through a temporary name.

    Arrays of shape (channel,) or (position, channel) are stored with those dimensions, their
    uncertainties as ``<name>_sigma``, per-pixel maps with (channel, y, x).
    """
    path = Path(path)
    dims: dict = {}
    arrays = []
    for name in ("angle_offset_deg", "diattenuation"):
        arr = getattr(cal, name)
        if arr is None:
            continue
        a = np.asarray(arr, dtype=np.float64)
        d = ("channel",) if a.ndim == 1 else ("position", "channel")
        arrays.append((name, d, a))
        if name in cal.uncertainty:
            arrays.append((f"{name.removesuffix('_deg')}_sigma{'_deg' if name.endswith('_deg') else ''}", d,
                           np.asarray(cal.uncertainty[name], dtype=np.float64)))
    for name, arr in cal.pixel.items():
        arrays.append((name, ("channel", "y", "x"), np.asarray(arr, dtype=np.float32)))
    for _, d, a in arrays:
        dims.update(zip(d, a.shape))
    attrs = {**base_attrs("polarsky calibration"), **cal.attrs, "polarsky_calibration": FORMAT_VERSION,
             "kind": cal.kind, "created": _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds"),
             "inputs": [str(p) for p in inputs], "method": method}
    with NetCDFFile(path, dims, attrs) as f:
        for name, d, a in arrays:
            units = "degree" if name.endswith("_deg") else "1"
            f.variable(name, d, a.dtype, units=units, long_name=name.replace("_", " "), data=a)
    return path


def publish_calibration(out_dir, cal: Calibration, result: dict, *, command: str, inputs=(), method: str = "",
                        warnings=()) -> dict:
    """Write ``calibration.nc`` and ``calibration.json`` (``result`` plus warnings and outputs)
    into ``out_dir``, published whole; returns ``result`` with ``calibration_file`` (the file's path)."""
    from .jsonio import write_json
    from .stage import OutputStage

    inputs = [str(p) for p in inputs]
    with OutputStage(out_dir, command=command, inputs=inputs) as stage:
        write_calibration(stage.path("calibration.nc"), cal, inputs=inputs, method=method)
        result["warnings"] = list(warnings)
        result["outputs"] = ["calibration.json", "calibration.nc"]
        write_json(stage.path("calibration.json"), result)
        stage.publish()
    result["calibration_file"] = str(Path(out_dir) / "calibration.nc")
    return result
