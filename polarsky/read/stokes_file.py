"""Reading a Stokes result written by ``polarsky stokes`` (``stokes.nc``).

:func:`open_stokes` gives the xarray Dataset of the Python API; :func:`read_stokes` gives
plain numpy products (faster, no xarray) for the sky comparison and the workbench.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np

from .._shared.checks import path_problem
from ..errors import InputError

__all__ = ["open_stokes", "read_stokes", "products_from_dataset", "decode_attrs"]

_JSON_ATTRS = ("analysis_matrix", "calibration", "inputs", "analyzer_angles_deg", "transfer", "shifts_px",
               "exposure_scale")


#: attribute names files of earlier versions wrote -> today's names (the glossary's)
_EARLIER_NAMES = {"mosaic_colour": "mosaic_color"}


def decode_attrs(attrs: dict) -> dict:
    """Attributes with their JSON text decoded (lists, objects), under today's names (a file
    written by an earlier version reads as a new one)."""
    out = {}
    for k, v in attrs.items():
        k = _EARLIER_NAMES.get(k, k)
        if isinstance(v, bytes):
            v = v.decode()
        if isinstance(v, np.ndarray) and v.size == 1:
            v = v.item()
        if isinstance(v, np.generic):
            v = v.item()
        if isinstance(v, str) and v[:1] in "[{":
            try:
                v = json.loads(v)
            except ValueError:
                pass
        out[k] = v
    return out


def open_stokes(path):
    """The ``xarray.Dataset`` of a ``stokes.nc`` (loaded into memory, file closed)."""
    import h5netcdf  # noqa: F401 - the engine xarray reads NetCDF-4 files with
    import xarray as xr

    _check(path)
    try:
        with xr.open_dataset(path, engine="h5netcdf") as ds:
            return ds.load()
    except Exception as exc:  # noqa: BLE001 - any decoding failure is a bad file
        raise InputError(f"{path} cannot be read as a Stokes result ({type(exc).__name__}); give a stokes.nc written "
                         "by 'polarsky stokes'") from None


def _check(path):
    p = Path(path)
    if not p.is_file():
        raise InputError(f"Stokes result {p} {path_problem(p) or 'is not a file'}; give a stokes.nc written by "
                         "'polarsky stokes'")


def read_stokes(path) -> dict:
    """numpy products of a ``stokes.nc``.

    Returns
    -------
    dict
        ``S`` (3, C, h, w) float32, ``dolp``, ``aolp`` (C, h, w) float32, ``valid`` (C, h, w)
        bool, other maps present (``sigma_dolp``, ``sigma_aolp``, ``dolp_unbiased``,
        ``residual``), ``channels`` and ``attrs`` (decoded).
    """
    import h5py

    _check(path)
    try:
        with h5py.File(path, "r") as f:
            miss = [k for k in ("S0", "S1", "S2") if k not in f]
            if miss:
                raise InputError(f"{path} lacks {', '.join(miss)}; give a stokes.nc written by 'polarsky stokes'")
            arr = {}
            for k, v in f.items():
                if isinstance(v, h5py.Dataset) and v.ndim == 3 and k not in ("channel", "y", "x"):
                    arr[k] = v[...]
            channels = [str(c) for c in f["channel"].asstr()[...]] if "channel" in f else [
                f"c{i}" for i in range(arr["S0"].shape[0])]
            attrs = decode_attrs(dict(f.attrs))
    except InputError:
        raise
    except Exception as exc:  # noqa: BLE001 - any decoding failure is a bad file
        raise InputError(f"{path} cannot be read as a Stokes result ({type(exc).__name__}); give a stokes.nc written "
                         "by 'polarsky stokes'") from None
    return _products(arr, channels, attrs)


def products_from_dataset(ds) -> dict:
    """numpy products (as :func:`read_stokes`) of a Stokes Dataset."""
    need = [k for k in ("S0", "S1", "S2") if k not in ds]
    if need:
        raise InputError(f"the Stokes dataset lacks {', '.join(need)}; give a result of 'polarsky stokes'")
    arr = {k: np.asarray(ds[k].transpose("channel", "y", "x").values) for k in ds.data_vars
           if set(ds[k].dims) == {"channel", "y", "x"}}
    channels = [str(c) for c in ds["channel"].values]
    return _products(arr, channels, decode_attrs(dict(ds.attrs)))


def _products(arr: dict, channels, attrs) -> dict:
    s = np.stack([arr.pop("S0"), arr.pop("S1"), arr.pop("S2")]).astype(np.float32)
    if "dolp" not in arr or "aolp" not in arr:
        from ..core.stokes import dolp_aolp

        arr["dolp"], arr["aolp"] = dolp_aolp(s)
    valid = arr.pop("valid", None)
    valid = (np.isfinite(s).all(axis=0) & (s[0] > 0)) if valid is None else valid.astype(bool)
    out = {k: np.asarray(v, dtype=np.float32) for k, v in arr.items()}
    out.update(S=s, valid=valid, channels=channels, attrs=attrs)
    return out
