"""Getting a Stokes estimate for the sky command.

Accepted inputs:

* one ``stokes.nc`` written by ``polarsky stokes`` (a Stokes Dataset);
* the frames of a bracket, handed to the project's bracket path
  (``polarsky.pipeline.stokes_from_files``) with the bracket options.

Returns plain numpy arrays (C, h, w), the channel names and the dataset attrs.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ..errors import InputError

__all__ = ["load_stokes", "products_from_dataset"]


def products_from_dataset(ds) -> dict:
    """numpy products (C, h, w) from a Stokes Dataset (dims channel, y, x)."""
    need = ("S0", "S1", "S2")
    miss = [k for k in need if k not in ds]
    if miss:
        raise InputError(f"the Stokes dataset lacks {', '.join(miss)}; give a stokes.nc written by 'polarsky stokes'")
    arr = {k: np.asarray(ds[k].transpose("channel", "y", "x").values) for k in ds.data_vars
           if set(ds[k].dims) == {"channel", "y", "x"}}
    s = np.stack([arr["S0"], arr["S1"], arr["S2"]]).astype(np.float32)
    if "dolp" not in arr or "aolp" not in arr:
        from ..stokes import dolp_aolp

        arr["dolp"], arr["aolp"] = dolp_aolp(s)
    valid = arr.get("valid")
    valid = np.isfinite(s).all(axis=0) & (s[0] > 0) if valid is None else valid.astype(bool)
    channels = [str(c) for c in ds["channel"].values] if "channel" in ds.coords else [f"c{i}" for i in range(s.shape[1])]
    return {"S": s, "dolp": arr["dolp"].astype(np.float32), "aolp": arr["aolp"].astype(np.float32),
            "valid": valid, "channels": channels, "attrs": dict(ds.attrs)}


def _read_stokes_nc(path: Path) -> dict:
    """Read a stokes.nc (dims channel, y, x) with h5netcdf, without xarray's decoding machinery."""
    import json

    import h5netcdf

    try:
        with h5netcdf.File(path, "r") as f:
            var = f.variables
            miss = [k for k in ("S0", "S1", "S2") if k not in var]
            if miss:
                raise InputError(f"{path} lacks {', '.join(miss)}; give a stokes.nc written by 'polarsky stokes'")
            arr = {}
            for k in ("S0", "S1", "S2", "dolp", "aolp", "valid"):
                if k in var:
                    v = var[k]
                    if tuple(v.dimensions) != ("channel", "y", "x"):
                        raise InputError(f"{path}: variable {k} has dims {tuple(v.dimensions)}, expected (channel, y, x)")
                    arr[k] = np.asarray(v[...])
            channels = ([str(c.decode() if isinstance(c, bytes) else c) for c in var["channel"][...]]
                        if "channel" in var else [f"c{i}" for i in range(arr["S0"].shape[0])])
            attrs = {}
            for k, val in f.attrs.items():
                if isinstance(val, bytes):
                    val = val.decode()
                if isinstance(val, np.ndarray) and val.size == 1:
                    val = val.item()
                attrs[k] = val
    except InputError:
        raise
    except Exception as exc:  # noqa: BLE001 - any decoding failure is a bad file
        raise InputError(f"{path} cannot be read as a Stokes dataset ({type(exc).__name__}); "
                         "give a stokes.nc written by 'polarsky stokes'") from None
    s = np.stack([arr["S0"], arr["S1"], arr["S2"]]).astype(np.float32)
    if "dolp" not in arr or "aolp" not in arr:
        from ..stokes import dolp_aolp

        arr["dolp"], arr["aolp"] = dolp_aolp(s)
    valid = arr.get("valid")
    valid = (np.isfinite(s).all(axis=0) & (s[0] > 0)) if valid is None else valid.astype(bool)
    for k in ("analysis", "calibration", "inputs"):
        if isinstance(attrs.get(k), str) and attrs[k][:1] in "[{":
            try:
                attrs[k] = json.loads(attrs[k])
            except ValueError:
                pass
    return {"S": s, "dolp": arr["dolp"].astype(np.float32), "aolp": arr["aolp"].astype(np.float32),
            "valid": valid, "channels": channels, "attrs": attrs}


def load_stokes(frames, **bracket_options) -> dict:
    """Stokes products of the input: a ``stokes.nc`` or a bracket of frames.

    Raises
    ------
    InputError
        Missing files, an unreadable dataset, or a bracket path that is not available.
    """
    frames = [Path(f) for f in frames]
    if not frames and not bracket_options.get("manifest"):
        raise InputError("give the frames of a bracket (or one stokes.nc), or --manifest")
    for f in frames:
        if not f.is_file():
            raise InputError(f"input file {f} does not exist")
    if len(frames) == 1 and frames[0].suffix.lower() in (".nc", ".nc4", ".h5"):
        return _read_stokes_nc(frames[0])
    try:
        from ..pipeline import stokes_from_files
    except ImportError:
        raise InputError("reading a bracket of frames needs the bracket path (polarsky.pipeline), "
                         "which this installation lacks; run 'polarsky stokes' first and give its stokes.nc") from None
    opts = {k: v for k, v in bracket_options.items() if v is not None}
    ds = stokes_from_files(frames, **opts)
    return products_from_dataset(ds)
