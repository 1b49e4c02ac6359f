"""Pictures of the sky comparison: observed/model AoLP and DoLP, residuals, the mask.

Every picture has a colour key; pixels not shown (not sky, invalid) are checkered as in every
picture.  The sun, the antisolar point (an arrow at the frame edge when outside it), the band
90 degrees from the sun and the halo / rainbow rings are drawn on each, in the colours of
:mod:`polarsky.palette`.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ...palette import AXIS_LABEL_X, AXIS_LABEL_Y, COLOURS
from ...sky.fit import MASK_REASONS
from .figure import checker, new_figure, save_figure

__all__ = ["save_sky_pictures", "draw_sky_marks", "shown_rgb", "sky_frame"]

#: mask reason -> colour of the sky-mask picture (sun, halo and rainbow bands in their palette colours)
_MASK_COLOURS = {0: "#3b7dd8", 1: "#000000", 2: "#6b4f2a", 3: "#8c8c8c", 4: COLOURS["sun"],
                 5: COLOURS["feature"], 6: "#9d7bb0", 7: "#2f2f2f", 8: "#d0d0d0"}


def _stride(h, w, max_side=1000):
    return max(1, int(np.ceil(max(h, w) / max_side)))


def draw_sky_marks(ax, geom, scat, bands, stride, extent_hw):
    """Sun, antisun (an arrow at the frame edge when outside it), the band 90 degrees from the sun
    and feature rings (``scat`` = scattering angle, strided by ``stride``)."""
    from matplotlib import patheffects as pe

    halo = [pe.withStroke(linewidth=3.5, foreground="black")]
    h, w = extent_hw
    lens = geom.lens
    cs = []
    finite = np.isfinite(scat)
    xs = np.arange(scat.shape[1]) * stride
    ys = np.arange(scat.shape[0]) * stride
    if finite.any():
        lo, hi = np.nanmin(scat), np.nanmax(scat)
        if lo < 90 < hi:
            c = ax.contour(xs, ys, scat, levels=[90.0], colors=COLOURS["band_90"], linewidths=2.0, linestyles="--")
            c.set(path_effects=[pe.withStroke(linewidth=3.5, foreground="black"), pe.Normal()])
            for t in ax.clabel(c, fmt={90.0: "90° from sun"}, fontsize=7, colors=COLOURS["band_90"]):
                t.set_path_effects(halo)
            cs.append(c)
        for b in bands:
            if b["kind"] == "sun":
                level, label = b["outer_deg"], "sun + aureole (masked)"
            else:
                level = b["radius_deg"] if b["about"] == "sun" else 180.0 - b["radius_deg"]
                label = b["name"]
            if lo < level < hi:
                c = ax.contour(xs, ys, scat, levels=[level], colors=COLOURS["feature"], linewidths=1.0, linestyles=":")
                c.set(path_effects=[pe.withStroke(linewidth=2.5, foreground="black")])
                for t in ax.clabel(c, fmt={level: label}, fontsize=6, colors=COLOURS["feature"]):
                    t.set_path_effects([pe.withStroke(linewidth=2, foreground="black")])
    for name, vec, colour in (("sun", geom.sun_cam, COLOURS["sun"]), ("antisun", -geom.sun_cam, COLOURS["antisun"])):
        u, v, ok = lens.project(vec.reshape(3, 1))
        u, v, ok = float(u[0]), float(v[0]), bool(ok[0])
        if ok and -0.5 <= u <= w - 0.5 and -0.5 <= v <= h - 0.5:
            ax.plot([u], [v], marker="o", ms=10, mfc="none", mec=colour, mew=2, path_effects=halo)
            ax.annotate(name, (u, v), xytext=(8, 8), textcoords="offset points", color=colour, fontsize=8,
                        fontweight="bold", path_effects=halo)
            continue
        # outside the frame: an arrow from inside the edge toward it
        d = np.array([vec[0], vec[1]], dtype=float)
        if ok and np.isfinite(u) and np.isfinite(v):
            d = np.array([u - (w - 1) / 2, v - (h - 1) / 2])
        if not np.any(d):
            d = np.array([0.0, -1.0])
        d /= np.hypot(*d)
        cx, cy = (w - 1) / 2, (h - 1) / 2
        t = min((w * 0.45) / max(abs(d[0]), 1e-9), (h * 0.45) / max(abs(d[1]), 1e-9))
        tip = (cx + d[0] * t, cy + d[1] * t)
        tail = (cx + d[0] * t * 0.72, cy + d[1] * t * 0.72)
        off = np.rad2deg(np.arccos(np.clip(vec[2] / np.linalg.norm(vec), -1, 1)))
        ax.annotate("", xy=tip, xytext=tail, arrowprops=dict(arrowstyle="-|>", color=colour, lw=2))
        ax.text(tail[0], tail[1], f"{name}\n{off:.0f}° off axis", color=colour, fontsize=7,
                ha="center", va="center", fontweight="bold",
                bbox=dict(boxstyle="round,pad=0.2", fc="black", ec="none", alpha=0.5))


def shown_rgb(arr, show, cmap_name, vmin, vmax):
    """RGB of ``arr`` in a colour map; pixels not ``show``n (or not finite) grey-checkered."""
    import matplotlib as mpl

    cm = mpl.colormaps[cmap_name]
    a = np.asarray(arr, dtype=np.float32)
    ok = show & np.isfinite(a)
    rgb = cm(mpl.colors.Normalize(vmin, vmax)(np.nan_to_num(a, nan=vmin)))[..., :3]
    rgb[~ok] = checker(a.shape)[~ok]
    return rgb


def sky_frame(h, w, title):
    """A figure and axes for an ``h`` x ``w`` frame, axes labelled in pixels, the checkerboard explained."""
    fig = new_figure(7.6, 7.2 * h / w + 1.0)
    ax = fig.add_subplot()
    ax.set_xlim(-0.5, w - 0.5)
    ax.set_ylim(h - 0.5, -0.5)
    ax.set_xlabel(AXIS_LABEL_X + "   checkered: not shown (not sky, not valid)", fontsize=8)
    ax.set_ylabel(AXIS_LABEL_Y)
    ax.set_title(title, fontsize=9)
    return fig, ax


def save_sky_pictures(out_dir, *, geom, bands, observed_dolp, observed_aolp, model_dolp, model_aolp,
                      dolp_residual, aolp_residual, scattering_angle, reason, channel_name: str, model_title: str,
                      summary_line: str = "") -> list[str]:
    """Write the sky PNGs into ``out_dir``; return their file names.

    Array arguments are (h, w) maps of the displayed channel; ``reason`` is the mask code map;
    ``model_title`` names the sky model used (e.g. "single-scattering Rayleigh").
    """
    import matplotlib as mpl

    out_dir = Path(out_dir)
    h, w = reason.shape
    st = _stride(h, w)
    sl = (slice(None, None, st), slice(None, None, st))
    scat = scattering_angle[sl]
    used = reason[sl] == 0
    sky_like = np.isin(reason[sl], (0, 4, 5, 6, 7, 8))
    extent = (-0.5, w - 0.5, h - 0.5, -0.5)
    specs = [
        ("sky_aolp_observed.png", observed_aolp[sl], np.isfinite(observed_aolp[sl]), "twilight", (0, 180),
         "AoLP (deg)", f"observed AoLP [{channel_name}]"),
        ("sky_aolp_model.png", model_aolp[sl], sky_like, "twilight", (0, 180), "AoLP (deg)",
         f"model AoLP ({model_title})"),
        ("sky_dolp_observed.png", observed_dolp[sl], np.isfinite(observed_dolp[sl]), "viridis", (0, 1), "DoLP",
         f"observed DoLP [{channel_name}]"),
        ("sky_dolp_model.png", model_dolp[sl], sky_like, "viridis", (0, 1), "DoLP",
         f"model DoLP ({model_title}, fitted scale)"),
        ("sky_aolp_residual.png", aolp_residual[sl], used, "RdBu_r", (-20, 20), "observed - model AoLP (deg)",
         "AoLP residual (sky pixels used)"),
        ("sky_dolp_residual.png", dolp_residual[sl], used, "RdBu_r", (-0.2, 0.2), "observed - model DoLP",
         "DoLP residual (sky pixels used)"),
    ]
    names = []
    # one figure for the six maps: the frame and the marks are the same in each (drawn once);
    # each picture swaps the image, the key and the title, and is laid out on its own
    fig = ax = im = sm = cb = None
    for fname, arr, show, cmap_name, (vmin, vmax), key, title in specs:
        title = title + ("\n" + summary_line if summary_line else "")
        rgb = shown_rgb(arr, show, cmap_name, vmin, vmax)
        norm, cmap = mpl.colors.Normalize(vmin, vmax), mpl.colormaps[cmap_name]
        if fig is None:
            fig, ax = sky_frame(h, w, title)
            im = ax.imshow(rgb, extent=extent, interpolation="nearest")
            sm = mpl.cm.ScalarMappable(norm=norm, cmap=cmap)
            cb = fig.colorbar(sm, ax=ax, fraction=0.046, pad=0.03, label=key)
            draw_sky_marks(ax, geom, scat, bands, st, (h, w))
        else:
            im.set_data(rgb)
            sm.set_norm(norm)
            sm.set_cmap(cmap)
            cb.update_normal(sm)
            cb.set_label(key)
            ax.set_title(title, fontsize=9)
        save_figure(fig, out_dir / fname)
        names.append(fname)
    # the mask
    codes = sorted(MASK_REASONS)
    cmap = mpl.colors.ListedColormap([_MASK_COLOURS[c] for c in codes])
    norm = mpl.colors.BoundaryNorm(np.arange(-0.5, len(codes) + 0.5), cmap.N)
    fig, ax = sky_frame(h, w, "sky mask: pixels used for the fit and why others were left out")
    im = ax.imshow(reason[sl], cmap=cmap, norm=norm, extent=extent, interpolation="nearest")
    cb = fig.colorbar(im, ax=ax, fraction=0.046, pad=0.03, ticks=codes)
    cb.ax.set_yticklabels([MASK_REASONS[c] for c in codes], fontsize=7)
    draw_sky_marks(ax, geom, scat, bands, st, (h, w))
    ax.set_xlabel(AXIS_LABEL_X, fontsize=8)
    save_figure(fig, out_dir / "sky_mask.png")
    names.append("sky_mask.png")
    return names
