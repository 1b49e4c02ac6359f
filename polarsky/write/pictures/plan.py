"""Pictures of the plans, each with a colour key; colours only from :mod:`polarsky.palette`.

* ``plan_sky_dolp.png``: the predicted DoLP over the frame (``viridis`` 0..1) with short
  strokes along the predicted E-vector, the band 90 degrees from the sun, the sun and the
  antisolar point, and the region; pixels outside the sky part grey-checkered;
* ``plan_sky_darkening.png``: the frame's sky as it would look through the filter at the
  recommended angle (the sky tone scaled by the filter's transmission), key in stops, the
  recommended axis drawn;
* ``plan_sky_sweep_time.png`` / ``plan_sky_sweep_yaw.png``: darkening over the day or over
  headings;
* ``plan_glare_sweep.png``: the reduction against incidence with Brewster's angle marked.

The frame pictures are drawn like the sky comparison's (:mod:`.sky`).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ...core.transfer import linear_to_srgb, srgb_to_linear
from ...palette import COLOURS, rgb
from .advice import outline_region
from .figure import checker, draw_axis, new_figure, save_figure
from .sky import draw_sky_marks, shown_rgb, sky_frame

__all__ = ["sky_plan_pictures", "sky_sweep_picture", "glare_sweep_picture"]


def _evector_strokes(ax, dolp, aolp, sky, n=14):
    """Short strokes along the predicted E-vector (AoLP), longer where the DoLP is higher."""
    from matplotlib.collections import LineCollection

    h, w = dolp.shape
    step = max(w, h) / n
    xs, ys = np.meshgrid(np.arange(step / 2, w, step), np.arange(step / 2, h, step))
    xi, yi = xs.astype(int).clip(0, w - 1), ys.astype(int).clip(0, h - 1)
    ok = sky[yi, xi]
    a = np.radians(np.nan_to_num(aolp[yi, xi]))
    length = 0.45 * step * (0.25 + 0.75 * np.clip(np.nan_to_num(dolp[yi, xi]) / 0.8, 0, 1))
    dx, dy = length * np.cos(a), -length * np.sin(a)  # counter-clockwise as displayed: rows grow downward
    segs = [[(x - u, y - v), (x + u, y + v)] for x, y, u, v in zip(xs[ok], ys[ok], dx[ok], dy[ok])]
    ax.add_collection(LineCollection(segs, colors=COLOURS["outline"], linewidths=1.1))


def _marks(ax, plan, st):
    """Sun, antisun, the 90-degree band (as in the sky pictures) and the region."""
    maps = plan.maps
    h, w = maps["sky"].shape
    draw_sky_marks(ax, plan.geom, maps["scattering_angle"][::st, ::st], [], st, (h, w))
    if maps.get("region") is not None:
        outline_region(ax, maps["region"], 1, COLOURS["region"], "region (darken)")


def _tone(stops, lo):
    """sRGB of the sky tone darkened by ``stops`` (relative to the brightest, ``lo`` stops)."""
    tone = srgb_to_linear(np.array(rgb("sky_tone")))
    lin = tone * (2.0 ** -(np.asarray(stops, dtype=np.float64) - lo))[..., None]
    return linear_to_srgb(np.clip(lin, 0, 1))


def sky_plan_pictures(plan, result: dict, out_dir) -> list:
    """Write ``plan_sky_dolp.png`` and ``plan_sky_darkening.png``; return their names.

    ``plan`` is the :class:`polarsky.plan.sky.SkyPlan` at the planned time, ``result`` its
    ``plan_sky.json``.
    """
    import matplotlib as mpl
    from matplotlib.lines import Line2D

    out_dir = Path(out_dir)
    maps, r = plan.maps, result
    sky = maps["sky"]
    h, w = sky.shape
    st = max(1, int(np.ceil(max(h, w) / 1000)))
    ext = (-0.5, w - 0.5, h - 0.5, -0.5)
    line = (f"{r['when']}  sun az {r['sun_azimuth_deg']:.1f}°, el {r['sun_elevation_deg']:.1f}°  camera yaw "
            f"{r['yaw_deg']:g}°, pitch {r['pitch_deg']:g}°, roll {r['roll_deg']:g}°")

    fig, ax = sky_frame(h, w, f"Predicted DoLP ({r['model_title']}, dolp_max {r['dolp_max']:.2f}); strokes: predicted "
                              f"E-vector\n{line}")
    ax.imshow(shown_rgb(maps["dolp"], sky, "viridis", 0.0, 1.0), extent=ext, interpolation="nearest")
    _evector_strokes(ax, maps["dolp"], maps["aolp"], sky)
    _marks(ax, plan, st)
    sm = mpl.cm.ScalarMappable(norm=mpl.colors.Normalize(0, 1), cmap=mpl.colormaps["viridis"])
    fig.colorbar(sm, ax=ax, fraction=0.046, pad=0.03, label="predicted DoLP")
    save_figure(fig, out_dir / "plan_sky_dolp.png")

    stops = maps["darkening_stops"]
    lo = min(0.0, float(np.nanmin(stops[sky])))
    hi = max(float(np.nanmax(stops[sky])), lo + 0.5)
    er = r["extinction_ratio"]
    best = r["best_angle_deg"]
    fig, ax = sky_frame(h, w, f"The sky through the filter at {best:.1f}° ({'ideal filter' if er is None else f'ER {er:g}'}"
                              f"): {r['darkening_stops']:.2f} stops darker on average ({r['darkening_stops_min']:.2f} to "
                              f"{r['darkening_stops_max']:.2f})\nbrightness relative to the filter at a random angle; "
                              f"{r['radiance_model']} sky radiance weighs the angle\n{line}")
    img = _tone(np.nan_to_num(stops, nan=0.0), lo)
    img[~sky] = checker((h, w))[~sky]
    ax.imshow(img, extent=ext, interpolation="nearest")
    _marks(ax, plan, st)
    draw_axis(ax, best, (h, w))
    ax.legend(handles=[Line2D([], [], color=COLOURS["recommended_axis"], lw=2.5, label=f"filter axis {best:.1f}°")],
              loc="lower left", fontsize=8, framealpha=0.85)
    key = mpl.colors.ListedColormap(_tone(np.linspace(lo, hi, 256), lo))
    cb = fig.colorbar(mpl.cm.ScalarMappable(norm=mpl.colors.Normalize(lo, hi), cmap=key), ax=ax, fraction=0.046,
                      pad=0.03, label="darkening (stops; negative = brighter)")
    cb.ax.invert_yaxis()
    save_figure(fig, out_dir / "plan_sky_darkening.png")
    return ["plan_sky_dolp.png", "plan_sky_darkening.png"]


def _hours(iso: str, day0) -> float:
    import datetime as _dt

    return (_dt.datetime.fromisoformat(iso) - day0).total_seconds() / 3600.0


def sky_sweep_picture(sweep: dict, result: dict, kind: str, out_dir) -> str:
    """Write ``plan_sky_sweep_<kind>.png``: mean darkening with its range, and the best angle."""
    import datetime as _dt

    rows = [row for row in sweep["rows"] if row["note"] is None]
    if kind == "time":
        t0 = _dt.datetime.fromisoformat(rows[0]["when"])
        day0 = t0.replace(hour=0, minute=0, second=0, microsecond=0)
        x = np.array([_hours(row["when"], day0) for row in rows])
        off = t0.strftime("%z")
        xlabel = f"local time on {t0.date().isoformat()} (hours, UTC{off[:3]}:{off[3:]})"
        mark = {k: _hours(sweep["rows"][sweep[k + "_row"]]["when"], day0) for k in ("deepest", "most_even")}
    else:
        x = np.array([row["yaw_deg"] for row in rows])
        xlabel = "heading of the optical axis (yaw, deg clockwise from north)"
        mark = {k: sweep["rows"][sweep[k + "_row"]]["yaw_deg"] for k in ("deepest", "most_even")}
    mean, lo, hi = (np.array([row[k] for row in rows]) for k in ("darkening_stops", "darkening_stops_min",
                                                                   "darkening_stops_max"))
    fig = new_figure(8.0, 6.0)
    ax, ax2 = fig.subplots(2, 1, sharex=True, height_ratios=[2, 1])
    ax.fill_between(x, lo, hi, color=COLOURS["spread"], alpha=0.6, label="range over the frame's sky (min..max)")
    half = 0.5 * (float(np.median(np.diff(x))) if x.size > 1 else 1.0)
    for n, k in enumerate(k for k, row in enumerate(rows) if row["sun_in_frame"]):
        ax.axvspan(x[k] - half, x[k] + half, color=COLOURS["sun"], alpha=0.35, lw=0,
                   label="sun in the frame (never look at it through the viewfinder)" if n == 0 else None)
    ax.plot(x, mean, color=COLOURS["prediction"], lw=2.2, marker="o", ms=3, label="mean over the frame's sky")
    labels = ({"deepest and most even": mark["deepest"]} if mark["deepest"] == mark["most_even"]
              else {"deepest": mark["deepest"], "most even": mark["most_even"]})
    for k, (label, xm) in enumerate(labels.items()):
        ax.axvline(xm, color=COLOURS["current"], lw=1.4, ls="--" if k == 0 else ":")
        ax.annotate(label, (xm, float(np.max(hi))), xytext=(4, -14 - 12 * k), textcoords="offset points", fontsize=8,
                    color=COLOURS["current"])
    ax.axhline(0, color=COLOURS["text_muted"], lw=0.8)
    er = result["extinction_ratio"]
    ax.set_ylabel("darkening at the best angle (stops)")
    ax.set_title(f"Sky darkening over the {'day' if kind == 'time' else 'headings'} "
                 f"({'ideal filter' if er is None else f'ER {er:g}'}, dolp_max {result['dolp_max']:.2f}, "
                 f"{result['model_title']})", fontsize=10)
    ax.legend(fontsize=8, loc="best")
    ax2.plot(x, [row["best_angle_deg"] for row in rows], color=COLOURS["recommended_axis"], lw=0, marker="o", ms=4)
    ax2.set_ylim(0, 180)
    ax2.set_yticks([0, 45, 90, 135, 180])
    ax2.set_ylabel("recommended filter\nangle (deg)")
    ax2.set_xlabel(xlabel)
    name = f"plan_sky_sweep_{kind}.png"
    save_figure(fig, Path(out_dir) / name)
    return name


def glare_sweep_picture(result: dict, out_dir, *, step_deg: float = 0.1, cap_stops: float = 8.0) -> str:
    """Write ``plan_glare_sweep.png``: the reduction against incidence, Brewster's angle marked."""
    from ...core.stokes import diattenuation_from_extinction
    from ...plan.glare import glare_sweep

    n, er = result["index"], result["extinction_ratio"]
    a = np.arange(0.0, 90.0 + 1e-9, step_deg)
    rows = glare_sweep(n, a, diattenuation=1.0 if er is None else diattenuation_from_extinction(er))

    def capped(key):
        return np.array([cap_stops if row[key] is None else min(row[key], cap_stops) for row in rows])

    fig = new_figure(8.0, 6.2)
    ax, ax2 = fig.subplots(2, 1, sharex=True, height_ratios=[3, 2])
    ax.plot(a, capped("reduction_stops_ideal"), color=COLOURS["prediction"], lw=2, label="ideal filter")
    if er is not None:
        ax.plot(a, capped("reduction_stops"), color=COLOURS["prediction_real"], lw=2, label=f"filter with ER {er:g}")
    b, planned = result["brewster_deg"], result["incidence_deg"]
    for axx in (ax, ax2):
        axx.axvline(b, color=COLOURS["brewster"], lw=1.6, ls="--")
        axx.axvline(planned, color=COLOURS["current"], lw=1.6)
    ax.annotate(f"Brewster {b:.1f}°", (b, cap_stops * 0.25), xytext=(-6, 0), textcoords="offset points", fontsize=8,
                ha="right", color=COLOURS["brewster"],
                bbox=dict(boxstyle="round,pad=0.2", fc=COLOURS["band_90"], ec="none", alpha=0.85))
    ax.annotate(f"planned {planned:g}°", (planned, cap_stops * 0.82), xytext=(4, 0), textcoords="offset points",
                fontsize=8, color=COLOURS["current"])
    ax.set_ylim(0, cap_stops + 0.2)
    ax.set_ylabel("reflection removed (stops)")
    ax.set_title(f"Glare off {result['surface'] or 'the surface'} (n = {n:.4f}): what the filter removes at its best "
                 f"angle\n(top of the scale = {cap_stops:g} stops or more; an ideal filter removes all at Brewster's "
                 "angle)", fontsize=9)
    ax.legend(fontsize=8, loc="upper left")
    ax2.plot(a, [row["rs"] for row in rows], color=COLOURS["s_polarized"], lw=1.8, label="Rs (s-polarized)")
    ax2.plot(a, [row["rp"] for row in rows], color=COLOURS["p_polarized"], lw=1.8, label="Rp (p-polarized)")
    ax2.plot(a, [row["reflection_dolp"] for row in rows], color=COLOURS["prediction"], lw=1.8, ls="--",
             label="DoLP of the reflection")
    ax2.set_ylim(0, 1.02)
    ax2.set_xlim(0, 90)
    ax2.set_xticks(range(0, 91, 10))
    ax2.set_xlabel("angle of incidence (deg from the surface normal; 90 = grazing)")
    ax2.set_ylabel("reflectance, DoLP")
    ax2.legend(fontsize=8, loc="upper left")
    save_figure(fig, Path(out_dir) / "plan_glare_sweep.png")
    return "plan_glare_sweep.png"
