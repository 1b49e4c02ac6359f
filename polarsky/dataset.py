"""The xarray boundary: the Stokes Dataset, its names, units and attributes.

The numpy core never imports xarray; this module wraps core results into an
``xarray.Dataset`` with dims ``(channel, y, x)`` and writes/reads ``stokes.nc``.
"""

from __future__ import annotations

import json
import os
from pathlib import Path

import numpy as np

from ._version import __version__

__all__ = [
    "VARIABLES",
    "ANGLE_CONVENTION",
    "stokes_dataset",
    "dataset_attrs",
    "NetCDFBlockWriter",
    "open_stokes",
]

ANGLE_CONVENTION = (
    "angles in degrees in the image plane, from the image +x axis (increasing column) "
    "counter-clockwise as seen on the displayed image (toward row 0); AoLP in [0, 180); "
    "angles are in the frame of the input analyzer angles"
)

#: name -> (units, long_name) of every per-pixel variable of a Stokes result.
VARIABLES = {
    "S0": ("1", "Stokes S0: total intensity, linear units of the input scale (1 = full scale)"),
    "S1": ("1", "Stokes S1: horizontal minus vertical linear polarization, input scale"),
    "S2": ("1", "Stokes S2: +45 minus -45 deg linear polarization, input scale"),
    "dolp": ("1", "degree of linear polarization (biased upward by noise)"),
    "dolp_unbiased": ("1", "degree of linear polarization, bias-corrected (MAS estimator, Plaszczynski et al. 2014)"),
    "aolp": ("degree", "angle of linear polarization, [0, 180), image convention"),
    "sigma_dolp": ("1", "standard uncertainty of dolp"),
    "sigma_aolp": ("degree", "standard uncertainty of aolp"),
    "residual": ("1", "RMS least-squares residual of the frames about the fitted model, input scale"),
    "valid": ("1", "pixel is valid: not saturated or black in any frame, inside every aligned frame"),
}


def dataset_attrs(**extra) -> dict:
    """Dataset attrs common to every Stokes result (JSON-encodes non-scalar values)."""
    attrs = {
        "title": "polarsky Stokes estimate",
        "software": "polarsky",
        "software_version": __version__,
        "angle_convention": ANGLE_CONVENTION,
        "Conventions": "CF-1.8",
    }
    for k, v in extra.items():
        if v is None:
            continue
        if isinstance(v, (str, int, float, np.integer, np.floating)) and not isinstance(v, bool):
            attrs[k] = v
        else:
            attrs[k] = json.dumps(_jsonable(v))
    return attrs


def _jsonable(v):
    if isinstance(v, dict):
        return {str(k): _jsonable(x) for k, x in v.items()}
    if isinstance(v, (list, tuple)):
        return [_jsonable(x) for x in v]
    if isinstance(v, np.ndarray):
        return v.tolist()
    if isinstance(v, (np.integer,)):
        return int(v)
    if isinstance(v, (np.floating,)):
        return float(v)
    if isinstance(v, Path):
        return str(v)
    return v


def stokes_dataset(products: dict, *, channels, attrs: dict | None = None):
    """Wrap per-pixel arrays into the project's Stokes ``xarray.Dataset``.

    Parameters
    ----------
    products : dict of str -> ndarray, shape (C, H, W)
        Any of :data:`VARIABLES`; ``valid`` bool, the rest float32.
    channels : list of str
        ``["L"]`` or ``["R", "G", "B"]``.
    attrs : dict, optional
        Dataset attrs (see :func:`dataset_attrs`).

    Returns
    -------
    xarray.Dataset
    """
    import xarray as xr

    data_vars = {}
    for name, arr in products.items():
        if name not in VARIABLES:
            continue
        units, long_name = VARIABLES[name]
        a = np.asarray(arr)
        a = a.astype(bool) if name == "valid" else a.astype(np.float32, copy=False)
        data_vars[name] = (("channel", "y", "x"), a, {"units": units, "long_name": long_name})
    c, h, w = np.asarray(products["S0"]).shape
    coords = {"channel": list(channels), "y": np.arange(h, dtype=np.int32), "x": np.arange(w, dtype=np.int32)}
    return xr.Dataset(data_vars, coords=coords, attrs=dict(attrs or {}))


class NetCDFBlockWriter:
    """Write a Stokes result to NetCDF-4 row block by row block (bounded memory).

    The file is written under a temporary name in the same folder and renamed to its
    final name by :meth:`commit`; :meth:`abort` removes it.  The layout is the one
    ``xarray.open_dataset`` reads back into the same Dataset as :func:`stokes_dataset`.
    """

    def __init__(self, path, *, shape, channels, names, attrs):
        import netCDF4

        self.path = Path(path)
        self.tmp = self.path.with_name(f".{self.path.name}.partial-{os.getpid()}")
        c = len(channels)
        h, w = shape
        # the netCDF-C library creates variables an order of magnitude faster than h5netcdf,
        # which matters for the many small brackets of a batch
        self._f = f = netCDF4.Dataset(self.tmp, "w", format="NETCDF4")
        f.createDimension("channel", c)
        f.createDimension("y", h)
        f.createDimension("x", w)
        ch = f.createVariable("channel", str, ("channel",))
        for i, name in enumerate(channels):
            ch[i] = name
        f.createVariable("y", "i4", ("y",))[:] = np.arange(h, dtype=np.int32)
        f.createVariable("x", "i4", ("x",))[:] = np.arange(w, dtype=np.int32)
        rows = int(np.ceil(h / np.ceil(h / 256)))
        cols = max(1, min(w, 1024))
        self._vars = {}
        for name in names:
            units, long_name = VARIABLES[name]
            if name == "valid":
                v = f.createVariable(name, "i1", ("channel", "y", "x"), chunksizes=(1, rows, cols))
                v.setncattr("dtype", "bool")
            else:
                v = f.createVariable(name, "f4", ("channel", "y", "x"), chunksizes=(1, rows, cols),
                                     fill_value=np.float32(np.nan))
            v.set_auto_maskandscale(False)
            v.setncattr("units", units)
            v.setncattr("long_name", long_name)
            self._vars[name] = v
        self.set_attrs(attrs)

    def write(self, r0: int, r1: int, products: dict) -> None:
        for name, v in self._vars.items():
            a = products[name]
            v[:, r0:r1, :] = a.astype(np.int8) if name == "valid" else a

    def set_attrs(self, attrs: dict) -> None:
        """Set (or replace) dataset attributes before :meth:`commit`."""
        for k, val in attrs.items():
            self._f.setncattr(k, val)

    def commit(self) -> Path:
        self._f.close()
        os.replace(self.tmp, self.path)
        return self.path

    def abort(self) -> None:
        try:
            self._f.close()
        except Exception:  # noqa: BLE001
            pass
        if self.tmp.exists():
            self.tmp.unlink()


def open_stokes(path):
    """Open a ``stokes.nc`` written by polarsky (loads it into memory)."""
    import xarray as xr

    with xr.open_dataset(path, engine="h5netcdf") as ds:
        return ds.load()
