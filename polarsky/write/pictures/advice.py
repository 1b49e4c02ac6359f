"""Pictures for filter-angle advice: the recommended axis, the predicted view, the curve."""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ...core.stokes import intensity_at
from ...palette import AXIS_LABEL_X, AXIS_LABEL_Y, COLOURS
from .figure import checker, draw_axis, new_figure, save_figure

__all__ = ["advice_pictures", "outline_region"]


def outline_region(ax, mask, step, color, label):
    """Outline a region mask (decimated by ``step``) and label it at its upper left corner."""
    ax.contour(np.arange(mask.shape[1]) * step, np.arange(mask.shape[0]) * step, mask.astype(float),
               levels=[0.5], colors=[color], linewidths=1.8)
    ys, xs = np.nonzero(mask)
    if ys.size:
        ax.annotate(label, (xs.min() * step, ys.min() * step), color=color, fontsize=8, fontweight="bold",
                    xytext=(2, -4), textcoords="offset points", va="top",
                    bbox=dict(boxstyle="round", fc="black", alpha=0.5, lw=0))


def _rgb(lin, valid, top):
    """(C, h, w) linear -> display RGB with a fixed white point ``top``."""
    from ...core.transfer import linear_to_srgb

    img = np.clip(np.nan_to_num(lin / top), 0, 1)
    img = linear_to_srgb(img)
    img = np.repeat(img, 3, axis=0) if img.shape[0] == 1 else img
    rgb = np.moveaxis(img, 0, -1).astype(np.float32)
    rgb[~valid] = checker(rgb.shape[:2])[~valid]
    return rgb


def advice_pictures(prev: dict, masks: dict, result: dict, out_dir, *, step: int = 1, diattenuation: float = 1.0):
    """Write ``advice_axis.png``, ``advice_preview.png`` and ``advice_curve.png``."""
    out_dir = Path(out_dir)
    sub = {k: m[::step, ::step] for k, m in masks.items()}
    valid = prev["valid"].all(axis=0)
    h, w = valid.shape
    ext = (-0.5 * step, (w - 0.5) * step, (h - 0.5) * step, -0.5 * step)
    best = result["best_angle_deg"]
    frame0 = prev["frame0"]
    top = float(np.percentile(np.max(prev["S0"], axis=0)[valid], 99.5) * 0.5) if valid.any() else 1.0
    top = top if top > 0 else 1.0

    # 1. the frame as shot, with regions and the recommended axis
    fig = new_figure(8.5, max(3.5, 8.0 * h / max(w, 1) + 1.0))
    ax = fig.add_subplot()
    ax.imshow(_rgb(frame0, valid | np.isfinite(frame0).all(axis=0), max(top, 1e-6)), extent=ext, interpolation="nearest")
    outline_region(ax, sub["region"], step, COLOURS["region"], "region (darken)")
    if "protect" in sub:
        outline_region(ax, sub["protect"], step, COLOURS["protect"], "protected region (keep)")
    draw_axis(ax, best, (h, w), step=step, label=f"filter axis {best:.1f} deg")
    ax.set_title("Recommended filter transmission axis (first frame of the bracket)")
    ax.set_xlabel(AXIS_LABEL_X)
    ax.set_ylabel(AXIS_LABEL_Y)
    from matplotlib.lines import Line2D

    handles = [Line2D([], [], color=COLOURS["region"], lw=2, label="region (darken)"),
               Line2D([], [], color=COLOURS["recommended_axis"], lw=2.5, label=f"set the filter axis here: {best:.1f} deg")]
    if "protect" in sub:
        handles.insert(1, Line2D([], [], color=COLOURS["protect"], lw=2, label="protected region (keep)"))
    ax.legend(handles=handles, loc="lower right", fontsize=8, framealpha=0.8)
    paths = [save_figure(fig, out_dir / "advice_axis.png")]

    # 2. predicted view: no filter (S0/2, the mean over a turn) vs at the best angle
    s = np.stack([prev["S0"], prev["S1"], prev["S2"]])
    at_best = intensity_at(s, best, diattenuation=diattenuation)
    mean_turn = 0.5 * prev["S0"]
    fig = new_figure(11.0, max(3.2, 5.2 * h / max(w, 1) + 1.2))
    axs = fig.subplots(1, 2)
    for a, img, title in ((axs[0], mean_turn, "filter at a random angle (mean over a turn)"),
                          (axs[1], at_best, f"filter at {best:.1f} deg (predicted)")):
        a.imshow(_rgb(img, valid, top), extent=ext, interpolation="nearest")
        a.set_title(title, fontsize=10)
        a.set_xticks([])
        a.set_yticks([])
        outline_region(a, sub["region"], step, COLOURS["region"], "region")
        if "protect" in sub:
            outline_region(a, sub["protect"], step, COLOURS["protect"], "protected region")
    fig.suptitle(f"Same brightness scale in both panels; region {result['reduction_stops']:.2f} stops darker at the best angle",
                 fontsize=10)
    paths.append(save_figure(fig, out_dir / "advice_preview.png"))

    # 3. transmission of each region against filter angle
    fig = new_figure(7.0, 4.0)
    ax = fig.add_subplot()
    th = np.linspace(0, 180, 361)
    for key, color, label in (("region", COLOURS["region"], "region"), ("protect", COLOURS["protect"], "protected region")):
        if key not in masks:
            continue
        m = masks[key][::step, ::step] & valid
        sv = np.array([np.nansum(prev[n][:, m]) for n in ("S0", "S1", "S2")])
        if sv[0] > 0:
            ax.plot(th, intensity_at(sv[:, None], th, diattenuation=diattenuation) / sv[0], color=color, lw=2, label=label)
    ax.axvline(best, color=COLOURS["recommended_axis"], lw=2, ls="--", label=f"recommended {best:.1f} deg")
    ax.axhline(0.5, color="0.6", lw=1, ls=":", label="no polarization (0.5)")
    ax.set_xlim(0, 180)
    ax.set_xticks(range(0, 181, 30))
    ax.set_xlabel("filter transmission axis (deg, counter-clockwise from image +x)")
    ax.set_ylabel("transmitted fraction of S0")
    ax.set_title("Transmission against filter angle")
    ax.legend(fontsize=8)
    paths.append(save_figure(fig, out_dir / "advice_curve.png"))
    return paths
