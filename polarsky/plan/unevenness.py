"""How unevenly a filter darkens the sky across a frame, in words a photographer reads.

The darkest band lies 90 degrees from the sun, so a wide lens darkens one side of the frame
more than the other.  :func:`describe_unevenness` gives the mean darkening of the column and
row thirds, of 5 % strips at each edge, the darkest place and where the band 90 degrees from
the sun crosses the frame (or beyond which edge it lies), and one sentence
("the left third darkens 1.1 stops, the centre 0.6, the right third 0.3 ...").
"""

from __future__ import annotations

import numpy as np

__all__ = ["describe_unevenness", "where_in_frame", "UNEVENNESS_KEYS"]

#: Keys of :func:`describe_unevenness`.
UNEVENNESS_KEYS = ("darkening_stops_thirds", "darkening_stops_edges", "darkest_px", "darkest_where",
                   "band_90_in_frame", "band_90_center_px", "unevenness_text")

_COLS = ("left", "center", "right")  # keys (identifiers spell "center", docs/glossary.md)
_ROWS = ("top", "middle", "bottom")
_LABELS = {"left": "the left third", "center": "the centre", "right": "the right third", "top": "the top third",
           "middle": "the middle", "bottom": "the bottom third"}


def where_in_frame(x, y, w, h) -> str:
    """Where pixel ``(x, y)`` lies in a ``w`` x ``h`` frame, in words.

    >>> where_in_frame(10, 10, 300, 200), where_in_frame(150, 100, 300, 200)
    ('upper left', 'centre')
    """
    col = _COLS[min(2, max(0, int(3 * (x + 0.5) / w)))]
    row = ("upper", "middle", "lower")[min(2, max(0, int(3 * (y + 0.5) / h)))]
    if row == "middle":
        return "centre" if col == "center" else f"{col} side"
    if col == "center":
        return "top centre" if row == "upper" else "bottom centre"
    return f"{row} {col}"


def _mean_or_none(values, sel):
    return round(float(values[sel].mean()), 3) if sel.any() else None


def _thirds(values, sky) -> dict:
    """Mean of ``values`` over the sky pixels of each column third and row third (None if no sky)."""
    out = {}
    for names, axis in ((_COLS, 1), (_ROWS, 0)):
        n = sky.shape[axis]
        edges = [0, int(round(n / 3)), int(round(2 * n / 3)), n]
        for k, name in enumerate(names):
            sl = [slice(None), slice(None)]
            sl[axis] = slice(edges[k], edges[k + 1])
            out[name] = _mean_or_none(values[tuple(sl)], sky[tuple(sl)])
    return out


def _edges(values, sky, frac=0.05) -> dict:
    h, w = sky.shape
    kx, ky = max(1, int(round(frac * w))), max(1, int(round(frac * h)))
    strips = {"left": np.s_[:, :kx], "right": np.s_[:, w - kx:], "top": np.s_[:ky, :], "bottom": np.s_[h - ky:, :]}
    return {name: _mean_or_none(values[sl], sky[sl]) for name, sl in strips.items()}


def _band(scat, sky) -> tuple:
    """Where the band 90 degrees from the sun lies relative to the frame: (words, keys)."""
    h, w = sky.shape
    s = np.where(sky, scat, np.nan)
    above = s > 90.0
    cross = np.zeros_like(sky)
    cross[:, 1:] |= np.isfinite(s[:, 1:]) & np.isfinite(s[:, :-1]) & (above[:, 1:] != above[:, :-1])
    cross[1:, :] |= np.isfinite(s[1:, :]) & np.isfinite(s[:-1, :]) & (above[1:, :] != above[:-1, :])
    ys, xs = np.nonzero(cross)
    if xs.size >= 2:
        mx, my = float(xs.mean()), float(ys.mean())
        evals, evecs = np.linalg.eigh(np.cov(np.stack([xs - mx, ys - my])))
        vx, vy = evecs[:, int(np.argmax(evals))]
        ang = np.degrees(np.arctan2(vy, vx)) % 180.0  # rows grow downward
        if ang < 30 or ang > 150:
            run = "runs across the frame"
        elif 60 <= ang <= 120:
            run = "runs top to bottom"
        elif ang < 90:
            run = "runs diagonally from upper left to lower right"
        else:
            run = "runs diagonally from lower left to upper right"
        return (f"the band 90 deg from the sun (strongest polarization) {run} through the "
                f"{where_in_frame(mx, my, w, h)} of the frame", True, [round(mx, 1), round(my, 1)])
    kx, ky = max(1, w // 20), max(1, h // 20)
    strips = {"left": s[:, :kx], "right": s[:, -kx:], "top": s[:ky], "bottom": s[-ky:]}
    means = {k: float(np.nanmean(v)) for k, v in strips.items() if np.isfinite(v).any()}
    lo, hi = float(np.nanmin(s)), float(np.nanmax(s))
    if hi < 90.0:
        side = max(means, key=means.get)
        text = (f"the band 90 deg from the sun lies beyond the {side} edge of the frame ({90 - hi:.0f} deg past it); "
                "the whole frame is closer to the sun than that")
    else:
        side = min(means, key=means.get)
        text = (f"the band 90 deg from the sun lies beyond the {side} edge of the frame ({lo - 90:.0f} deg past it); "
                "the whole frame is farther from the sun than that")
    return text, False, None


def _num(v) -> str:
    t = f"{abs(v):.1f}" if abs(v) < 0.05 else f"{v:.1f}"
    return t + (" (brighter)" if v <= -0.05 else "")


def _darkest(stops, sky) -> tuple:
    """The darkest place, on a lightly smoothed map so that one pixel does not decide."""
    import cv2

    sm = cv2.blur(np.where(sky, stops, 0).astype(np.float32), (5, 5))
    wt = cv2.blur(sky.astype(np.float32), (5, 5))
    sm = np.where(sky & (wt > 0), sm / np.where(wt > 0, wt, 1), -np.inf)
    yk, xk = np.unravel_index(int(np.argmax(sm)), sm.shape)
    return int(xk), int(yk)


def describe_unevenness(stops, sky, scat) -> dict:
    """The unevenness of a darkening map (stops) over the sky part, with a sentence.

    Parameters
    ----------
    stops : ndarray (h, w)
        Per-pixel darkening, stops.
    sky : ndarray (h, w) bool
        The sky part.
    scat : ndarray (h, w)
        Scattering angle (angular distance from the sun), degrees.

    Returns
    -------
    dict
        The keys of :data:`UNEVENNESS_KEYS`: ``darkening_stops_thirds`` (left/center/right
        and top/middle/bottom means), ``darkening_stops_edges`` (5 % strips), ``darkest_px``
        and ``darkest_where``, ``band_90_in_frame``, ``band_90_center_px`` and
        ``unevenness_text``.
    """
    h, w = sky.shape
    thirds, edges = _thirds(stops, sky), _edges(stops, sky)
    xk, yk = _darkest(stops, sky)
    spreads = {}
    for names in (_COLS, _ROWS):
        vals = [thirds[k] for k in names if thirds[k] is not None]
        spreads[names] = max(vals) - min(vals) if len(vals) > 1 else 0.0
    names = _COLS if spreads[_COLS] >= spreads[_ROWS] else _ROWS
    edge_names = ("left", "right") if names is _COLS else ("top", "bottom")
    vals = [(_LABELS[k], thirds[k]) for k in names if thirds[k] is not None]
    spread = max(spreads.values())
    if spread < 0.2:
        text = (f"even across the frame: the thirds of the sky darken within {spread:.1f} stops of each other "
                f"({', '.join(f'{a} {_num(b)}' for a, b in vals)} stops)")
    else:
        (a0, v0), rest = vals[0], vals[1:]
        first = f"{a0} brightens {-v0:.1f} stops" if v0 <= -0.05 else f"{a0} darkens {_num(v0)} stops"
        edge_parts = [f"{k} edge {_num(edges[k])}" for k in edge_names if edges[k] is not None]
        text = (", ".join([first] + [f"{a} {_num(b)}" for a, b in rest])
                + (f" ({', '.join(edge_parts)})" if edge_parts else ""))
    band_text, band_in, band_px = _band(scat, sky)
    where = where_in_frame(xk, yk, w, h)
    return {"darkening_stops_thirds": thirds, "darkening_stops_edges": edges, "darkest_px": [xk, yk],
            "darkest_where": where, "band_90_in_frame": band_in, "band_90_center_px": band_px,
            "unevenness_text": f"{text}; darkest at the {where}; {band_text}"}
