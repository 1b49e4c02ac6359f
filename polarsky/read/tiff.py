"""TIFF frames as scanners, raw converters and scientific cameras write them.

One reader for every TIFF a command takes: the first page only (a multi-page file is not a
colour image: each page is a picture of its own, and the user is told that only the first
was read), CMYK ("separated", printing inks rather than light) refused, integer samples of
any depth with the depth the file declares (``BitsPerSample``), floating-point samples kept
as they are (with NaN and inf, which the bracket reader marks not valid).

References
----------
.. [1] Adobe, *TIFF Revision 6.0* (1992): PhotometricInterpretation (262; 5 = separated),
   BitsPerSample (258), SampleFormat (339), ExtraSamples (338), the page chain of IFDs.
"""

from __future__ import annotations

import warnings
from pathlib import Path

import numpy as np

from ..errors import InputError, PolarskyWarning

__all__ = ["read_tiff"]


def read_tiff(path, *, what: str = "frame"):
    """The first page of a TIFF as an array (H, W) or (H, W, S), and what the file says of it.

    Returns
    -------
    arr : ndarray
        Samples as stored (integers of the file's type, or floats).
    info : dict
        ``bits`` (BitsPerSample of the first sample), ``pages`` (number of pages),
        ``float`` (floating-point samples).

    Raises
    ------
    InputError
        A CMYK TIFF, or one tifffile cannot read.
    """
    import tifffile

    path = Path(path)
    with tifffile.TiffFile(path) as tf:
        pages = len(tf.pages)
        page = tf.pages[0]
        photometric = int(page.photometric) if page.photometric is not None else None
        if photometric == 5:  # SEPARATED: ink coverage, not light
            raise InputError(f"{what} {path} is a CMYK TIFF (printing inks, not light values); export it as RGB or "
                             "grey (16-bit, no colour management) from the camera's or scanner's software")
        bps = page.bitspersample
        bits = int(bps[0] if isinstance(bps, tuple) else bps)
        arr = page.asarray()
        is_float = arr.dtype.kind == "f"
        if arr.ndim == 3 and page.planarconfig is not None and int(page.planarconfig) == 2:
            arr = np.moveaxis(arr, 0, 2)  # planar samples -> interleaved
    if pages > 1:
        warnings.warn(f"{what} {path.name} holds {pages} pages; only the first was read (give each picture as a file "
                      "of its own)", PolarskyWarning, stacklevel=3)
    return arr, {"bits": bits, "pages": pages, "float": is_float}
