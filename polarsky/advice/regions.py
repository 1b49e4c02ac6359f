"""Region sums: the summed Stokes vector of the valid pixels of a region, block by block.

The advice depends on a region only through these sums.  ``polarsky advise`` feeds
:class:`RegionSink` the row blocks of the runner; the workbench, which holds the products
in memory, calls :func:`region_sums_in_blocks` with the same rows per block.  Both add the
same per-block sums (:func:`block_region_sums`) in the same order from zero, so their
floating-point results are identical.
"""

from __future__ import annotations

import numpy as np

__all__ = ["region_stokes_sum", "region_extent", "block_region_sums", "region_sums_in_blocks", "RegionSink",
           "RegionNoiseSink"]


def _selected(a, sel):
    """``a[:, sel]`` for ``a`` (C, h, w) and ``sel`` (h, w) bool: the same (C, k) values in the
    same memory layout (pixel-major), made channel by channel on numpy's fast path for a
    boolean mask of a whole 2-D array (several times faster than the mixed index)."""
    if a.shape[0] == 1:
        return a[0][sel][None]
    return np.stack([ch[sel] for ch in a], axis=1).T


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
    valid = np.asarray(valid, bool)
    sel = np.asarray(mask, bool) & (valid[0] if valid.shape[0] == 1 else valid.all(axis=0))
    n = int(np.count_nonzero(sel))
    if not n:
        return np.zeros(3), 0
    return np.array([float(np.sum(_selected(a, sel), dtype=np.float64)) for a in (s0, s1, s2)]), n


def region_extent(mask):
    """Rows that hold a pixel of ``mask`` (h,) and its column range ``(x0, x1)``."""
    rows = mask.any(axis=1)
    cols = np.flatnonzero(mask.any(axis=0))
    return rows, ((int(cols[0]), int(cols[-1]) + 1) if cols.size else (0, 0))


def block_region_sums(r0, r1, products, masks, extents) -> dict:
    """``{key: (sums, count)}`` of rows ``r0:r1`` for each region mask (h, w) of the frame.

    ``products`` holds the block's ``S0``, ``S1``, ``S2`` and ``valid`` (C, r1-r0, w);
    ``extents`` the :func:`region_extent` of each mask.  Only the columns a region spans are
    looked at (the same pixels in the same order), and a block that holds none of a region's
    pixels adds nothing.
    """
    out = {}
    for key, m in masks.items():
        rows, (x0, x1) = extents[key]
        if not rows[r0:r1].any():
            out[key] = (np.zeros(3), 0)
            continue
        crop = (slice(None), slice(None), slice(x0, x1))
        out[key] = region_stokes_sum(*(products[n][crop] for n in ("S0", "S1", "S2", "valid")), m[r0:r1, x0:x1])
    return out


def region_sums_in_blocks(products, masks: dict, rows: int):
    """Sums and counts of each region over products held in memory, by row blocks.

    Parameters
    ----------
    products : dict
        ``S0``, ``S1``, ``S2`` (C, h, w) float32 and ``valid`` (C, h, w) bool.
    masks : dict of str -> ndarray (h, w) bool
    rows : int
        Rows per block: those of the runner (:func:`polarsky.estimate.runner.block_rows`)
        give exactly what :class:`RegionSink` gives when the runner feeds it.

    Returns
    -------
    sums, counts : dict, dict
    """
    h = products["S0"].shape[1]
    sink = RegionSink(masks)
    for r0 in range(0, h, rows):
        r1 = min(h, r0 + rows)
        sink.write(r0, r1, {n: products[n][:, r0:r1] for n in ("S0", "S1", "S2", "valid")}, None)
    return sink.sums, sink.counts


class RegionSink:
    """Sum the Stokes vectors (over channels and pixels) inside region masks, block by block."""

    def __init__(self, masks: dict):
        self.masks = masks
        self.extents = {k: region_extent(m) for k, m in masks.items()}
        self.sums = {k: np.zeros(3) for k in masks}
        self.counts = {k: 0 for k in masks}

    def add(self, part: dict) -> None:
        """Add one block's ``{key: (sums, count)}``."""
        for k, (sums, n) in part.items():
            self.sums[k] += sums
            self.counts[k] += n

    #: the products it reads
    needs = frozenset({"S0", "S1", "S2", "valid"})

    def write(self, r0, r1, products, frame0):
        self.add(block_region_sums(r0, r1, products, self.masks, self.extents))


class RegionNoiseSink:
    """One region's summed Stokes vector with its noise, block by block (``polarsky calibrate ring``).

    Besides the sums of :func:`region_stokes_sum` it keeps the sum of the per-pixel linear
    polarization ``L = sqrt(S1^2 + S2^2)`` and the summed noise variance of S1 (= of S2 for
    equally conditioned analyzers), from the estimate's ``sigma_aolp``:
    ``sigma_S1 = 2 L sigma_aolp`` (rad), the high-SNR relation ``sigma_psi = sigma_S1 / (2 L)``
    (Serkowski 1962, from memory).
    """

    needs = frozenset({"S0", "S1", "S2", "valid", "sigma_aolp"})

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
