"""Marks that carry data, drawn on a composed picture without matplotlib.

A template (:mod:`.canvas`) holds what does not depend on the data; what does (a line at the
recommended angle, a region's outline, a number in a title) is drawn here onto the composed
picture, at the sizes matplotlib uses at the template's resolution (:data:`.canvas.DPI`), so
the picture looks as if matplotlib had drawn it whole:

* lines and outlines anti-aliased at matplotlib's widths (points at the template's DPI, not
  rounded): OpenCV finds the pixels near a line (and a mask's outline, ``cv2.findContours``),
  each takes the share of it the line covers; dashes scaled by the line width as matplotlib
  scales them, its cap styles (OpenCV's own anti-aliased lines come only in widths of about
  1.3, 3.4, 5.4, ... pixels, which made 2.75-pixel outlines a quarter heavier);
* text with PIL's ``ImageDraw`` in the DejaVu Sans font matplotlib ships (found without
  importing matplotlib), placed by matplotlib's rules: the box of a text is as high as "lp",
  so ``va="top"`` puts the top of that box at ``y``, and a text's rounded box (``box=``) is
  padded by 0.3 of the font size.

Coordinates are in pixels with the top-left origin, pixel edges at whole numbers (as a
template's extents and text slots are); data coordinates go through an axes of the template.
"""

from __future__ import annotations

import functools
from pathlib import Path

import numpy as np

from ...palette import COLOURS
from .canvas import DPI, Template

__all__ = ["PX_PER_PT", "font", "text", "slot_text", "data_px", "polyline", "outline", "blend_overlay",
           "rounded_box", "colour_rgb", "region_label", "filter_axis", "filter_axis_label"]

#: pixels per typographic point at the pictures' resolution
PX_PER_PT = DPI / 72.0
_SHIFT = 4  # sub-pixel bits of OpenCV's drawing coordinates
#: matplotlib's dash patterns, in line widths (``lines.dashed_pattern``, ``lines.dotted_pattern``)
DASHES = {"--": (3.7, 1.6), ":": (1.0, 1.65)}


def colour_rgb(colour) -> tuple:
    """``"#rrggbb"``, a grey level ``"0.6"`` or an RGB tuple of floats in [0, 1] -> (r, g, b) 0..255.

    >>> colour_rgb("#ff9f1c"), colour_rgb("0.6")
    ((255, 159, 28), (153, 153, 153))
    """
    if isinstance(colour, str):
        if colour.startswith("#"):
            return tuple(int(colour[i:i + 2], 16) for i in (1, 3, 5))
        g = int(round(float(colour) * 255))
        return (g, g, g)
    return tuple(int(round(c * 255)) for c in colour[:3])


@functools.lru_cache(maxsize=4)
def _font_file(bold: bool) -> str:
    """The DejaVu Sans file that matplotlib draws its text with (its own copy)."""
    import importlib.util

    spec = importlib.util.find_spec("matplotlib")
    name = "DejaVuSans-Bold.ttf" if bold else "DejaVuSans.ttf"
    for root in spec.submodule_search_locations or ():
        path = Path(root) / "mpl-data" / "fonts" / "ttf" / name
        if path.is_file():
            return str(path)
    raise OSError(f"cannot find {name} in matplotlib's data; reinstall matplotlib")  # pragma: no cover


@functools.lru_cache(maxsize=32)
def font(size_pt: float, bold: bool = False):
    """PIL font of ``size_pt`` points at the pictures' resolution (cached)."""
    from PIL import ImageFont

    return ImageFont.truetype(_font_file(bool(bold)), size=size_pt * PX_PER_PT)


@functools.lru_cache(maxsize=32)
def _lp(size_pt: float, bold: bool) -> tuple:
    """Ascent and descent (pixels) of "lp": matplotlib's height of a line of text."""
    _, top, _, bottom = font(size_pt, bold).getbbox("lp", anchor="ls")
    return float(-top), float(bottom)


def _blend(rgb: np.ndarray, x0: int, y0: int, alpha: np.ndarray, colour) -> None:
    """Blend ``colour`` into ``rgb`` with coverage ``alpha`` (h, w) float in [0, 1] placed at (x0, y0)."""
    h, w = alpha.shape
    H, W = rgb.shape[:2]
    ax0, ay0 = max(0, -x0), max(0, -y0)
    ax1, ay1 = min(w, W - x0), min(h, H - y0)
    if ax1 <= ax0 or ay1 <= ay0:
        return
    a = alpha[ay0:ay1, ax0:ax1, None]
    dst = rgb[y0 + ay0:y0 + ay1, x0 + ax0:x0 + ax1]
    dst[...] = np.round(dst * (1 - a) + np.asarray(colour, np.float32) * a).astype(np.uint8)


def rounded_box(rgb: np.ndarray, left: float, top: float, right: float, bottom: float, *, radius: float,
                colour, alpha: float = 1.0) -> None:
    """Fill a rounded rectangle (pixels), blended with opacity ``alpha``, anti-aliased (each
    pixel covered by its share of the shape)."""
    x0, y0 = int(np.floor(left)) - 1, int(np.floor(top)) - 1
    x1, y1 = int(np.ceil(right)) + 1, int(np.ceil(bottom)) + 1
    r = max(0.0, min(radius, 0.5 * (right - left), 0.5 * (bottom - top)))
    cx, cy = 0.5 * (left + right), 0.5 * (top + bottom)
    hx, hy = 0.5 * (right - left) - r, 0.5 * (bottom - top) - r
    qx = np.abs(np.arange(x0, x1, dtype=np.float32) + np.float32(0.5 - cx))[None, :] - np.float32(hx)
    qy = np.abs(np.arange(y0, y1, dtype=np.float32) + np.float32(0.5 - cy))[:, None] - np.float32(hy)
    # signed distance of each pixel centre to the rounded rectangle's edge
    dist = np.hypot(np.maximum(qx, 0), np.maximum(qy, 0)) + np.minimum(np.maximum(qx, qy), 0) - np.float32(r)
    _blend(rgb, x0, y0, np.clip(np.float32(0.5) - dist, 0, 1) * np.float32(alpha), colour_rgb(colour))


def text(rgb: np.ndarray, s: str, x: float, y: float, *, size_pt: float, colour, bold: bool = False,
         ha: str = "left", va: str = "baseline", box=None) -> tuple:
    """Write ``s`` into ``rgb`` (in place) as matplotlib places a text at (x, y) pixels.

    Parameters
    ----------
    ha : {"left", "center", "right"}
    va : {"baseline", "top", "bottom", "center"}
        Of the text's box, as high as "lp" (matplotlib's rule).
    box : (colour, alpha), optional
        A rounded box behind the text (matplotlib's ``boxstyle="round"``: padded and rounded by
        0.3 of the font size).

    Returns
    -------
    tuple
        The text's box ``(left, top, right, bottom)`` in pixels (without the padding).
    """
    from PIL import Image, ImageDraw

    f = font(size_pt, bold)
    ascent, descent = _lp(size_pt, bold)
    width = f.getlength(s)
    left = x - {"left": 0.0, "center": 0.5, "right": 1.0}[ha] * width
    base = y + {"baseline": 0.0, "top": ascent, "bottom": -descent, "center": 0.5 * (ascent - descent)}[va]
    extent = (left, base - ascent, left + width, base + descent)
    if box is not None:
        pad = 0.3 * size_pt * PX_PER_PT
        rounded_box(rgb, extent[0] - pad, extent[1] - pad, extent[2] + pad, extent[3] + pad, radius=pad,
                    colour=box[0], alpha=box[1])
    l, t, r, b = f.getbbox(s, anchor="ls")
    x0, y0 = int(np.floor(left + l)) - 1, int(np.floor(base + t)) - 1
    patch = Image.new("L", (int(np.ceil(left + r)) - x0 + 2, int(np.ceil(base + b)) - y0 + 2))
    ImageDraw.Draw(patch).text((left - x0, base - y0), s, font=f, fill=255, anchor="ls")
    _blend(rgb, x0, y0, np.asarray(patch, np.float32) / np.float32(255), colour_rgb(colour))
    return extent


def slot_text(rgb: np.ndarray, tpl: Template, name: str, s: str) -> tuple:
    """Write ``s`` in the template's text slot ``name`` (its place and font)."""
    slot = tpl.texts[name]
    return text(rgb, s, slot["x"], slot["y"], size_pt=slot["size_pt"], colour=slot["colour"], bold=slot["bold"],
                ha=slot["ha"])


def data_px(tpl: Template, x, y, *, axes: int = 0) -> tuple:
    """Data coordinates of axes ``axes`` -> pixels (edges at whole numbers, top-left origin)."""
    left, top, right, bottom = tpl.axes[axes]
    xl, xr, yb, yt = tpl.limits[axes]
    px = left + (np.asarray(x, np.float64) - xl) / (xr - xl) * (right - left)
    py = bottom - (np.asarray(y, np.float64) - yb) / (yt - yb) * (bottom - top)
    return px, py


def _dashed(px: np.ndarray, py: np.ndarray, on: float, off: float) -> list:
    """Split a polyline (pixels) into dashes of ``on`` pixels every ``on + off``."""
    seg = np.hypot(np.diff(px), np.diff(py))
    s = np.concatenate([[0.0], np.cumsum(seg)])
    period = on + off
    pieces = []
    for start in np.arange(0.0, s[-1], period):
        end = min(start + on, s[-1])
        inner = (s > start) & (s < end)
        d = np.concatenate([[start], s[inner], [end]])
        pieces.append((np.interp(d, s, px), np.interp(d, s, py)))
    return pieces


def _stroke(rgb: np.ndarray, lines, colour, width_px: float, clip, *, cap: str = "butt", closed: bool = False) -> None:
    """Stroke polylines (pixel edges at whole numbers) ``width_px`` wide into ``rgb`` within
    ``clip`` (x0, y0, x1, y1), anti-aliased: each pixel takes the share of it the stroke covers
    (from its centre's distance to the nearest piece), joins round, ends ``cap``
    ("butt", "round" or "projecting", as matplotlib's cap styles)."""
    import cv2

    half = 0.5 * width_px
    clip = np.asarray(clip)
    a_list, b_list, first, last = [], [], [], []
    for px, py in lines:
        pts = np.stack([np.asarray(px, np.float64), np.asarray(py, np.float64)], -1) - 0.5  # pixel centres at whole numbers
        if len(pts) > 3:  # as matplotlib simplifies a path: points off the line by under 1/9 pixel go
            pts = cv2.approxPolyDP(pts.astype(np.float32)[:, None], 1 / 9, closed)[:, 0].astype(np.float64)
        if closed:
            pts = np.concatenate([pts, pts[:1]])
        if len(pts) < 2:
            continue
        keep = np.concatenate([[True], np.any(np.abs(np.diff(pts, axis=0)) > 1e-9, axis=1)])
        pts = pts[keep] if keep.sum() >= 2 else pts[:2]
        if cap == "projecting" and not closed:
            for i, j in ((0, 1), (-1, -2)):
                d = pts[i] - pts[j]
                pts[i] = pts[i] + d / max(np.hypot(*d), 1e-12) * half
        n = len(pts) - 1
        a_list.append(pts[:-1])
        b_list.append(pts[1:])
        f = np.zeros(n, bool)
        g = np.zeros(n, bool)
        if not closed:
            f[0], g[-1] = True, True
        first.append(f)
        last.append(g)
    if not a_list:
        return
    a, b = np.concatenate(a_list), np.concatenate(b_list)
    first, last = np.concatenate(first), np.concatenate(last)
    lengths = np.maximum(np.hypot(*(b - a).T), 1e-9)
    unit = (b - a) / lengths[:, None]
    # pixels near any piece, labelled with a piece they lie beside (OpenCV draws the bands)
    reach = half + 2
    lo = np.maximum(np.floor(np.minimum(a, b).min(axis=0) - reach).astype(int), clip[:2])
    hi = np.minimum(np.ceil(np.maximum(a, b).max(axis=0) + reach).astype(int) + 1, clip[2:])
    if np.any(hi <= lo):
        return
    label = np.zeros((hi[1] - lo[1], hi[0] - lo[0]), np.int32)
    band = int(np.ceil(width_px + 2))  # covers the anti-aliased fringe
    pa = np.round((a - lo) * (1 << _SHIFT)).astype(np.int64).tolist()
    pb = np.round((b - lo) * (1 << _SHIFT)).astype(np.int64).tolist()
    for k in range(len(pa)):
        cv2.line(label, pa[k], pb[k], k + 1, band, cv2.LINE_8, _SHIFT)
    ys, xs = np.nonzero(label)
    if not ys.size:
        return
    k = label[ys, xs] - 1
    px, py = (xs + lo[0]).astype(np.float32), (ys + lo[1]).astype(np.float32)
    # a pixel's nearest piece is the one it is labelled with or one of the next few along the
    # same polyline (a closed one wraps): as many as pieces fit in the band
    counts = np.array([len(x) for x in a_list])
    starts = np.repeat(np.cumsum(counts) - counts, counts)[k]
    sizes = np.repeat(counts, counts)[k]
    n_near = int(min(np.ceil(band / lengths.min()), 64, counts.max() // 2 if closed else counts.max() - 1))
    ax, ay, ux, uy = (v.astype(np.float32) for v in (a[:, 0], a[:, 1], unit[:, 0], unit[:, 1]))
    length = lengths.astype(np.float32)
    half32 = np.float32(half + 0.5)
    cover = np.zeros(len(k), np.float32)
    sub = slice(None)  # the pixels a piece other than their own may be nearer to: near its ends
    for offset in [0] + [o for o in range(-n_near, n_near + 1) if o]:
        kk, st, sz = k[sub], starts[sub], sizes[sub]
        i = kk - st + offset
        seg = st + (np.mod(i, sz) if closed else np.minimum(np.maximum(i, 0), sz - 1))
        dx, dy = px[sub] - ax[seg], py[sub] - ay[seg]
        sx, sy = ux[seg], uy[seg]
        u = dx * sx + dy * sy  # along the piece, pixels from its start
        lateral = np.abs(dx * sy - dy * sx)
        along = np.maximum(np.maximum(-u, u - length[seg]), 0)
        c = half32 - np.hypot(lateral, along)  # round joins (and round ends)
        if cap != "round":  # square ends where a polyline ends
            end = (first[seg] & (u < 0)) | (last[seg] & (u > length[seg]))
            c[end] = np.minimum(half32 - lateral[end], 1) * np.minimum(np.maximum(0.5 - along[end], 0), 1)
        if offset == 0:
            cover = c
            sub = np.flatnonzero((u < band) | (u > length[seg] - band))
        else:
            cover[sub] = np.maximum(cover[sub], c)
    on = cover > 0
    at = (ys[on] + lo[1]) * rgb.shape[1] + (xs[on] + lo[0])
    cover = np.minimum(cover[on], 1)[:, None]
    flat = rgb.reshape(-1, 3)  # a view: ``rgb`` is a composed picture (contiguous)
    flat[at] = (flat[at] * (1 - cover) + np.asarray(colour_rgb(colour), np.float32) * cover + 0.5).astype(np.uint8)


def polyline(rgb: np.ndarray, tpl: Template, x, y, *, colour, width_pt: float, axes: int = 0, style: str = "-",
             cap: str | None = None) -> None:
    """Draw a line through data points ``(x, y)`` of axes ``axes``, clipped to its data box.

    A line of horizontal and vertical pieces is snapped to pixel centres, as matplotlib does.
    ``style`` is ``"-"`` (solid), ``"--"`` (dashed) or ``":"`` (dotted), the dashes scaled by
    the width as matplotlib scales them (``lines.scale_dashes``); ``cap`` as matplotlib's
    (default: "projecting" for solid lines, "butt" for dashes).
    """
    px, py = data_px(tpl, x, y, axes=axes)
    if np.all((np.abs(np.diff(px)) < 1e-6) | (np.abs(np.diff(py)) < 1e-6)):
        # matplotlib snaps a line of horizontal and vertical pieces to pixel centres (crisp)
        px, py = np.floor(px) + 0.5, np.floor(py) + 0.5
    lines = [(px, py)]
    if style != "-":
        on, off = (v * width_pt * PX_PER_PT for v in DASHES[style])
        lines = _dashed(px, py, on, off)
    _stroke(rgb, lines, colour, width_pt * PX_PER_PT, tpl.boxes[axes],
            cap=cap or ("projecting" if style == "-" else "butt"))


def outline(rgb: np.ndarray, tpl: Template, mask: np.ndarray, *, colour, width_pt: float, step: int = 1,
            axes: int = 0) -> None:
    """Outline the edges of ``mask`` (h, w) bool (decimated by ``step``, shown in the data box
    of ``axes``): along the edges between pixels inside and outside, as a contour of the mask at
    0.5 runs, clipped to the box; the image's own border is no edge."""
    import cv2

    left, top, right, bottom = tpl.axes[axes]
    h, w = mask.shape
    px_per_sample = min((right - left) / max(w, 1), (bottom - top) / max(h, 1))
    pad = int(np.ceil((width_pt * PX_PER_PT) / max(px_per_sample, 1e-6))) + 2
    m = cv2.copyMakeBorder(np.asarray(mask, np.uint8), pad, pad, pad, pad, cv2.BORDER_REPLICATE)
    # corner (i, j) lies between pixels; it is inside when a pixel it touches is, so the corners'
    # outer boundary runs along the pixels' edges (the border padding falls outside the box)
    corners = cv2.dilate(m, np.ones((2, 2), np.uint8), anchor=(1, 1), borderType=cv2.BORDER_REPLICATE)
    corners = np.pad(corners, ((0, 1), (0, 1)), mode="edge")
    contours, _ = cv2.findContours(corners, cv2.RETR_LIST, cv2.CHAIN_APPROX_SIMPLE)
    lines = []
    for c in contours:
        jx = (c[:, 0, 0] - pad - 0.5) * step
        iy = (c[:, 0, 1] - pad - 0.5) * step
        lines.append(data_px(tpl, jx, iy, axes=axes))
    _stroke(rgb, lines, colour, width_pt * PX_PER_PT, tpl.boxes[axes], closed=True)


def blend_overlay(rgb: np.ndarray, tpl: Template) -> None:
    """Draw the template's overlay (what matplotlib draws over the data) onto ``rgb``."""
    if tpl.overlay is None or not len(tpl.overlay):
        return
    flat = rgb.reshape(-1, 3)  # a view: ``rgb`` is a composed picture (contiguous)
    keep, paint = _overlay_weights(tpl.overlay)
    flat[tpl.overlay_at] = (flat[tpl.overlay_at] * keep + paint).astype(np.uint8)


_WEIGHTS: dict = {}


def _overlay_weights(overlay: np.ndarray) -> tuple:
    """(1 - alpha, colour * alpha + 0.5) of an overlay, float32, kept per overlay array."""
    key = id(overlay)
    if key not in _WEIGHTS or _WEIGHTS[key][0] is not overlay:
        a = overlay[:, 3:].astype(np.float32) / np.float32(255)
        _WEIGHTS[key] = (overlay, 1 - a, overlay[:, :3] * a + np.float32(0.5))
    return _WEIGHTS[key][1:]


def region_label(rgb: np.ndarray, tpl: Template, mask: np.ndarray, label: str, *, step: int = 1, colour,
                 axes: int = 0) -> None:
    """Label a region ``mask`` (decimated by ``step``) at its upper left corner: bold, 8 pt, on a
    half-transparent black box (nothing for an empty mask)."""
    rows, cols = np.flatnonzero(mask.any(axis=1)), np.flatnonzero(mask.any(axis=0))
    if rows.size:
        px, py = data_px(tpl, cols[0] * step, rows[0] * step, axes=axes)
        text(rgb, label, px + 2 * PX_PER_PT, py + 4 * PX_PER_PT, size_pt=8, colour=colour, bold=True, va="top",
             box=(COLOURS["outline"], 0.5))


def _axis_ends(angle_deg: float, shape, step: int):
    h, w = shape
    cx, cy = (w - 1) / 2 * step, (h - 1) / 2 * step
    half = 0.42 * min(h, w) * step
    th = np.radians(angle_deg)
    dx, dy = half * np.cos(th), -half * np.sin(th)  # row index grows downward
    return [cx - dx, cx + dx], [cy - dy, cy + dy]


def filter_axis(rgb: np.ndarray, tpl: Template, angle_deg: float, shape, *, step: int = 1, colour=None,
                axes: int = 0) -> None:
    """A filter's transmission axis through the centre of an image of ``shape`` (h, w)
    decimated by ``step``, at ``angle_deg`` (image convention: counter-clockwise from +x as
    displayed), outlined black."""
    xs, ys = _axis_ends(angle_deg, shape, step)
    polyline(rgb, tpl, xs, ys, colour=COLOURS["outline"], width_pt=5, axes=axes, cap="round")
    polyline(rgb, tpl, xs, ys, colour=colour or COLOURS["recommended_axis"], width_pt=2.5, axes=axes, cap="round")


def filter_axis_label(rgb: np.ndarray, tpl: Template, angle_deg: float, shape, label: str, *, step: int = 1,
                      colour=None, axes: int = 0) -> None:
    """The label of :func:`filter_axis` beyond its end: bold, 9 pt, on a black box."""
    xs, ys = _axis_ends(angle_deg, shape, step)
    px, py = data_px(tpl, xs[1], ys[1], axes=axes)
    text(rgb, label, px + 6 * PX_PER_PT, py - 6 * PX_PER_PT, size_pt=9, colour=colour or COLOURS["recommended_axis"],
         bold=True, box=(COLOURS["outline"], 0.6))
