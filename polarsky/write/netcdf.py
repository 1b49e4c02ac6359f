"""Writing NetCDF-4 files: one library (netCDF4) for every file polarsky writes.

:class:`NetCDFFile` writes under a temporary name in the destination folder and renames the
file into place on :meth:`~NetCDFFile.commit`, so a reader never sees half a file.
:class:`StokesWriter` streams a Stokes result row block by row block (bounded memory).
Attribute values that are not numbers or text are stored as JSON text; ``None`` values are
left out (absent = none).
"""

from __future__ import annotations

import contextlib
import errno
import json
import os
import shutil
from pathlib import Path

import numpy as np

from .._version import __version__
from ..conventions import ANGLE_CONVENTION, VARIABLES
from .jsonio import jsonable

__all__ = ["NetCDFFile", "StokesWriter", "encode_attrs", "base_attrs", "LOW_SPACE_BYTES"]

#: A NetCDF library error while the destination's device has less free space than this is
#: taken as a full device (the library reports only "NetCDF: HDF error").
LOW_SPACE_BYTES = 64 * 2**20


@contextlib.contextmanager
def _writing(path: Path):
    """Turn the NetCDF library's errors while writing ``path`` into :class:`OSError` naming it
    (ENOSPC when its device is full), so the output stage reports them as write failures."""
    try:
        yield
    except RuntimeError as exc:
        try:
            free = shutil.disk_usage(path.parent).free
        except OSError:
            free = None
        code = errno.ENOSPC if free is not None and free < LOW_SPACE_BYTES else errno.EIO
        raise OSError(code, f"{os.strerror(code)} ({exc})", str(path)) from None


def encode_attrs(attrs: dict) -> dict:
    """NetCDF attribute values: numbers, text and numpy arrays as they are, bools as 0/1, the rest JSON."""
    out = {}
    for k, v in attrs.items():
        if v is None:
            continue
        if isinstance(v, (bool, np.bool_)):
            out[k] = int(v)
        elif isinstance(v, (str, int, float, np.integer, np.floating, np.ndarray)):
            out[k] = v
        else:
            out[k] = json.dumps(jsonable(v))
    return out


def base_attrs(title: str) -> dict:
    """Attributes every file polarsky writes carries."""
    return {"title": title, "software": "polarsky", "software_version": __version__,
            "angle_convention": ANGLE_CONVENTION, "Conventions": "CF-1.8"}


class NetCDFFile:
    """A NetCDF-4 file written under a temporary name and renamed into place by :meth:`commit`.

    Parameters
    ----------
    path : path-like
    dims : dict of str -> int
    attrs : dict, optional
        Global attributes (see :func:`encode_attrs`).
    """

    def __init__(self, path, dims: dict, attrs: dict | None = None):
        import netCDF4

        self.path = Path(path)
        self.tmp = self.path.with_name(f".{self.path.name}.partial-{os.getpid()}")
        with _writing(self.path):
            self._f = netCDF4.Dataset(self.tmp, "w", format="NETCDF4")
            for name, size in dims.items():
                self._f.createDimension(name, size)
        self.variables: dict = {}
        self.set_attrs(attrs or {})

    def coordinate(self, name: str, values) -> None:
        """A 1-D coordinate variable named after its dimension (text or integers)."""
        if not isinstance(values, np.ndarray) and len(values) and isinstance(values[0], str):
            v = self._f.createVariable(name, str, (name,))
            for i, s in enumerate(values):
                v[i] = s
        else:
            self._f.createVariable(name, "i4", (name,))[:] = np.asarray(values, dtype=np.int32)

    def variable(self, name: str, dims: tuple, dtype, *, units: str, long_name: str, chunks=None, fill=None,
                 attrs: dict | None = None, data=None):
        """Create a variable (and write ``data`` if given); returns the netCDF4 variable."""
        kw = {} if chunks is None else {"chunksizes": tuple(int(c) for c in chunks)}
        if fill is not None:
            kw["fill_value"] = fill
        v = self._f.createVariable(name, dtype, dims, **kw)
        v.set_auto_maskandscale(False)
        v.setncattr("units", units)
        v.setncattr("long_name", long_name)
        for k, val in encode_attrs(attrs or {}).items():
            v.setncattr(k, val)
        if data is not None:
            with _writing(self.path):
                v[...] = data
        self.variables[name] = v
        return v

    def set_attrs(self, attrs: dict) -> None:
        """Set (or replace) global attributes before :meth:`commit`."""
        for k, val in encode_attrs(attrs).items():
            self._f.setncattr(k, val)

    def commit(self) -> Path:
        with _writing(self.path):
            self._f.close()
        os.replace(self.tmp, self.path)
        return self.path

    def abort(self) -> None:
        try:
            self._f.close()
        except Exception:  # noqa: BLE001 - already closed or broken: remove it anyway
            pass
        if self.tmp.exists():
            self.tmp.unlink()

    def __enter__(self):
        return self

    def __exit__(self, exc_type, exc, tb):
        if exc_type is None:
            self.commit()
        else:
            self.abort()
        return False


class StokesWriter:
    """Write a Stokes result (``stokes.nc``) row block by row block.

    Parameters
    ----------
    path : path-like
    shape : (int, int)
        Height and width of the maps.
    channels : list of str
    names : list of str
        Variables to write (keys of :data:`polarsky.conventions.VARIABLES`).
    attrs : dict
        Global attributes (may be replaced before :meth:`commit`).
    """

    def __init__(self, path, *, shape, channels, names, attrs):
        h, w = shape
        self.file = NetCDFFile(path, {"channel": len(channels), "y": h, "x": w}, {**base_attrs(
            "polarsky Stokes estimate"), **attrs})
        self.file.coordinate("channel", list(channels))
        self.file.coordinate("y", np.arange(h))
        self.file.coordinate("x", np.arange(w))
        rows = int(np.ceil(h / np.ceil(h / 256)))
        chunks = (1, rows, max(1, min(w, 1024)))
        self.names = list(names)
        for name in self.names:
            units, long_name = VARIABLES[name]
            if name == "valid":
                self.file.variable(name, ("channel", "y", "x"), "i1", units=units, long_name=long_name, chunks=chunks,
                                   attrs={"dtype": "bool"})
            else:
                self.file.variable(name, ("channel", "y", "x"), "f4", units=units, long_name=long_name, chunks=chunks,
                                   fill=np.float32(np.nan))

    def write(self, r0: int, r1: int, products: dict) -> None:
        with _writing(self.file.path):
            for name in self.names:
                a = products[name]
                self.file.variables[name][:, r0:r1, :] = a.astype(np.int8) if name == "valid" else a

    def set_attrs(self, attrs: dict) -> None:
        self.file.set_attrs(attrs)

    def commit(self) -> Path:
        return self.file.commit()

    def abort(self) -> None:
        self.file.abort()
