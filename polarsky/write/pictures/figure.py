"""Matplotlib helpers shared by the pictures: figures on no global state, the checkerboard,
tone mapping, the recommended filter axis, region outlines (:mod:`.marks` draws the same
marks without matplotlib, on cached templates).

Matplotlib's object-oriented API on the Agg canvas (no pyplot state, safe in worker processes).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ..._shared.stats import percentile as percentile_of
from ...core.transfer import linear_to_srgb
from ...palette import CHECKER_GREYS
from .canvas import DPI

__all__ = ["new_figure", "save_figure", "checker", "tone_map", "draw_axis", "outline_region"]


def new_figure(width_in=8.0, height_in=6.0, *, layout="constrained"):
    """A figure on no global state; ``layout=None`` skips the (slow) layout engine."""
    from matplotlib.figure import Figure

    return Figure(figsize=(width_in, height_in), dpi=DPI, layout=layout)


def save_figure(fig, path) -> Path:
    """Render ``fig`` on the Agg canvas and write it as PNG.

    The pixels are those ``fig.savefig(path, dpi=DPI)`` writes (the figure is made at
    :data:`DPI`); the PNG is written by :func:`.canvas.write_png` (ISA-L deflate, Up filter),
    several times faster than Pillow's encoder on these pictures.
    """
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    from .canvas import write_png

    canvas = FigureCanvasAgg(fig)
    if fig.dpi != DPI:
        fig.set_dpi(DPI)
    canvas.draw()
    return write_png(path, np.asarray(canvas.buffer_rgba()))


def checker(shape, cell: int = 6) -> np.ndarray:
    """Grey checkerboard RGB (float) of ``shape`` (h, w) marking pixels with no data."""
    h, w = shape
    yy, xx = np.mgrid[0:h, 0:w]
    on = ((yy // cell + xx // cell) % 2).astype(np.float32)
    g = CHECKER_GREYS[0] + (CHECKER_GREYS[1] - CHECKER_GREYS[0]) * on
    return np.repeat(g[..., None], 3, axis=2)


def tone_map(s0, valid=None, *, percentile: float = 99.5) -> np.ndarray:
    """Linear intensity -> display value in [0, 1] (scaled to a high percentile, sRGB-encoded)."""
    s = np.asarray(s0, dtype=np.float32)
    ok = np.isfinite(s) if valid is None else (valid & np.isfinite(s))
    top = percentile_of(s[ok], percentile) if ok.any() else 1.0
    top = top if top > 0 else 1.0
    return linear_to_srgb(np.clip(np.nan_to_num(s / top), 0, 1)).astype(np.float32)


def draw_axis(ax, angle_deg, shape, *, step=1, color=None, label=None):
    """Draw a transmission axis through the image centre at ``angle_deg`` (image convention)."""
    from ...palette import COLOURS

    color = color or COLOURS["recommended_axis"]
    h, w = shape
    cx, cy = (w - 1) / 2 * step, (h - 1) / 2 * step
    half = 0.42 * min(h, w) * step
    th = np.radians(angle_deg)
    dx, dy = half * np.cos(th), -half * np.sin(th)  # row index grows downward
    ax.plot([cx - dx, cx + dx], [cy - dy, cy + dy], color="black", lw=5, solid_capstyle="round")
    ax.plot([cx - dx, cx + dx], [cy - dy, cy + dy], color=color, lw=2.5, solid_capstyle="round")
    if label:
        ax.annotate(label, (cx + dx, cy + dy), color=color, fontsize=9, fontweight="bold",
                    xytext=(6, 6), textcoords="offset points",
                    bbox=dict(boxstyle="round", fc="black", alpha=0.6, lw=0))


def outline_region(ax, mask, step, color, label):
    """Outline a region mask (decimated by ``step``) and label it at its upper left corner."""
    ax.contour(np.arange(mask.shape[1]) * step, np.arange(mask.shape[0]) * step, mask.astype(float),
               levels=[0.5], colors=[color], linewidths=1.8)
    ys, xs = np.nonzero(mask)
    if ys.size:
        ax.annotate(label, (xs.min() * step, ys.min() * step), color=color, fontsize=8, fontweight="bold",
                    xytext=(2, -4), textcoords="offset points", va="top",
                    bbox=dict(boxstyle="round", fc="black", alpha=0.5, lw=0))
