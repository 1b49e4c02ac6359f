"""Writing NetCDF-4 files: one library (h5py) for every file polarsky writes.

NetCDF-4 files are HDF5 files whose dimensions are HDF5 dimension scales; every NetCDF-4
reader (netCDF-C and its bindings, xarray, h5netcdf) opens them.  Variables are stored in
chunks compressed with the *shuffle* and *deflate* filters (zlib streams, which every reader
decodes without plugins).  :class:`NetCDFFile` writes under a temporary name in the
destination folder and renames the file into place on :meth:`~NetCDFFile.commit`, so a reader
never sees half a file.  :class:`StokesWriter` streams a Stokes result chunk by chunk: each
chunk is quantized (:mod:`.quantize`), shuffled and deflated in worker threads (ISA-L's zlib
when available: the same format, several times faster) and written as is
(``write_direct_chunk``), so compressing 24 MP maps does not serialise the run.
Attribute values that are not numbers or text are stored as JSON text; ``None`` values are
left out (absent = none).
"""

from __future__ import annotations

import json
import os
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

import numpy as np

from .._version import __version__
from ..conventions import ANGLE_CONVENTION, VARIABLES
from .._shared.deflate import LEVEL, deflate
from .jsonio import jsonable

__all__ = ["NetCDFFile", "StokesWriter", "encode_attrs", "base_attrs"]

_NOT_A_VARIABLE = "This is a netCDF dimension but not a netCDF variable."


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


def shuffled(a: np.ndarray) -> bytes:
    """The bytes of ``a`` in the HDF5 shuffle filter's order (byte 0 of every value, then byte 1, ...)."""
    b = np.ascontiguousarray(a).view(np.uint8).reshape(-1, a.dtype.itemsize)
    return np.ascontiguousarray(b.T).tobytes()


def _set_attrs(obj, attrs: dict) -> None:
    for k, val in encode_attrs(attrs).items():
        obj.attrs[k] = val


def _discard_writes(f) -> None:
    """Send the rest of an abandoned HDF5 file's writes to an anonymous memory file.

    After a failed write (a full disk) the HDF5 library still holds data it must flush when
    the file is closed; the close fails again and leaves the library in a state in which the
    interpreter crashes on exit.  Pointing the file's descriptor at a memory file lets the
    close succeed (Linux; elsewhere nothing is done).
    """
    if not hasattr(os, "memfd_create"):
        return
    try:
        if not f.id.valid:
            return
        fd = f.id.get_vfd_handle()
        if not isinstance(fd, int) or fd < 0:
            return
        sink = os.memfd_create("polarsky-discarded")
    except Exception:  # noqa: BLE001 - another driver or a closed file: nothing to redirect
        return
    try:
        os.dup2(sink, fd)
    finally:
        os.close(sink)


class NetCDFFile:
    """A NetCDF-4 file written under a temporary name and renamed into place by :meth:`commit`.

    Parameters
    ----------
    path : path-like
    dims : dict
        Dimension name -> size (a dimension without coordinate values) or a sequence of
        coordinate values (text or integers), in the dimensions' order.
    attrs : dict, optional
        Global attributes (see :func:`encode_attrs`).
    """

    def __init__(self, path, dims: dict, attrs: dict | None = None):
        import h5py

        self.path = Path(path)
        self.tmp = self.path.with_name(f".{self.path.name}.partial-{os.getpid()}")
        self._f = h5py.File(self.tmp, "w", track_order=True)
        self._scales = {}
        for name, spec in dims.items():
            if isinstance(spec, (int, np.integer)):
                d = self._f.create_dataset(name, shape=(int(spec),), dtype="f4")
                d.make_scale(f"{_NOT_A_VARIABLE}{int(spec):10d}")
            else:
                values = list(spec)
                if values and isinstance(values[0], str):
                    d = self._f.create_dataset(name, data=np.array(values, dtype=object),
                                               dtype=h5py.string_dtype())
                else:
                    d = self._f.create_dataset(name, data=np.asarray(values, dtype=np.int32))
                d.make_scale(name)
            self._scales[name] = d
        self.variables: dict = {}
        self.set_attrs(attrs or {})

    def variable(self, name: str, dims: tuple, dtype, *, units: str, long_name: str, chunks=None, fill=None,
                 attrs: dict | None = None, data=None, compress: bool = True):
        """Create a variable (and write ``data`` if given); returns the h5py dataset."""
        shape = tuple(len(self._scales[d]) for d in dims)
        kw = {"chunks": tuple(int(c) for c in chunks) if chunks else (True if compress else None)}
        if compress:
            kw.update(compression="gzip", compression_opts=LEVEL, shuffle=True)
        if fill is not None:
            kw["fillvalue"] = fill
        v = self._f.create_dataset(name, shape=shape, dtype=dtype, **kw)
        for i, d in enumerate(dims):
            v.dims[i].attach_scale(self._scales[d])
        attrs = {"units": units, "long_name": long_name, **(attrs or {})}
        if fill is not None:
            attrs["_FillValue"] = np.array(fill, dtype=v.dtype)
        _set_attrs(v, attrs)
        if data is not None:
            v[...] = data
        self.variables[name] = v
        return v

    def set_attrs(self, attrs: dict) -> None:
        """Set (or replace) global attributes before :meth:`commit`."""
        _set_attrs(self._f, attrs)

    def commit(self) -> Path:
        try:
            self._f.close()
        except BaseException:
            self.abort()
            raise
        os.replace(self.tmp, self.path)
        return self.path

    def abort(self) -> None:
        """Close and remove the partial file, whatever state a failed write left it in."""
        _discard_writes(self._f)
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


class _Done:
    """A finished result with the interface of a ``concurrent.futures.Future``."""

    def __init__(self, value):
        self._value = value

    def result(self):
        return self._value


class _InlinePool:
    """Runs each job at once in the calling thread (the executor interface :class:`StokesWriter` uses)."""

    def submit(self, fn, *args):
        return _Done(fn(*args))

    def shutdown(self, wait=True, cancel_futures=False):
        pass


class StokesWriter:
    """Write a Stokes result (``stokes.nc``) block by block, one compressed chunk per block.

    Parameters
    ----------
    path : path-like
    shape : (int, int)
        Height and width of the maps.
    channels : list of str
    names : list of str
        Variables to write (keys of :data:`polarsky.conventions.VARIABLES`).
    rows : int
        Rows per chunk: every :meth:`write` but the last covers exactly this many rows.
    attrs : dict
        Global attributes (may be replaced before :meth:`commit`).
    precision : dict, optional
        Variable -> precision rule (:data:`polarsky.write.quantize.PRECISION`); variables not
        listed are stored exactly.
    full_scale : float
        Full scale of the Stokes values (the rules that are relative to it).
    threads : int, optional
        Threads that quantize and compress chunks while the caller computes the next block
        (default: up to 4, at most the threads polarsky may use, ``POLARSKY_THREADS`` or the
        CPU count; when that is 1, none); 0 compresses in the calling thread (a batch worker
        process that has one core to itself gains nothing from threads).
    """

    def __init__(self, path, *, shape, channels, names, rows, attrs, precision=None, full_scale=1.0, threads=None):
        h, w = shape
        self.shape = (len(channels), h, w)
        self.rows = int(rows)
        self.precision = dict(precision or {})
        self.full_scale = float(full_scale)
        self.file = NetCDFFile(path, {"channel": list(channels), "y": np.arange(h), "x": np.arange(w)},
                               {**base_attrs("polarsky Stokes estimate"), **attrs})
        self.names = list(names)
        chunks = (1, self.rows, w)
        for name in self.names:
            units, long_name = VARIABLES[name]
            if name == "valid":
                self.file.variable(name, ("channel", "y", "x"), "i1", units=units, long_name=long_name, chunks=chunks,
                                   attrs={"dtype": "bool"})
                continue
            rule = self.precision.get(name)
            extra = {"precision": "float32 as computed" if rule is None else rule.describe(self.full_scale)}
            if getattr(rule, "bits", None) is not None:  # the CF/NetCDF attribute for BitRound
                extra["_QuantizeBitRoundNumberOfSignificantBits"] = np.int32(rule.bits)
            self.file.variable(name, ("channel", "y", "x"), "f4", units=units, long_name=long_name, chunks=chunks,
                               fill=np.float32(np.nan), attrs=extra)
        if threads is None:
            from .._shared.threads import thread_count

            allowed = thread_count()
            threads = 0 if allowed <= 1 else min(4, allowed)
        n_threads = int(threads)
        self._pool = ThreadPoolExecutor(max_workers=n_threads) if n_threads > 0 else _InlinePool()
        self._pending: list = []

    def _chunk(self, name, a):
        """The compressed chunk of one channel's block (padded to the chunk's rows)."""
        if name == "valid":
            a = a.astype(np.int8)
        else:
            a = np.array(a, dtype=np.float32)  # a copy: quantization works in place
            rule = self.precision.get(name)
            if rule is not None:
                rule.apply(a, self.full_scale)
        if a.shape[0] < self.rows:
            pad = np.zeros((self.rows - a.shape[0], a.shape[1]), a.dtype) if name == "valid" else \
                np.full((self.rows - a.shape[0], a.shape[1]), np.nan, np.float32)
            a = np.concatenate([a, pad])
        return deflate(shuffled(a))

    def write(self, r0: int, r1: int, products: dict) -> None:
        """Queue rows ``r0:r1`` (a whole chunk, or the last rows) of every variable."""
        if r0 % self.rows or (r1 - r0 != self.rows and r1 != self.shape[1]):
            raise ValueError(f"rows {r0}:{r1} do not fill a chunk of {self.rows} rows")
        for name in self.names:
            for c in range(self.shape[0]):
                fut = self._pool.submit(self._chunk, name, products[name][c])
                self._pending.append((name, (c, r0, 0), fut))
        self._drain(keep=2 * len(self.names) * self.shape[0])

    def _drain(self, keep: int = 0) -> None:
        while len(self._pending) > keep:
            name, offset, fut = self._pending.pop(0)
            self.file.variables[name].id.write_direct_chunk(offset, fut.result())

    def set_attrs(self, attrs: dict) -> None:
        self.file.set_attrs(attrs)

    def commit(self) -> Path:
        try:
            self._drain()
        finally:
            self._pool.shutdown(wait=True)
        return self.file.commit()

    def abort(self) -> None:
        self._pool.shutdown(wait=True, cancel_futures=True)
        self._pending.clear()
        self.file.abort()
