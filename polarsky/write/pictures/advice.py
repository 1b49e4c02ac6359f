"""Pictures for filter-angle advice: the recommended axis, the predicted view, the curve.

* ``advice_axis.png``: the first frame with the regions outlined, the recommended filter axis
  and a legend;
* ``advice_preview.png``: the mean over a filter turn beside the predicted view at the
  recommended angle, on one brightness scale, regions outlined;
* ``advice_curve.png``: the transmitted fraction of each region against the filter angle
  (0..1: the axes never depend on the data), the recommended angle and the 0.5 of an
  unpolarized region.

Each picture is a cached template (:mod:`.canvas`: titles, axis labels, ticks, frame and the
legend's fixed entries, drawn once by matplotlib) with the data drawn on it by :mod:`.marks`
(image, outlines, the axis line, curves, and the numbers in titles and legends), so no figure
is drawn per picture and matplotlib is not imported once the templates are cached.
"""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np

from ...core.stokes import intensity_at
from ...palette import AXIS_LABEL_X, AXIS_LABEL_Y, COLOURS
from .canvas import compose, template, write_png
from .marks import blend_overlay, filter_axis, filter_axis_label, outline, polyline, region_label, slot_text

__all__ = ["advice_pictures", "axis_picture", "preview_picture", "curve_picture", "display_rgb",
           "CURVE_YLIM", "REGION_NAMES"]

#: mask key -> (colour name, label in the axis picture, label in the other pictures)
REGION_NAMES = {"region": ("region", "region (darken)", "region"),
                "protect": ("protect", "protected region (keep)", "protected region")}
#: the curve picture's fixed y-range: a transmitted fraction lies in [0, 1]
CURVE_YLIM = (-0.03, 1.03)
_CURVE_LEGEND_LOCS = ("upper right", "upper left", "lower left", "lower right")


def _same_width(text: str) -> str:
    """``text`` with every digit a 0: as wide in DejaVu Sans (its figures share one width), so a
    template drawn with it leaves room for any number of as many digits."""
    return re.sub(r"\d", "0", text)


def _extent(shape, step):
    h, w = shape
    return (-0.5 * step, (w - 0.5) * step, (h - 0.5) * step, -0.5 * step)


def display_rgb(lin, valid, top) -> np.ndarray:
    """(C, h, w) linear -> 8-bit sRGB with the white point ``top``: (h, w) grey for one channel,
    (h, w, 3) for three; pixels not valid checkered."""
    from .canvas import checker_grey, display_srgb

    img = display_srgb(lin, 1.0 / top)
    img = img[0] if img.shape[0] == 1 else np.ascontiguousarray(np.moveaxis(img, 0, -1))
    if not valid.all():
        checker = checker_grey(valid.shape)
        img[~valid] = checker[~valid] if img.ndim == 2 else checker[~valid][:, None]
    return img


def _outlines(out, tpl, masks, *, step, axes=0):
    for key in (k for k in REGION_NAMES if k in masks):
        outline(out, tpl, masks[key], colour=COLOURS[REGION_NAMES[key][0]], width_pt=1.8, step=step, axes=axes)


def _labels(out, tpl, masks, which, *, step, axes=0):
    for key in (k for k in REGION_NAMES if k in masks):
        region_label(out, tpl, masks[key], REGION_NAMES[key][which], step=step, colour=COLOURS[REGION_NAMES[key][0]],
                     axes=axes)


# 1. the frame as shot, with regions and the recommended axis

def _draw_axis(p):
    from matplotlib.lines import Line2D

    from .figure import new_figure

    h, w = p["shape"]
    fig = new_figure(8.5, max(3.5, 8.0 * h / max(w, 1) + 1.0))
    ax = fig.add_subplot()
    ax.imshow(np.zeros((h, w)), extent=_extent((h, w), p["step"]), cmap="gray", vmin=0, vmax=1, interpolation="nearest")
    ax.set_title("Recommended filter transmission axis (first frame of the bracket)")
    ax.set_xlabel(AXIS_LABEL_X)
    ax.set_ylabel(AXIS_LABEL_Y)
    handles = [Line2D([], [], color=COLOURS[REGION_NAMES[k][0]], lw=2, label=REGION_NAMES[k][1]) for k in p["regions"]]
    handles.append(Line2D([], [], color=COLOURS["recommended_axis"], lw=2.5, label=p["axis_label"]))
    legend = ax.legend(handles=handles, loc="lower right", fontsize=8, framealpha=0.8)
    return {"figure": fig, "axes": [ax], "overlay": [*ax.spines.values(), legend],
            "texts": {"axis_label": legend.get_texts()[-1]}}


def axis_picture(frame0, valid, masks: dict, best_deg: float, *, top: float, step: int = 1) -> np.ndarray:
    """``advice_axis.png`` as (H, W, 3) uint8: ``frame0`` (C, h, w) linear, ``masks`` decimated
    like it (``"region"``, optionally ``"protect"``)."""
    h, w = valid.shape
    label = f"set the filter axis here: {best_deg:.1f} deg"
    tpl = template("advice_axis", {"shape": [h, w], "step": int(step), "regions": [k for k in REGION_NAMES if k in masks],
                                   "axis_label": _same_width(label)}, _draw_axis)
    out = compose(tpl, display_rgb(frame0, valid, top))
    # matplotlib's order: lines, then texts, then the legend
    _outlines(out, tpl, masks, step=step)
    filter_axis(out, tpl, best_deg, (h, w), step=step)
    _labels(out, tpl, masks, 1, step=step)
    filter_axis_label(out, tpl, best_deg, (h, w), f"filter axis {best_deg:.1f} deg", step=step)
    blend_overlay(out, tpl)
    slot_text(out, tpl, "axis_label", label)
    return out


# 2. predicted view: no filter (S0/2, the mean over a turn) vs at the best angle

def _draw_preview(p):
    from .figure import new_figure

    h, w = p["shape"]
    fig = new_figure(11.0, max(3.2, 5.2 * h / max(w, 1) + 1.2))
    axs = fig.subplots(1, 2)
    titles = []
    for a, title in zip(axs, ("filter at a random angle (mean over a turn)", p["title"])):
        a.imshow(np.zeros((h, w)), extent=_extent((h, w), p["step"]), cmap="gray", vmin=0, vmax=1,
                 interpolation="nearest")
        titles.append(a.set_title(title, fontsize=10))
        a.set_xticks([])
        a.set_yticks([])
    sup = fig.suptitle(p["suptitle"], fontsize=10)
    return {"figure": fig, "axes": list(axs), "overlay": [sp for a in axs for sp in a.spines.values()],
            "texts": {"title": titles[1], "suptitle": sup}}


def _preview_words(best_deg, reduction_stops):
    darker = ("removed completely" if reduction_stops is None or not np.isfinite(reduction_stops)
              else f"{reduction_stops:.2f} stops darker")
    return (f"filter at {best_deg:.1f} deg (predicted)",
            f"Same brightness scale in both panels; region {darker} at the best angle")


def preview_picture(s, valid, masks: dict, best_deg: float, reduction_stops, *, top: float, step: int = 1,
                    diattenuation: float = 1.0) -> np.ndarray:
    """``advice_preview.png`` as (H, W, 3) uint8 from ``s`` (3, C, h, w) linear Stokes."""
    h, w = valid.shape
    title, suptitle = _preview_words(best_deg, reduction_stops)
    # centred texts: their place does not depend on their words
    tpl = template("advice_preview", {"shape": [h, w], "step": int(step), "title": "filter at 0.0 deg (predicted)",
                                      "suptitle": "Same brightness scale in both panels"}, _draw_preview)
    at_best = intensity_at(s, best_deg, diattenuation=diattenuation).astype(np.float32)
    out = compose(tpl, display_rgb(0.5 * s[0], valid, top), display_rgb(at_best, valid, top))
    for axes in (0, 1):
        _outlines(out, tpl, masks, step=step, axes=axes)
    blend_overlay(out, tpl)  # the frames
    for axes in (0, 1):
        _labels(out, tpl, masks, 2, step=step, axes=axes)
    slot_text(out, tpl, "title", title)
    slot_text(out, tpl, "suptitle", suptitle)
    return out


# 3. transmission of each region against filter angle

def _draw_curve(p):
    from matplotlib.lines import Line2D

    from .figure import new_figure

    fig = new_figure(7.0, 4.0)
    ax = fig.add_subplot()
    ax.set_xlim(0, 180)
    ax.set_ylim(*CURVE_YLIM)
    ax.set_xticks(range(0, 181, 30))
    ax.set_yticks(np.linspace(0, 1, 11))
    ax.set_xlabel("filter transmission axis (deg, counter-clockwise from image +x)")
    ax.set_ylabel("transmitted fraction of S0")
    ax.set_title("Transmission against filter angle")
    handles = [Line2D([], [], color=COLOURS[REGION_NAMES[k][0]], lw=2, label=REGION_NAMES[k][2]) for k in p["curves"]]
    handles.append(Line2D([], [], color=COLOURS["recommended_axis"], lw=2, ls="--", label=p["recommended"]))
    half = ax.axhline(0.5, color="0.6", lw=1, ls=":", label="no polarization (0.5)")
    legend = ax.legend(handles=[*handles, half], loc=p["loc"], fontsize=8)
    return {"figure": fig, "axes": [ax], "overlay": [half, *ax.spines.values(), legend],
            "texts": {"recommended": legend.get_texts()[-2]},
            "extents": {"legend": legend}}


def _legend_loc(tpl, points) -> str:
    """The corner of the axes whose legend (as large as in ``tpl``, drawn upper right) covers
    the fewest of ``points`` (pixels): matplotlib's ``loc="best"`` among the corners."""
    left, top, right, bottom = tpl.axes[0]
    l, t, r, b = tpl.extents["legend"]
    gap_x, gap_y, w, h = right - r, t - top, r - l, b - t
    px, py = points
    best, fewest = _CURVE_LEGEND_LOCS[0], None
    for loc in _CURVE_LEGEND_LOCS:
        x0 = right - gap_x - w if loc.endswith("right") else left + gap_x
        y0 = top + gap_y if loc.startswith("upper") else bottom - gap_y - h
        n = int(np.count_nonzero((px >= x0) & (px <= x0 + w) & (py >= y0) & (py <= y0 + h)))
        if fewest is None or n < fewest:
            best, fewest = loc, n
    return best


def curve_picture(sums: dict, best_deg: float, *, diattenuation: float = 1.0) -> np.ndarray:
    """``advice_curve.png`` as (H, W, 3) uint8 from each region's summed (S0, S1, S2)."""
    th = np.linspace(0, 180, 361)
    curves = {k: intensity_at(np.asarray(sums[k], np.float64)[:, None], th, diattenuation=diattenuation) / sums[k][0]
              for k in REGION_NAMES if k in sums and sums[k][0] > 0}
    label = f"recommended {best_deg:.1f} deg"
    params = {"curves": list(curves), "recommended": _same_width(label), "loc": _CURVE_LEGEND_LOCS[0]}
    tpl = template("advice_curve", params, _draw_curve)
    from .marks import data_px

    ys = [*curves.values(), np.linspace(*CURVE_YLIM, 50)]
    xs = [th] * len(curves) + [np.full(50, best_deg)]
    loc = _legend_loc(tpl, data_px(tpl, np.concatenate(xs), np.concatenate(ys)))
    if loc != params["loc"]:
        tpl = template("advice_curve", {**params, "loc": loc}, _draw_curve)
    out = tpl.rgb.copy()
    for key, y in curves.items():
        polyline(out, tpl, th, y, colour=COLOURS[REGION_NAMES[key][0]], width_pt=2)
    polyline(out, tpl, [best_deg, best_deg], list(CURVE_YLIM), colour=COLOURS["recommended_axis"], width_pt=2, style="--")
    blend_overlay(out, tpl)
    slot_text(out, tpl, "recommended", label)
    return out


def _white_point(s0, valid) -> float:
    """Half the 99.5th percentile of the brightest channel's S0 over valid pixels (the mean
    over a filter turn at that level shows white)."""
    from ..._shared.stats import percentile

    top = percentile(np.max(s0, axis=0)[valid], 99.5) * 0.5 if valid.any() else 1.0
    return top if top > 0 else 1.0


def advice_pictures(prev: dict, masks: dict, result: dict, out_dir, *, step: int = 1, diattenuation: float = 1.0):
    """Write ``advice_axis.png``, ``advice_preview.png`` and ``advice_curve.png``.

    ``prev`` holds the preview sink's decimated (C, h, w) ``S0``, ``S1``, ``S2``, ``valid``
    and ``frame0``; ``masks`` the full-size ``"region"`` (and ``"protect"``) masks.
    """
    out_dir = Path(out_dir)
    sub = {k: m[::step, ::step] for k, m in masks.items()}
    valid = prev["valid"].all(axis=0)
    best = result["best_angle_deg"]
    frame0 = prev["frame0"]
    top = _white_point(prev["S0"], valid)
    s = np.stack([prev["S0"], prev["S1"], prev["S2"]])
    sums = {}
    for key, m in sub.items():
        at = np.flatnonzero(m & valid)
        sums[key] = np.array([np.nansum(np.take(prev[n].reshape(len(prev[n]), -1), at, axis=1)) for n in ("S0", "S1", "S2")])
    return [
        write_png(out_dir / "advice_axis.png",
                  axis_picture(frame0, valid | np.isfinite(frame0).all(axis=0), sub, best, top=max(top, 1e-6), step=step)),
        write_png(out_dir / "advice_preview.png",
                  preview_picture(s, valid, sub, best, result["reduction_stops"], top=top, step=step,
                                  diattenuation=diattenuation)),
        write_png(out_dir / "advice_curve.png", curve_picture(sums, best, diattenuation=diattenuation)),
    ]
