"""Pictures of polarization results, each with a colour key.

Matplotlib's object-oriented API on the Agg canvas (no pyplot state, safe in worker
processes).  Pixels that are not valid are drawn as a grey checkerboard, never as zero.
Maps of angles use a cyclic colour map (``twilight``) because 0 and 180 deg are the same
orientation.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ...core.transfer import linear_to_srgb
from ...palette import AXIS_LABEL_X, AXIS_LABEL_Y, CHECKER_GREYS, INVALID_NOTE

__all__ = [
    "INVALID_NOTE",
    "checker",
    "tone_map",
    "save_map_png",
    "stokes_pictures",
    "composite_rgb",
    "draw_axis",
    "new_figure",
    "save_figure",
]

DOLP_FULL_SATURATION = 0.6


def new_figure(width_in=8.0, height_in=6.0, *, layout="constrained"):
    """A figure on no global state; ``layout=None`` skips the (slow) layout engine."""
    from matplotlib.figure import Figure

    return Figure(figsize=(width_in, height_in), dpi=110, layout=layout)


def save_figure(fig, path) -> Path:
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    FigureCanvasAgg(fig)
    fig.savefig(path, dpi=110, pil_kwargs={"compress_level": 3})
    return Path(path)


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
    top = np.percentile(s[ok], percentile) if ok.any() else 1.0
    top = top if top > 0 else 1.0
    return linear_to_srgb(np.clip(np.nan_to_num(s / top), 0, 1)).astype(np.float32)


def _fig_size(shape, extra_w=2.2):
    h, w = shape
    aspect = h / max(w, 1)
    width = 7.5
    return width + extra_w, max(3.0, width * aspect + 0.9)


def save_map_png(path, array, *, kind: str, title: str, valid=None, vmin=None, vmax=None, cmap=None,
                 label: str = "", step: int = 1) -> Path:
    """Save a scalar map with its colour key; invalid pixels checkered.

    Parameters
    ----------
    kind : {"dolp", "aolp", "scalar", "residual"}
        Chooses the colour map and range (``aolp`` is cyclic over [0, 180) degrees).
    step : int
        Decimation factor of ``array`` relative to the frame (for axis labels in pixels).
    """
    import matplotlib as mpl

    a = np.asarray(array, dtype=np.float32)
    ok = np.isfinite(a) if valid is None else (np.asarray(valid) & np.isfinite(a))
    if kind == "aolp":
        cmap = cmap or "twilight"
        vmin, vmax = 0.0, 180.0
    elif kind == "dolp":
        cmap = cmap or "viridis"
        vmin = 0.0 if vmin is None else vmin
        vmax = 1.0 if vmax is None else vmax
    else:
        cmap = cmap or "magma"
        if vmin is None:
            vmin = float(np.nanmin(a[ok])) if ok.any() else 0.0
        if vmax is None:
            vmax = float(np.nanpercentile(a[ok], 99)) if ok.any() else 1.0
            vmax = vmax if vmax > vmin else vmin + 1.0
    cm = mpl.colormaps[cmap]
    norm = mpl.colors.Normalize(vmin=vmin, vmax=vmax)
    rgb = cm(norm(np.nan_to_num(a, nan=vmin)))[..., :3]
    rgb[~ok] = checker(a.shape)[~ok]
    fw, fh = _fig_size(a.shape)
    fig = new_figure(fw, fh, layout=None)  # fixed layout: the layout engine costs more than the drawing
    ax = fig.add_axes([0.75 / fw, 0.65 / fh, 1 - 2.6 / fw, 1 - 1.15 / fh])
    cax = fig.add_axes([1 - 1.45 / fw, 0.65 / fh + 0.08 * (1 - 1.15 / fh), 0.18 / fw, 0.84 * (1 - 1.15 / fh)])
    h, w = a.shape
    ax.imshow(rgb, extent=(-0.5 * step, (w - 0.5) * step, (h - 0.5) * step, -0.5 * step), interpolation="nearest")
    ax.set_title(title)
    ax.set_xlabel(AXIS_LABEL_X)
    ax.set_ylabel(AXIS_LABEL_Y)
    sm = mpl.cm.ScalarMappable(norm=norm, cmap=cm)
    cb = fig.colorbar(sm, cax=cax)
    cb.set_label(label)
    if kind == "aolp":
        cb.set_ticks([0, 45, 90, 135, 180])
    fig.text(0.01, 0.005, INVALID_NOTE, fontsize=7, color="0.35")
    return save_figure(fig, path)


def composite_rgb(s0, dolp, aolp_deg, valid, *, dolp_full: float = DOLP_FULL_SATURATION) -> np.ndarray:
    """HSV picture: hue from AoLP, saturation from DoLP (full at ``dolp_full``), value from S0."""
    import matplotlib as mpl

    hue = np.nan_to_num(np.asarray(aolp_deg, np.float32) / 180.0) % 1.0
    sat = np.clip(np.nan_to_num(np.asarray(dolp, np.float32)) / dolp_full, 0, 1)
    val = tone_map(s0, valid)
    rgb = mpl.colors.hsv_to_rgb(np.stack([hue, sat, val], axis=-1))
    rgb[~valid] = checker(rgb.shape[:2])[~valid]
    return rgb


def _combined_key(fig, rect, dolp_full):
    """Semicircular key: direction = AoLP (as drawn on the image), radius = DoLP."""
    import matplotlib as mpl

    ax = fig.add_axes(rect, projection="polar")
    th = np.linspace(0, np.pi, 181)
    r = np.linspace(0, 1, 40)
    T, R = np.meshgrid(th, r)
    hue = (np.degrees(T) / 180.0) % 1.0
    sat = np.clip(R / dolp_full, 0, 1)
    rgb = mpl.colors.hsv_to_rgb(np.stack([hue, sat, np.ones_like(hue)], -1))
    ax.pcolormesh(T, R, np.zeros_like(T), color=rgb.reshape(-1, 3), shading="auto")
    ax.set_thetamin(0)
    ax.set_thetamax(180)
    ax.set_xticks(np.radians([0, 45, 90, 135, 180]))
    ax.set_xticklabels(["0", "45", "90", "135", "180"], fontsize=7)
    ax.set_yticks([0.5, 1.0])
    ax.set_yticklabels(["0.5", "1"], fontsize=6)
    ax.set_title(f"key: angle = AoLP (deg)\nradius = DoLP (full colour at {dolp_full:g})", fontsize=7)
    return ax


def stokes_pictures(prev: dict, out_dir, *, channels, step: int = 1, polarizer: str = "front") -> list[Path]:
    """Write ``dolp.png``, ``aolp.png``, ``polarization.png`` (and ``residual.png``).

    ``prev`` holds decimated (C, h, w) arrays from the pipeline's preview sink; colour
    channels are combined by summing their Stokes vectors.  ``polarizer`` ("front" for a
    bracket, "sensor" for a mosaic camera) words the residual picture and the key.
    """
    out_dir = Path(out_dir)
    from ...core.stokes import dolp_aolp

    valid = prev["valid"].all(axis=0)
    s = np.stack([np.nansum(prev[n], axis=0) for n in ("S0", "S1", "S2")]).astype(np.float32)
    dolp, aolp = dolp_aolp(s)
    name = "" if channels == ["L"] else " (R+G+B)"
    paths = [
        save_map_png(out_dir / "dolp.png", dolp, kind="dolp", valid=valid, step=step,
                     title=f"Degree of linear polarization{name}", label="DoLP (0..1)"),
        save_map_png(out_dir / "aolp.png", aolp, kind="aolp", valid=valid, step=step,
                     title=f"Angle of linear polarization{name}",
                     label="AoLP (deg from image +x, counter-clockwise)"),
    ]
    rgb = composite_rgb(s[0], dolp, aolp, valid)
    h, w = valid.shape
    fig = new_figure(*_fig_size((h, w), extra_w=2.6))
    ax = fig.add_axes([0.06, 0.08, 0.66, 0.84])
    ax.imshow(rgb, extent=(-0.5 * step, (w - 0.5) * step, (h - 0.5) * step, -0.5 * step), interpolation="nearest")
    ax.set_title(f"Polarization{name}: hue = AoLP, saturation = DoLP, brightness = S0")
    ax.set_xlabel(AXIS_LABEL_X)
    ax.set_ylabel(AXIS_LABEL_Y)
    _combined_key(fig, [0.76, 0.35, 0.22, 0.3], DOLP_FULL_SATURATION)
    fig.set_layout_engine(None)
    fig.text(0.01, 0.005, INVALID_NOTE, fontsize=7, color="0.35")
    paths.append(save_figure(fig, out_dir / "polarization.png"))
    if "residual" in prev:
        with np.errstate(invalid="ignore", divide="ignore"):
            rel = np.max(prev["residual"] / prev["S0"], axis=0) * 100
        paths.append(save_map_png(out_dir / "residual.png", rel, kind="residual", valid=valid, step=step, vmin=0,
                                  title=("Least-squares residual: where frames disagree (motion, clouds, drift)"
                                         if polarizer == "front" else
                                         "Least-squares residual: interpolation error at edges, defects"),
                                  label="RMS residual / S0 (%)"))
    return paths


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
