"""Deflate (zlib streams) for every compressed output: NetCDF chunks and PNG pictures."""

from __future__ import annotations

__all__ = ["deflate", "LEVEL"]

#: Compression level: the fastest (the outputs are written once per run, on the run's clock).
LEVEL = 1


def deflate(data: bytes, level: int = LEVEL) -> bytes:
    """A zlib stream of ``data`` (ISA-L when installed, else the standard library: the same format).

    ISA-L's deflate is several times faster than zlib's at its fastest level, with a similar
    ratio; every zlib/PNG/NetCDF reader decodes its streams.
    """
    try:
        from isal import isal_zlib

        return isal_zlib.compress(data, min(level, 3))
    except ImportError:  # pragma: no cover - isal is a dependency; the format is the same
        import zlib

        return zlib.compress(data, level)
