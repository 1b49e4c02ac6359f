"""Colour polarization-mosaic sensors: each 2x2 micro-polarizer cell under one colour filter.

Cells follow a Bayer pattern, so colour repeats every 4x4 pixels.  With ``bilinear`` every
(colour, orientation) channel is interpolated on its own lattice in sensor coordinates
(:func:`decode_colour_bilinear`, exact on affine fields).  With the other methods each
colour's cells are packed into a monochrome mosaic, decoded, placed back, and colour is
demosaiced bilinearly on the grid of cells (:func:`decode_colour`).  The same linear
interpolation is applied to per-pixel analysis rows when a flat calibration is used.
"""

from __future__ import annotations

import cv2
import numpy as np

from .layout import bayer_cell_colours
from .methods import BILINEAR_KERNEL, BORDER, validate_method

__all__ = ["bayer_bilinear", "decode_colour", "decode_colour_bilinear"]

_KG = np.array([[0, 1, 0], [1, 4, 1], [0, 1, 0]], dtype=np.float32) / 4.0


def bayer_bilinear(planes, order, colour_index):
    """Bilinear colour demosaic of quantities sampled on a Bayer grid of cells.

    Parameters
    ----------
    planes : ndarray, shape (M, h, w)
        Quantities known at each cell for that cell's colour.
    order : str
        Bayer order of the cells.
    colour_index : int
        0 = R, 1 = G, 2 = B.

    Returns
    -------
    ndarray, shape (M, h, w)
        The quantities of colour ``colour_index`` interpolated to every cell (R and B with
        1/4 [[1,2,1],[2,4,2],[1,2,1]], G with 1/4 [[0,1,0],[1,4,1],[0,1,0]] on zero-filled
        planes; the standard bilinear Bayer interpolation).

    References
    ----------
    .. [1] R. Ramanath, W. E. Snyder, G. L. Bilbro, W. A. Sander, "Demosaicking methods for
       Bayer color arrays", J. Electron. Imaging 11(3), 306-315 (2002),
       doi:10.1117/1.1484495 (bilinear interpolation).
    """
    cc = bayer_cell_colours(order)
    m, h, w = planes.shape
    mask = np.tile((cc == colour_index).astype(np.float32), (h // 2, w // 2))
    k = _KG if colour_index == 1 else BILINEAR_KERNEL
    out = np.empty_like(planes, dtype=np.float32)
    for j in range(m):
        out[j] = cv2.filter2D(planes[j] * mask, -1, k, borderType=BORDER)
    return out


def decode_colour(values, invalid, layout, method, rows=None, nominal=None, options=None, *, decode_mono):
    m = validate_method(method)
    h, w = values.shape
    hc, wc = h // 2, w // 2  # grid of cells
    scale = m.scale
    # intensities of each pixel's own colour, on the output grid (pixels or cells)
    oh, ow = (hc, wc) if scale == 2 else (h, w)
    own = np.empty((4, oh, ow), dtype=np.float32)
    own_rows = None if rows is None else np.empty((4, 3, oh, ow), dtype=np.float32)
    own_inv = np.zeros((oh, ow), dtype=bool)

    def cells(a):  # (..., h, w) -> (..., hc, 2, wc, 2)
        return a.reshape(a.shape[:-2] + (hc, 2, wc, 2))

    for cy in (0, 1):
        for cx in (0, 1):
            pv = cells(values)[cy::2, :, cx::2, :].reshape(hc, wc)
            pinv = cells(invalid)[cy::2, :, cx::2, :].reshape(hc, wc)
            prow = None
            if rows is not None:
                prow = cells(rows)[:, cy::2, :, cx::2, :].reshape(3, hc, wc)
            inten, inv, irow = decode_mono(pv, pinv, layout, method, prow, nominal, options)
            if scale == 2:  # one value per cell: packed (4, hc/2, wc/2) -> cells (cy::2, cx::2)
                own[:, cy::2, cx::2] = inten
                own_inv[cy::2, cx::2] = inv
                if irow is not None:
                    own_rows[:, :, cy::2, cx::2] = irow
            else:  # packed pixels (hc, wc) -> their sensor pixels
                cells(own)[:, cy::2, :, cx::2, :] = inten.reshape(4, hc // 2, 2, wc // 2, 2)
                cells(own_inv)[cy::2, :, cx::2, :] = inv.reshape(hc // 2, 2, wc // 2, 2)
                if irow is not None:
                    cells(own_rows)[:, :, cy::2, :, cx::2, :] = irow.reshape(4, 3, hc // 2, 2, wc // 2, 2)
    # colour demosaic on the grid of cells, separately for each pixel offset within the cell
    inten = np.empty((4, 3, oh, ow), dtype=np.float32)
    out_rows = None if rows is None else np.empty((3, 4, 3, oh, ow), dtype=np.float32)
    offsets = [(None, None)] if scale == 2 else [(dy, dx) for dy in (0, 1) for dx in (0, 1)]
    for dy, dx in offsets:
        sel = (slice(None), slice(None)) if dy is None else (slice(dy, None, 2), slice(dx, None, 2))
        planes = own[(slice(None),) + sel]
        rplanes = None if rows is None else own_rows[(slice(None), slice(None)) + sel].reshape(12, *planes.shape[1:])
        for ci in range(3):
            inten[(slice(None), ci) + sel] = bayer_bilinear(planes, layout.colour, ci)
            if rplanes is not None:
                out_rows[(ci, slice(None), slice(None)) + sel] = bayer_bilinear(rplanes, layout.colour, ci).reshape(4, 3, *planes.shape[1:])
    # a cell grid value depends on the 3x3 neighbouring cells
    inv_cells = own_inv if scale == 2 else cells(own_inv).any(axis=(1, 3))
    inv_cells = cv2.dilate(inv_cells.astype(np.uint8), np.ones((3, 3), np.uint8), borderType=BORDER) > 0
    if scale == 2:
        valid = ~inv_cells
    else:
        valid = ~np.repeat(np.repeat(inv_cells, 2, axis=0), 2, axis=1)
    return inten, np.broadcast_to(valid, (3, oh, ow)).copy(), out_rows


_K4 = np.array([1, 2, 3, 4, 3, 2, 1], dtype=np.float32) / 4.0  # tent of a period-4 lattice
_KA = np.zeros((5, 5), np.float32)  # G cells: fill the R/B cells of the period-2 lattice
_KA[2, 2] = 1.0
_KA[0, 2] = _KA[4, 2] = _KA[2, 0] = _KA[2, 4] = 0.25


def _normalised(z, mask, apply):
    """Normalised convolution: ``apply(z) / apply(mask)`` (exact weights also at borders)."""
    with np.errstate(invalid="ignore", divide="ignore"):
        return apply(z) / apply(mask)


def decode_colour_bilinear(values, invalid, layout, rows=None):
    """Colour sensor, bilinear: every (colour, orientation) channel interpolated on its own
    lattice in sensor coordinates.

    R and B samples of one orientation lie on a period-4 lattice (tent kernel
    [1,2,3,4,3,2,1]/4 in each direction); G samples on two such lattices offset by one cell,
    whose missing cells of the period-2 lattice are first filled with the mean of their four
    G neighbours two pixels away, then bilinearly interpolated like a monochrome channel.
    Both reproduce affine fields exactly away from the borders (normalised convolution at the
    borders).  This reconstructs each colour's polarization channels and demosaics colour in
    one linear step.
    """
    h, w = values.shape
    cc = bayer_cell_colours(layout.colour)
    cmap = np.tile(np.repeat(np.repeat(cc, 2, 0), 2, 1), (h // 4, w // 4))
    pos = np.tile(np.arange(4).reshape(2, 2), (h // 2, w // 2))
    inten = np.empty((4, 3, h, w), np.float32)
    out_rows = None if rows is None else np.empty((3, 4, 3, h, w), np.float32)
    tent = lambda a: cv2.sepFilter2D(a, -1, _K4, _K4, borderType=BORDER)  # noqa: E731
    fill = lambda a: cv2.filter2D(a, -1, _KA, borderType=BORDER)  # noqa: E731
    bil = lambda a: cv2.filter2D(a, -1, BILINEAR_KERNEL, borderType=BORDER)  # noqa: E731
    for p in range(4):
        py, px = divmod(p, 2)
        lattice2 = np.zeros((h, w), np.float32)
        lattice2[py::2, px::2] = 1.0
        for c in range(3):
            m = ((cmap == c) & (pos == p)).astype(np.float32)
            planes = [values] + ([] if rows is None else [rows[j] for j in range(3)])
            res = []
            for pl in planes:
                z = pl * m
                if c == 1:
                    step = np.where(lattice2 > 0, _normalised(z, m, fill), np.float32(0))
                    res.append(_normalised(step, lattice2, bil))
                else:
                    res.append(_normalised(z, m, tent))
            inten[p, c] = res[0]
            if rows is not None:
                out_rows[c, p] = np.stack(res[1:])
    support = 3
    inv = cv2.dilate(np.asarray(invalid, np.uint8), np.ones((2 * support + 1,) * 2, np.uint8),
                     borderType=BORDER) > 0
    return inten, np.broadcast_to(~inv, (3, h, w)).copy(), out_rows
