"""The pictures of a Stokes result: ``dolp.png``, ``aolp.png``, ``polarization.png``, ``residual.png``.

Each has a colour key; pixels that are not valid are a grey checkerboard, never zero.  Maps
of angles use a cyclic colour map (``twilight``) because 0 and 180 deg are the same
orientation.  The figures around the data are cached templates (:mod:`.canvas`): a picture
costs a lookup, a paste and a PNG encoding.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ..._shared.stats import percentile
from ..._shared.threads import thread_map
from ...palette import AXIS_LABEL_X, AXIS_LABEL_Y, INVALID_NOTE
from .canvas import colour_lut, colourize, compose, template, write_png

__all__ = ["save_map_png", "map_picture", "stokes_pictures", "composite_rgb", "MAP_KINDS", "DOLP_FULL_SATURATION"]

DOLP_FULL_SATURATION = 0.6
#: kind -> (colour map, vmin, vmax, key ticks); None = from the data
MAP_KINDS = {"dolp": ("viridis", 0.0, 1.0, None), "aolp": ("twilight", 0.0, 180.0, [0, 45, 90, 135, 180]),
             "residual": ("magma", 0.0, None, None), "scalar": ("magma", None, None, None)}


def _fig_size(shape, extra_w=2.2):
    h, w = shape
    width = 7.5
    return width + extra_w, max(3.0, width * h / max(w, 1) + 0.9)


def _extent(shape, step):
    h, w = shape
    return (-0.5 * step, (w - 0.5) * step, (h - 0.5) * step, -0.5 * step)


def _draw_map(p):
    import matplotlib as mpl

    from .figure import new_figure

    h, w = p["shape"]
    fw, fh = _fig_size((h, w))
    fig = new_figure(fw, fh, layout=None)  # fixed layout: the layout engine costs more than the drawing
    ax = fig.add_axes([0.75 / fw, 0.65 / fh, 1 - 2.6 / fw, 1 - 1.15 / fh])
    cax = fig.add_axes([1 - 1.45 / fw, 0.65 / fh + 0.08 * (1 - 1.15 / fh), 0.18 / fw, 0.84 * (1 - 1.15 / fh)])
    ax.imshow(np.zeros((h, w)), extent=_extent((h, w), p["step"]), cmap="gray", vmin=0, vmax=1)
    ax.set_title(p["title"])
    ax.set_xlabel(AXIS_LABEL_X)
    ax.set_ylabel(AXIS_LABEL_Y)
    sm = mpl.cm.ScalarMappable(norm=mpl.colors.Normalize(p["vmin"], p["vmax"]), cmap=mpl.colormaps[p["cmap"]])
    cb = fig.colorbar(sm, cax=cax)
    cb.set_label(p["label"])
    if p["ticks"]:
        cb.set_ticks(p["ticks"])
    fig.text(0.01, 0.005, INVALID_NOTE, fontsize=7, color="0.35")
    return fig, ax


def _nice_ceiling(x: float) -> float:
    """The next value of 1, 2, 5 x 10^k at or above ``x`` (a key scale that templates can share)."""
    if not np.isfinite(x) or x <= 0:
        return 1.0
    k = np.floor(np.log10(x))
    for m in (1, 2, 5, 10):
        if m * 10 ** k >= x * (1 - 1e-9):
            return float(m * 10 ** k)
    return float(10 ** (k + 1))


def save_map_png(path, array, *, kind: str, title: str, valid=None, label: str = "", step: int = 1) -> Path:
    """Save a scalar map with its colour key (:func:`map_picture`); invalid pixels checkered."""
    return write_png(path, map_picture(array, kind=kind, title=title, valid=valid, label=label, step=step))


def map_picture(array, *, kind: str, title: str, valid=None, label: str = "", step: int = 1) -> np.ndarray:
    """The picture of a scalar map with its colour key, (H, W, 3) uint8; invalid pixels checkered.

    Parameters
    ----------
    kind : {"dolp", "aolp", "residual", "scalar"}
        Colour map and range (:data:`MAP_KINDS`; ``aolp`` is cyclic over [0, 180) degrees;
        ``residual`` runs from 0 to the 99th percentile rounded up to 1, 2 or 5 x 10^k).
    step : int
        Decimation factor of ``array`` relative to the frame (for axis labels in pixels).
    """
    a = np.asarray(array, dtype=np.float32)
    ok = np.isfinite(a) if valid is None else (np.asarray(valid, bool) & np.isfinite(a))
    cmap, vmin, vmax, ticks = MAP_KINDS[kind]
    if vmin is None:
        vmin = float(np.nanmin(a[ok])) if ok.any() else 0.0
    if vmax is None:
        vmax = _nice_ceiling(percentile(a[ok], 99) - vmin) + vmin if ok.any() else vmin + 1.0
    params = {"shape": list(a.shape), "step": int(step), "title": title, "label": label, "cmap": cmap,
              "vmin": float(vmin), "vmax": float(vmax), "ticks": ticks}
    tpl = template("map", params, _draw_map)
    return compose(tpl, colourize(a, vmin, vmax, colour_lut(cmap), ok))


def composite_rgb(s0, dolp, aolp_deg, valid, *, dolp_full: float = DOLP_FULL_SATURATION) -> np.ndarray:
    """HSV picture (h, w, 3) uint8: hue from AoLP, saturation from DoLP (full at ``dolp_full``),
    value from S0 (tone-mapped); pixels not valid checkered."""
    from .canvas import checker_rgb, hsv_rgb
    from .figure import tone_map

    out = hsv_rgb(np.asarray(aolp_deg, np.float32) * np.float32(2.0),
                  np.asarray(dolp, np.float32) / np.float32(dolp_full), tone_map(s0, valid))
    out[~valid] = checker_rgb(out.shape[:2])[~valid]
    return out


def _draw_composite(p):
    import matplotlib as mpl

    from .figure import new_figure

    h, w = p["shape"]
    fw, fh = _fig_size((h, w), extra_w=2.6)
    fig = new_figure(fw, fh, layout=None)
    ax = fig.add_axes([0.06, 0.08, 0.66, 0.84])
    ax.imshow(np.zeros((h, w)), extent=_extent((h, w), p["step"]), cmap="gray", vmin=0, vmax=1)
    ax.set_title(p["title"])
    ax.set_xlabel(AXIS_LABEL_X)
    ax.set_ylabel(AXIS_LABEL_Y)
    key = fig.add_axes([0.76, 0.35, 0.22, 0.3], projection="polar")
    th = np.linspace(0, np.pi, 181)
    r = np.linspace(0, 1, 40)
    T, R = np.meshgrid(th, r)
    hsv = np.stack([(np.degrees(T) / 180.0) % 1.0, np.clip(R / p["dolp_full"], 0, 1), np.ones_like(T)], -1)
    key.pcolormesh(T, R, np.zeros_like(T), color=mpl.colors.hsv_to_rgb(hsv).reshape(-1, 3), shading="auto")
    key.set_thetamin(0)
    key.set_thetamax(180)
    key.set_xticks(np.radians([0, 45, 90, 135, 180]))
    key.set_xticklabels(["0", "45", "90", "135", "180"], fontsize=7)
    key.set_yticks([0.5, 1.0])
    key.set_yticklabels(["0.5", "1"], fontsize=6)
    key.set_title(f"key: angle = AoLP (deg)\nradius = DoLP (full colour at {p['dolp_full']:g})", fontsize=7)
    fig.text(0.01, 0.005, INVALID_NOTE, fontsize=7, color="0.35")
    return fig, ax


def stokes_pictures(prev: dict, out_dir, *, channels, step: int = 1, polarizer: str = "front", keep=None) -> list:
    """Write ``dolp.png``, ``aolp.png``, ``polarization.png`` (and ``residual.png``).

    ``prev`` holds decimated (C, h, w) arrays from the preview sink; colour channels are
    combined by summing their Stokes vectors.  ``polarizer`` ("front" for a bracket, "sensor"
    for a mosaic camera) words the residual picture.  ``keep``, a dict, receives each
    picture's pixels under its file name ((H, W, 3) uint8), for callers that show them again
    (the batch report's thumbnails) without decoding the files.
    """
    from ...core.stokes import dolp_aolp

    out_dir = Path(out_dir)
    valid = prev["valid"].all(axis=0)
    s = np.stack([np.nansum(prev[n], axis=0) for n in ("S0", "S1", "S2")]).astype(np.float32)
    dolp, aolp = dolp_aolp(s)
    name = "" if channels == ["L"] else " (R+G+B)"

    def dolp_map():
        return "dolp.png", map_picture(dolp, kind="dolp", valid=valid, step=step,
                                       title=f"Degree of linear polarization{name}", label="DoLP (0..1)")

    def aolp_map():
        return "aolp.png", map_picture(aolp, kind="aolp", valid=valid, step=step,
                                       title=f"Angle of linear polarization{name}",
                                       label="AoLP (deg from image +x, counter-clockwise)")

    def composite():
        params = {"shape": list(valid.shape), "step": int(step), "dolp_full": DOLP_FULL_SATURATION,
                  "title": f"Polarization{name}: hue = AoLP, saturation = DoLP, brightness = S0"}
        tpl = template("composite", params, _draw_composite)
        return "polarization.png", compose(tpl, composite_rgb(s[0], dolp, aolp, valid))

    def residual():
        with np.errstate(invalid="ignore", divide="ignore"):
            rel = np.max(prev["residual"] / prev["S0"], axis=0) * 100
        return "residual.png", map_picture(
            rel, kind="residual", valid=valid, step=step,
            title=("Least-squares residual: where frames disagree (motion, clouds, drift)" if polarizer == "front" else
                   "Least-squares residual: interpolation error at edges, defects"),
            label="RMS residual / S0 (%)")

    def draw(job):
        file_name, rgb = job()
        return file_name, rgb, write_png(out_dir / file_name, rgb)

    jobs = [dolp_map, aolp_map, composite] + ([residual] if "residual" in prev else [])
    made = thread_map(draw, jobs)  # colouring and encoding release the GIL
    if keep is not None:
        keep.update({file_name: rgb for file_name, rgb, _ in made})
    return [path for _, _, path in made]
