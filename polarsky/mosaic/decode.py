"""From a linearised mosaic frame to the analyzer channels and analysis matrices of the fit.

:func:`decode_mosaic` turns mosaic values (H, W) into what the Stokes estimate needs:
intensities ``(4, C, h, w)`` (one slice per micro-polarizer orientation), a validity mask
``(C, h, w)`` and either one analysis matrix per channel ``(C, 4, 3)`` or, with a per-pixel
bench calibration, per-pixel solve matrices ``(C, 3, 4, h, w)``.

Calibration, decided here:

* a sky calibration's ``angle_offset_deg`` / ``diattenuation`` with dims (position, channel)
  are added to / used for the nominal angle of each micro-polarizer position;
* a flat (bench) calibration gives every pixel its own gain ``t``, diattenuation ``D`` and
  angle ``phi``.  The raw values are first divided by ``t`` (flat field).  For
  ``superpixel`` each cell's four pixels keep their own rows ``1/2 [1, D cos 2phi,
  D sin 2phi]``.  For ``bilinear`` the rows are interpolated with the same linear weights as
  the intensities: for locally uniform light this is exact (``sum a_j I_j = (sum a_j w_j) .
  S``), and it keeps every pixel's own analysis vector in the estimate.  Each output pixel
  then gets its own least-squares solve matrix.  The non-linear ``newton`` first brings each
  pixel to its nominal analyzer using the calibrated bilinear Stokes estimate (see
  :func:`_decode_mono`).
  Pixels flagged defective (dead or hot) are replaced by the mean of their four nearest
  neighbours of the same orientation before decoding.

Colour sensors (Bayer cells): with ``bilinear`` every (colour, orientation) channel is
interpolated on its own lattice in sensor coordinates (exact on affine fields, see
:func:`_decode_colour_bilinear`).  With the other methods each colour's 2x2 cells are packed
into a monochrome polarization mosaic, decoded with the chosen method, placed back, and then
colour is demosaiced bilinearly on the grid of cells (one Bayer pattern per pixel offset within
the cell).  Either way the result has channels R, G, B, and the same linear interpolation is
applied to the per-pixel analysis rows when a flat calibration is used.
"""

from __future__ import annotations

import cv2
import numpy as np

from ..core.stokes import analysis_matrix, fit_stokes_per_pixel
from ..errors import InputError
from .layout import MosaicLayout
from .methods import BORDER, interpolate_bilinear_stack, invalid_after, validate_method

__all__ = ["decode_mosaic", "per_pixel_solve", "position_matrix", "check_calibration", "decode_margin"]


def position_matrix(layout: MosaicLayout, calibration=None, channel_index=0):
    """Analysis matrix (4, 3) of the four micro-polarizer positions, sky calibration applied."""
    angles = np.asarray(layout.angles_deg, dtype=np.float64)
    d = np.ones(4)
    if calibration is not None and calibration.angle_offset_deg is not None:
        for k in range(4):
            off, dia = calibration.channel_params(channel_index, k)
            angles[k] += off
            if dia is not None:
                d[k] = dia
    elif calibration is not None and calibration.diattenuation is not None:
        for k in range(4):
            _, dia = calibration.channel_params(channel_index, k)
            if dia is not None:
                d[k] = dia
    return analysis_matrix(angles, diattenuation=d)


def per_pixel_solve(rows):
    """Least-squares solve matrices from per-pixel analysis rows.

    Parameters
    ----------
    rows : ndarray, shape (N, 3, ...)
        Row ``k`` of each pixel's analysis matrix.

    Returns
    -------
    ndarray, shape (3, N, ...), float32
        ``(W^T W)^-1 W^T`` per pixel (3x3 normal equations inverted in closed form, in
        float32: the rows are of order 1/2 and the normal matrix is well conditioned).
    """
    r = np.asarray(rows, dtype=np.float32)  # rows are O(1) and W^T W well conditioned
    a = np.einsum("ki...,kj...->ij...", r, r)
    # adjugate of the symmetric 3x3 matrix
    c00 = a[1, 1] * a[2, 2] - a[1, 2] * a[2, 1]
    c01 = a[0, 2] * a[2, 1] - a[0, 1] * a[2, 2]
    c02 = a[0, 1] * a[1, 2] - a[0, 2] * a[1, 1]
    c11 = a[0, 0] * a[2, 2] - a[0, 2] * a[2, 0]
    c12 = a[0, 2] * a[1, 0] - a[0, 0] * a[1, 2]
    c22 = a[0, 0] * a[1, 1] - a[0, 1] * a[1, 0]
    det = a[0, 0] * c00 + a[0, 1] * (a[1, 2] * a[2, 0] - a[1, 0] * a[2, 2]) + a[0, 2] * (a[1, 0] * a[2, 1] - a[1, 1] * a[2, 0])
    with np.errstate(divide="ignore", invalid="ignore"):
        inv = np.stack([np.stack([c00, c01, c02]), np.stack([c01, c11, c12]), np.stack([c02, c12, c22])]) / det
    return np.einsum("ij...,kj...->ik...", inv, r).astype(np.float32)


def check_calibration(cal, layout: MosaicLayout, shape):
    """Raise :class:`InputError` if a flat calibration was made for another sensor or layout."""
    if not cal.pixel:
        return
    src = cal.source or "the calibration"
    shp = cal.attrs.get("sensor_shape")
    if shp is not None and tuple(int(v) for v in shp) != tuple(shape):
        raise InputError(
            f"calibration {src} was made for a {int(shp[1])}x{int(shp[0])} sensor but the frames are "
            f"{shape[1]}x{shape[0]}; use a calibration made with this camera ('polarsky calibrate flat')"
        )
    mos = cal.attrs.get("mosaic")
    if mos is not None:
        from .layout import parse_mosaic

        other = parse_mosaic(str(mos))
        if other.angles_deg != layout.angles_deg:
            raise InputError(
                f"calibration {src} was made for mosaic {other.text} but --mosaic is {layout.text}; "
                "give the layout the calibration was made with, or recalibrate"
            )
    col = cal.attrs.get("mosaic_color") or None
    if (col or None) != layout.colour:
        raise InputError(
            f"calibration {src} was made for colour pattern {col or 'none (mono)'} but --mosaic-color is "
            f"{layout.colour or 'none (mono)'}; give the same pattern or recalibrate"
        )
    g = np.asarray(cal.pixel.get("pixel_gain"))
    if g.shape[-2:] != tuple(shape):
        raise InputError(
            f"calibration {src} holds {g.shape[-1]}x{g.shape[-2]} pixel maps but the frames are "
            f"{shape[1]}x{shape[0]}; use a calibration made with this camera"
        )


def _repair_defects(values, defect):
    """Replace defective pixels by the mean of their 4 nearest same-orientation neighbours."""
    if defect is None or not defect.any():
        return values
    v = values.copy()
    good = (~defect).astype(np.float32)
    for t in range(4):
        ty, tx = divmod(t, 2)
        q = v[ty::2, tx::2]
        gq = good[ty::2, tx::2]
        bad = gq == 0
        if not bad.any():
            continue
        k = np.array([[0, 1, 0], [1, 0, 1], [0, 1, 0]], np.float32)
        num = cv2.filter2D(q * gq, -1, k, borderType=BORDER)
        den = cv2.filter2D(gq, -1, k, borderType=BORDER)
        with np.errstate(invalid="ignore", divide="ignore"):
            q[bad] = (num / den)[bad]
    return v


def _flat_arrays(cal, layout, extra_offsets):
    """Per-pixel gain (H, W), rows (3, H, W) and defect mask from a flat calibration."""
    gain = np.asarray(cal.pixel["pixel_gain"], dtype=np.float32)[0]
    dia = np.asarray(cal.pixel.get("pixel_diattenuation", np.ones_like(gain)[None]), dtype=np.float32)[0]
    ang = np.asarray(cal.pixel["pixel_angle_deg"], dtype=np.float64)[0]
    if extra_offsets is not None:
        h, w = ang.shape
        ang = ang + np.tile(np.asarray(extra_offsets, dtype=np.float64).reshape(2, 2), (h // 2, w // 2))
    defect = None
    if "pixel_defect" in cal.pixel:
        defect = np.asarray(cal.pixel["pixel_defect"])[0] != 0
    bad = ~(np.isfinite(gain) & (gain > 0) & np.isfinite(dia) & np.isfinite(ang))
    defect = bad if defect is None else (defect | bad)
    th = np.deg2rad(ang)
    rows = 0.5 * np.stack([np.ones_like(th), dia * np.cos(2 * th), dia * np.sin(2 * th)]).astype(np.float32)
    if defect.any():
        # defective pixels get their position's median row and a gain of 1 (values repaired)
        for t in range(4):
            ty, tx = divmod(t, 2)
            sub = rows[:, ty::2, tx::2]
            dq = defect[ty::2, tx::2]
            if dq.any() and (~dq).any():
                med = np.median(sub[:, ~dq], axis=1)
                sub[:, dq] = med[:, None]
        gain = np.where(defect, 1.0, gain).astype(np.float32)
    return gain, rows, defect


def _decode_mono(values, invalid, layout, method, rows=None, nominal=None, options=None):
    """Mono decode: returns (intensities (4, h, w), invalid (h, w), rows (4, 3, h, w) or None).

    With per-pixel ``rows`` (3, H, W), the linear methods interpolate the rows with the
    intensities' weights.  The non-linear ``newton`` first brings every pixel to its nominal
    analyzer ``nominal`` (4, 3): ``M' = M + (w_nominal - w_pixel) . S_b``, with ``S_b`` the
    calibrated bilinear Stokes estimate at the pixel, then decodes ``M'`` with the nominal rows
    (exact for locally uniform light; at edges the error is the product of the small analyzer
    deviation and the bilinear error).
    """
    m = validate_method(method)
    inv = invalid_after(m, invalid)
    if rows is not None and m.scale == 1 and m.name != "bilinear":
        h, w = values.shape
        lin = validate_method("bilinear").function(values)
        s_b = fit_stokes_per_pixel(lin, per_pixel_solve(interpolate_bilinear_stack(rows)))
        nom = np.empty_like(rows)
        for t in range(4):
            nom[:, t // 2::2, t % 2::2] = np.asarray(nominal[t], np.float32)[:, None, None]
        corrected = values + np.einsum("j...,j...->...", nom - rows, s_b).astype(np.float32)
        inten = m.function(corrected, **(options or {}))
        prow = np.broadcast_to(np.asarray(nominal, np.float32)[:, :, None, None], (4, 3, h, w))
        return inten, inv, prow
    inten = m.function(values, **(options or {}))
    prow = None
    if rows is not None:
        if m.scale == 2:
            prow = np.stack([rows[:, ty::2, tx::2] for ty in (0, 1) for tx in (0, 1)])
        else:
            prow = interpolate_bilinear_stack(rows)
    return inten, inv, prow


def decode_mosaic(values, invalid, layout: MosaicLayout, method="bilinear", calibration=None, *, scale=None):
    """Decode linear mosaic values into the inputs of the Stokes estimate.

    Parameters
    ----------
    values : ndarray, shape (H, W), float32
        Linear mosaic values (already averaged over frames).
    invalid : ndarray, shape (H, W), bool
        Invalid raw pixels (saturated, at black).
    layout : MosaicLayout
    method : str
        Registry key of :data:`polarsky.mosaic.methods.DEMOSAIC_METHODS`.
    calibration : polarsky.calibration.Calibration, optional
        Sky (per-position offsets) and/or flat (per-pixel) calibration.
    scale : float, optional
        Mean level of the whole frame, when ``values`` is a piece of it (keeps the Newton
        method's regularisation the same in every piece).

    Returns
    -------
    dict
        ``intensities`` (4, C, h, w) float32, ``valid`` (C, h, w) bool, ``w`` (C, 4, 3),
        ``solve`` (C, 3, 4, h, w) float32 or None, ``per_pixel`` bool, ``channels``.
    """
    values = np.asarray(values, dtype=np.float32)
    invalid = np.zeros(values.shape, bool) if invalid is None else np.asarray(invalid, bool)
    nch = len(layout.channels)
    w = np.stack([position_matrix(layout, calibration, c) for c in range(nch)])
    rows = None
    if calibration is not None and calibration.pixel:
        check_calibration(calibration, layout, values.shape)
        off = None
        if calibration.angle_offset_deg is not None:
            off = [calibration.channel_params(0, k)[0] for k in range(4)]
        gain, rows, defect = _flat_arrays(calibration, layout, off)
        values = _repair_defects(values / gain, defect)
        nominal = analysis_matrix(np.asarray(layout.angles_deg) + (0.0 if off is None else np.asarray(off)))
    else:
        nominal = None
    options = None
    if validate_method(method).name == "newton":
        from .newton import newton_eps

        options = {"eps": newton_eps(float(np.mean(np.abs(values))) if scale is None else float(scale))}
    if layout.colour is None:
        inten, inv, prow = _decode_mono(values, invalid, layout, method, rows, nominal, options)
        inten = inten[:, None]
        valid = (~inv)[None]
        prow = None if prow is None else prow[None]
    else:
        from .colour import decode_colour, decode_colour_bilinear

        if validate_method(method).name == "bilinear":
            inten, valid, prow = decode_colour_bilinear(values, invalid, layout, rows)
        else:
            inten, valid, prow = decode_colour(values, invalid, layout, method, rows, nominal, options,
                                               decode_mono=_decode_mono)
    solve = None
    if prow is not None:
        solve = np.stack([per_pixel_solve(prow[c]) for c in range(prow.shape[0])])
        valid &= np.all(np.isfinite(solve), axis=(1, 2))
    return {
        "intensities": inten,
        "valid": valid,
        "w": w,
        "solve": solve,
        "per_pixel": solve is not None,
        "channels": layout.channels,
    }


def decode_margin(layout: MosaicLayout, method) -> int:
    """Sensor rows of context a window needs so that its interior decodes as in the whole frame.

    The Newton method looks 6 pixels away (7 with a flat calibration's bilinear
    pre-correction); on colour sensors those pixels are in the packed per-colour mosaic
    (twice as many sensor rows), plus one cell of colour interpolation; the colour bilinear
    kernels reach 3 pixels.  Rounded up to whole 4-row periods.
    """
    m = validate_method(method)
    reach = {0: 1, 1: 2, 3: 7}.get(m.support, 2 * m.support + 1)
    if layout.colour is not None:
        reach = 2 * reach + 4
    return int(-(-reach // 4) * 4)
