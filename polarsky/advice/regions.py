"""Region sums: the summed Stokes vector of the valid pixels of a region, block by block.

The advice depends on a region only through these sums, so the command (block by block),
the workbench (full arrays in memory) and the batch compute them with the same function.
"""

from __future__ import annotations

import numpy as np

__all__ = ["region_stokes_sum", "RegionSink", "RegionNoiseSink"]


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


class RegionNoiseSink:
    """One region's summed Stokes vector with its noise, block by block (``polarsky calibrate ring``).

    Besides the sums of :func:`region_stokes_sum` it keeps the sum of the per-pixel linear
    polarization ``L = sqrt(S1^2 + S2^2)`` and the summed noise variance of S1 (= of S2 for
    equally conditioned analyzers), from the estimate's ``sigma_aolp``:
    ``sigma_S1 = 2 L sigma_aolp`` (rad), the high-SNR relation ``sigma_psi = sigma_S1 / (2 L)``
    (Serkowski 1962, from memory).
    """

    def __init__(self, mask):
        self.mask = np.asarray(mask, bool)
        self.sums = np.zeros(3)
        self.lin_sum = 0.0
        self.var_s12 = 0.0
        self.count = 0

    def write(self, r0, r1, products, frame0):
        sel = self.mask[r0:r1] & np.asarray(products["valid"], bool).all(axis=0)
        if not sel.any():
            return
        s0, s1, s2 = (np.asarray(products[k])[:, sel].astype(np.float64) for k in ("S0", "S1", "S2"))
        lin = np.hypot(s1, s2)
        sig = np.deg2rad(np.asarray(products["sigma_aolp"])[:, sel].astype(np.float64))
        self.sums += [s0.sum(), s1.sum(), s2.sum()]
        self.lin_sum += float(lin.sum())
        self.var_s12 += float(np.nansum((2.0 * lin * sig) ** 2))
        self.count += int(sel.sum())
