"""Writing ``sky.nc``: the model, residual and geometry maps of a sky comparison."""

from __future__ import annotations

import datetime as _dt
from pathlib import Path

import numpy as np

from ..sky.fit import MASK_REASONS
from .netcdf import NetCDFFile, base_attrs

__all__ = ["write_sky_nc"]


def write_sky_nc(path, *, dolp_model, aolp_model, dolp_res, aolp_res, maps, reason, channels, result) -> Path:
    """Write ``sky.nc`` (NetCDF-4) through a temporary name.

    Variables: ``dolp_model``, ``dolp_residual``, ``aolp_residual`` (channel, y, x);
    ``aolp_model``, ``scattering_angle``, ``elevation``, ``azimuth`` (y, x);
    ``sky_mask_reason`` (y, x, flags).  The scalar results of sky.json are attributes.
    """
    cyx, yx = ("channel", "y", "x"), ("y", "x")
    variables = {
        "dolp_model": (cyx, dolp_model, "1", "model DoLP (fitted dolp_max)"),
        "aolp_model": (yx, aolp_model, "degree", "model AoLP, image convention"),
        "dolp_residual": (cyx, dolp_res, "1", "observed minus model DoLP"),
        "aolp_residual": (cyx, aolp_res, "degree", "observed minus model AoLP, wrapped to [-90, 90)"),
        "scattering_angle": (yx, maps["scattering_angle"], "degree", "angle between the sun and the viewing direction"),
        "elevation": (yx, maps["elevation"], "degree", "elevation of the viewing direction above the horizon"),
        "azimuth": (yx, maps["azimuth"], "degree", "azimuth of the viewing direction, clockwise from true north"),
    }
    attrs = {k: v for k, v in result.items() if k not in ("features", "warnings", "outputs")}
    attrs["created"] = _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds")
    c, h, w = np.asarray(dolp_model).shape
    dims = {"channel": list(channels), "y": np.arange(h), "x": np.arange(w)}
    with NetCDFFile(path, dims, {**base_attrs("polarsky sky comparison"), **attrs}) as f:
        for name, (dims, arr, units, long_name) in variables.items():
            f.variable(name, dims, "f4", units=units, long_name=long_name, fill=np.float32(np.nan),
                       data=np.asarray(arr, dtype=np.float32))
        codes = sorted(MASK_REASONS)
        f.variable("sky_mask_reason", yx, "u1", units="1", long_name="why a pixel was (not) used for the fit",
                   data=np.asarray(reason, np.uint8),
                   attrs={"flag_values": np.array(codes, dtype=np.uint8),
                          "flag_meanings": " ".join(MASK_REASONS[k].replace(",", "").replace("(", "").replace(")", "")
                                                    .replace(" ", "_") for k in codes)})
    return Path(path)
