"""Region sums: the summed Stokes vector of the valid pixels of a region, block by block.

The advice depends on a region only through these sums, so the command (block by block),
the workbench (full arrays in memory) and the batch compute them with the same function.
"""

from __future__ import annotations

import numpy as np

__all__ = ["region_stokes_sum", "RegionSink"]


def region_stokes_sum(s0, s1, s2, valid, mask):
    """Summed Stokes vector and pixel count of the valid pixels of ``mask``.

    Parameters
    ----------
    s0, s1, s2 : ndarray, shape (C, h, w)
        Stokes maps (any channels; they are summed too).
    valid : ndarray, shape (C, h, w), bool
        Valid pixels; a pixel counts only when valid in every channel.
    mask : ndarray, shape (h, w), bool
        The region.

    Returns
    -------
    sums : ndarray, shape (3,), float64
    count : int
    """
    sel = np.asarray(mask, bool) & np.asarray(valid, bool).all(axis=0)
    n = int(sel.sum())
    if not n:
        return np.zeros(3), 0
    return np.array([float(np.sum(a[:, sel], dtype=np.float64)) for a in (s0, s1, s2)]), n


class RegionSink:
    """Sum the Stokes vectors (over channels and pixels) inside region masks, block by block."""

    def __init__(self, masks: dict):
        self.masks = masks
        self.sums = {k: np.zeros(3) for k in masks}
        self.counts = {k: 0 for k in masks}

    def write(self, r0, r1, products, frame0):
        for k, m in self.masks.items():
            sums, n = region_stokes_sum(products["S0"], products["S1"], products["S2"], products["valid"], m[r0:r1])
            self.sums[k] += sums
            self.counts[k] += n
