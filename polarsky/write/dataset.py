"""The xarray boundary: the Stokes Dataset of the Python API.

The numpy core never imports xarray; this module wraps core results into an
``xarray.Dataset`` with dims ``(channel, y, x)``, the units and long names of
:data:`polarsky.conventions.VARIABLES`, and the attributes a ``stokes.nc`` carries.
"""

from __future__ import annotations

import numpy as np

from ..conventions import VARIABLES
from .netcdf import base_attrs, encode_attrs

__all__ = ["stokes_dataset"]


def stokes_dataset(products: dict, *, channels, attrs: dict | None = None):
    """Wrap per-pixel arrays into the project's Stokes ``xarray.Dataset``.

    Parameters
    ----------
    products : dict of str -> ndarray, shape (C, H, W)
        Any of :data:`polarsky.conventions.VARIABLES`; ``valid`` bool, the rest float32.
    channels : list of str
        ``["L"]`` or ``["R", "G", "B"]``.
    attrs : dict, optional
        Dataset attributes (encoded as in ``stokes.nc``: non-scalars as JSON text).

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
    return xr.Dataset(data_vars, coords=coords,
                      attrs=encode_attrs({**base_attrs("polarsky Stokes estimate"), **(attrs or {})}))
