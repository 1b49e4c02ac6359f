"""Which way to set the polarizer: closed-form filter-angle advice.

For a region with summed Stokes vector ``(S0, S1, S2)`` the mean intensity behind an
analyzer at ``theta`` with diattenuation ``D`` and transmittance ``t`` is (Malus's law in
Stokes form)

.. math:: T(\\theta) = \\tfrac{t}{2}\\,(S_0 + D\\,(S_1 \\cos 2\\theta + S_2 \\sin 2\\theta)),

smallest at ``theta* = AoLP + 90 deg``, where ``T = t/2 (S0 - D L)`` with ``L = sqrt(S1^2 +
S2^2)``.  Its mean over a full turn of the filter is ``t/2 S0``, so the reduction is
``log2(S0 / (S0 - D L)) = -log2(1 - D DoLP)`` stops.  With a protected region ``p`` the
ratio ``T_p(theta) / T_r(theta)`` of two such sinusoids is maximized in closed form.

References
----------
.. [1] E. Collett, *Field Guide to Polarization*, SPIE (2005), p. 12 (Malus's law) and
   pp. 16-19 (Mueller matrix of a linear polarizer).
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from .errors import InputError

__all__ = [
    "Region",
    "parse_region",
    "best_angle_for_region",
    "best_angle_for_contrast",
    "transmitted",
    "RegionSink",
    "region_stokes_sum",
    "advice_result",
    "run_advise",
    "advice_text",
    "SAFETY_NOTE",
]

SAFETY_NOTE = ("Safety: never look at the sun through a viewfinder or lens, and do not leave a sensor pointed at it; "
               "inspection work near water or at height follows local codes and licensed practice.")


@dataclass
class Region:
    """A pixel region: a box ``x0,y0,x1,y1`` (x1, y1 exclusive) or a mask image."""

    text: str
    box: tuple | None = None
    mask: np.ndarray | None = None

    def as_mask(self, shape) -> np.ndarray:
        h, w = shape
        if self.box is not None:
            x0, y0, x1, y1 = self.box
            if not (0 <= x0 < x1 <= w and 0 <= y0 < y1 <= h):
                raise InputError(f"region {self.text} does not fit in the {w}x{h} frame; give x0,y0,x1,y1 with "
                                 f"0 <= x0 < x1 <= {w} and 0 <= y0 < y1 <= {h}")
            m = np.zeros((h, w), bool)
            m[y0:y1, x0:x1] = True
            return m
        if self.mask.shape != (h, w):
            raise InputError(f"mask {self.text} is {self.mask.shape[1]}x{self.mask.shape[0]} but the frames are {w}x{h}; "
                             "give a mask image of the frame's size")
        return self.mask


_BOX = re.compile(r"^\s*(-?\d+)\s*,\s*(-?\d+)\s*,\s*(-?\d+)\s*,\s*(-?\d+)\s*$")


def parse_region(text, *, option: str = "--region") -> Region:
    """Parse ``x0,y0,x1,y1`` or the path of a mask image (non-zero = inside)."""
    text = str(text)
    m = _BOX.match(text)
    if m:
        box = tuple(int(v) for v in m.groups())
        return Region(text=text, box=box)
    p = Path(text)
    if not p.is_file():
        raise InputError(f"{option} {text!r} is neither a box x0,y0,x1,y1 (pixels, x1/y1 exclusive) nor an existing mask image")
    from .ingest import read_frame

    fr = read_frame(p, transfer="linear")
    mask = (fr.data != 0).any(axis=0)
    if not mask.any():
        raise InputError(f"{option} mask {p} has no non-zero pixels; paint the region non-zero")
    return Region(text=text, mask=mask)


def transmitted(s, angle_deg, *, diattenuation: float = 1.0):
    """Mean transmitted intensity of a region with summed/mean Stokes ``s`` at ``angle_deg``."""
    from .stokes import intensity_at

    return intensity_at(s, angle_deg, diattenuation=diattenuation)


def best_angle_for_region(s, *, diattenuation: float = 1.0) -> dict:
    """Analyzer angle that minimizes a region's transmitted intensity (closed form).

    Parameters
    ----------
    s : array_like, shape (3,)
        Summed (or mean) Stokes vector of the region.
    diattenuation : float
        Filter diattenuation ``D = (ER-1)/(ER+1)``.

    Returns
    -------
    dict
        ``best_angle_deg`` in [0, 180), ``region_dolp``, ``region_aolp_deg``,
        ``reduction_stops`` (with D), ``reduction_stops_ideal`` (D = 1),
        ``transmission_at_best`` (fraction of the unfiltered intensity S0).
    """
    s = np.asarray(s, dtype=np.float64)
    if not s[0] > 0:
        raise InputError("the region holds no valid light (S0 <= 0); choose a region with valid pixels")
    lin = float(np.hypot(s[1], s[2]))
    dolp = float(min(lin / s[0], 1.0))
    aolp = float(np.degrees(0.5 * np.arctan2(s[2], s[1])) % 180.0)
    best = (aolp + 90.0) % 180.0
    def stops(d):
        left = 1.0 - d * dolp
        return float(-np.log2(left)) if left > 0 else float("inf")
    return {
        "best_angle_deg": round(best, 3),
        "region_dolp": round(dolp, 5),
        "region_aolp_deg": round(aolp, 3),
        "reduction_stops": round(stops(diattenuation), 4),
        "reduction_stops_ideal": round(stops(1.0), 4),
        "transmission_at_best": round(float(0.5 * (1 - diattenuation * dolp)), 5),
    }


def best_angle_for_contrast(s_protect, s_region, *, diattenuation: float = 1.0) -> dict:
    """Analyzer angle that maximizes ``T_protect / T_region`` (closed form).

    With ``a = (P0, D P1, D P2)`` and ``b = (R0, D R1, D R2)`` the ratio
    ``(a0 + a1 c + a2 s) / (b0 + b1 c + b2 s)`` (c, s = cos, sin of 2 theta) is stationary
    where ``A s + B c + C = 0`` with ``A = a0 b1 - a1 b0``, ``B = a2 b0 - a0 b2``,
    ``C = a2 b1 - a1 b2``; both roots are evaluated and the larger ratio kept.

    Returns
    -------
    dict
        ``best_angle_deg``, ``contrast_gain`` (ratio at best / ratio without filter),
        ``protect_intensity`` and ``region_intensity`` at the best angle as fractions of
        their unfiltered intensities.
    """
    p = np.asarray(s_protect, dtype=np.float64)
    r = np.asarray(s_region, dtype=np.float64)
    if not (p[0] > 0 and r[0] > 0):
        raise InputError("the region or the protected region holds no valid light; choose regions with valid pixels")
    d = diattenuation
    a = np.array([p[0], d * p[1], d * p[2]])
    b = np.array([r[0], d * r[1], d * r[2]])
    A = a[0] * b[1] - a[1] * b[0]
    B = a[2] * b[0] - a[0] * b[2]
    C = a[2] * b[1] - a[1] * b[2]
    R = np.hypot(A, B)

    def ratio(th):
        c, s = np.cos(2 * th), np.sin(2 * th)
        return (a[0] + a[1] * c + a[2] * s) / (b[0] + b[1] * c + b[2] * s)

    if R < 1e-15 * max(abs(a[0] * b[0]), 1e-300):
        cands = [0.0]  # the ratio does not depend on the angle
    else:
        phi = np.arctan2(A, B)  # B cos(2t) + A sin(2t) = R cos(2t - phi)
        x = np.clip(-C / R, -1.0, 1.0)
        delta = np.arccos(x)
        cands = [(phi + delta) / 2, (phi - delta) / 2]
    vals = [ratio(t) for t in cands]
    th = cands[int(np.argmax(vals))]
    best = float(np.degrees(th) % 180.0)
    c, s = np.cos(2 * th), np.sin(2 * th)
    tp = 0.5 * (a[0] + a[1] * c + a[2] * s) / p[0]
    tr = 0.5 * (b[0] + b[1] * c + b[2] * s) / r[0]
    return {
        "best_angle_deg": round(best % 180.0, 3),
        "contrast_gain": round(float(max(vals) / (a[0] / b[0])), 5),
        "protect_intensity": round(float(tp), 5),
        "region_intensity": round(float(tr), 5),
    }


def region_stokes_sum(s0, s1, s2, valid, mask):
    """Summed Stokes vector and pixel count of the valid pixels of ``mask``.

    Parameters
    ----------
    s0, s1, s2 : ndarray, shape (C, h, w)
        Stokes maps (any channels; they are summed too).
    valid : ndarray, shape (C, h, w), bool
        Valid pixels; a pixel counts only when valid in every channel.
    mask : ndarray, shape (h, w), bool
        The region.

    Returns
    -------
    sums : ndarray, shape (3,), float64
    count : int
    """
    sel = np.asarray(mask, bool) & np.asarray(valid, bool).all(axis=0)
    n = int(sel.sum())
    if not n:
        return np.zeros(3), 0
    return np.array([float(np.sum(a[:, sel], dtype=np.float64)) for a in (s0, s1, s2)]), n


class RegionSink:
    """Sum the Stokes vectors (over channels and pixels) inside region masks, block by block."""

    def __init__(self, masks: dict):
        self.masks = masks
        self.sums = {k: np.zeros(3) for k in masks}
        self.counts = {k: 0 for k in masks}

    def write(self, r0, r1, products, values):
        for k, m in self.masks.items():
            sums, n = region_stokes_sum(products["S0"], products["S1"], products["S2"], products["valid"], m[r0:r1])
            self.sums[k] += sums
            self.counts[k] += n


def _turn_text(best: float, angles) -> str:
    angles = np.mod(np.asarray(angles, dtype=np.float64), 180.0)
    diffs = (best - angles + 90.0) % 180.0 - 90.0
    k = int(np.argmin(np.abs(diffs)))
    d = float(diffs[k])
    if abs(d) < 0.05:
        return f"that is the {angles[k]:g} deg setting you already shot"
    sense = "counter-clockwise" if d > 0 else "clockwise"
    return (f"from the {angles[k]:g} deg setting of your bracket, turn the filter {abs(d):.1f} deg {sense} "
            "as seen on the displayed image (from behind the camera)")


def advice_text(result: dict, angles) -> str:
    """A short human answer from the advise result."""
    lines = []
    best = result["best_angle_deg"]
    lines.append(f"Set the polarizer's transmission axis to {best:.1f} deg "
                 "(counter-clockwise from the image's horizontal as displayed, on the scale of the angles you gave).")
    lines.append(f"To get there: {_turn_text(best, angles)}.")
    dolp = result["region_dolp"]
    stops_i = result["reduction_stops_ideal"]
    removed = (1 - 2 ** -stops_i) * 100 if np.isfinite(stops_i) else 100.0
    lines.append(f"The region's light is {dolp * 100:.0f}% linearly polarized (AoLP {result['region_aolp_deg']:.1f} deg): "
                 f"at that angle an ideal filter removes {removed:.0f}% of what a filter at a random angle passes "
                 f"({stops_i:.2f} stops darker).")
    er = result.get("extinction_ratio")
    if er is not None:
        lines.append(f"A real filter with extinction ratio {er:g} reaches {result['reduction_stops']:.2f} stops.")
    else:
        from .stokes import diattenuation_from_extinction

        st = []
        for e in (30, 300):
            d = diattenuation_from_extinction(e)
            left = 1 - d * dolp
            st.append(f"ER {e}: {-np.log2(left):.2f} stops")
        lines.append("Real filters reach less (" + ", ".join(st) + "); give --extinction for yours.")
    if "contrast_gain" in result:
        lines.append(f"Protected region kept: at this angle it passes {result['protect_intensity'] * 100:.0f}% of its light "
                     f"while the region passes {result['region_intensity'] * 100:.0f}%; "
                     f"protected/region contrast improves {result['contrast_gain']:.2f}x over no filter.")
    if dolp < 0.05:
        lines.append("The region is barely polarized: no filter angle will remove much of this light.")
    return "\n".join(lines)


def advice_result(sums: dict, counts: dict, *, region, protect=None, extinction=None, analyzer_angles_deg,
                  inputs, shifts_px=None, polarizer: str = "front") -> dict:
    """The advice (what ``polarsky advise --json`` prints) from a region's summed Stokes vectors.

    Parameters
    ----------
    sums : dict
        ``"region"`` (and with ``protect`` ``"protect"``): summed Stokes vector (3,) of the
        valid pixels inside (see :func:`region_stokes_sum`).
    counts : dict
        Valid pixel counts under the same keys.
    region, protect : Region
        The regions (their ``text`` is echoed).
    extinction : float, optional
        Filter extinction ratio (None = ideal).
    analyzer_angles_deg, inputs, shifts_px, polarizer
        Facts of the bracket echoed in the result.
    """
    from .stokes import diattenuation_from_extinction

    if counts["region"] == 0:
        raise InputError(f"region {region.text} holds no valid pixels (all saturated, black or outside); choose another region")
    d = 1.0 if extinction is None else diattenuation_from_extinction(extinction)
    result = best_angle_for_region(sums["region"], diattenuation=d)
    result["extinction_ratio"] = extinction
    result["region"] = region.text
    result["region_pixels"] = counts["region"]
    if protect is not None:
        if counts["protect"] == 0:
            raise InputError(f"protected region {protect.text} holds no valid pixels; choose another region")
        minimum = result["best_angle_deg"]
        con = best_angle_for_contrast(sums["protect"], sums["region"], diattenuation=d)
        result.update(con)
        result["minimum_angle_deg"] = minimum
        result["protect"] = protect.text
        result["protect_pixels"] = counts["protect"]
        # reduction of the region at the recommended (contrast) angle
        s = sums["region"]
        t_best = transmitted(s, con["best_angle_deg"], diattenuation=d)
        result["reduction_stops"] = round(float(np.log2(0.5 * s[0] / t_best)), 4) if t_best > 0 else float("inf")
    result["analyzer_angles_deg"] = list(analyzer_angles_deg)
    result["inputs"] = list(inputs)
    result["shifts_px"] = shifts_px
    result["polarizer"] = polarizer
    result["angle_convention"] = ("degrees counter-clockwise from the image +x axis as displayed, "
                                  "in the frame of the input analyzer angles (ring readings stay ring readings)")
    return result


def run_advise(frames=(), out_dir=None, *, region, protect=None, pictures: bool = True, **options) -> dict:
    """``polarsky advise``: best filter angle for a region (optionally protecting another).

    Parameters
    ----------
    frames : sequence of path-like
    out_dir : path-like, optional
        When given, ``advice.json`` and pictures are written there.
    region, protect : str or Region
        ``x0,y0,x1,y1`` boxes or mask image paths.
    **options
        Bracket and estimate options as for :func:`polarsky.pipeline.stokes_from_files`.

    Returns
    -------
    dict
        ``best_angle_deg``, ``reduction_stops``, ``reduction_stops_ideal``,
        ``region_dolp``, ``region_aolp_deg``, ``extinction_ratio`` and, with ``protect``,
        ``contrast_gain``, ``protect_intensity``, ``region_intensity`` (and
        ``minimum_angle_deg``, the angle that only darkens the region).
    """
    from . import pipeline as pl
    from .ingest import load_bracket
    from .stokes import diattenuation_from_extinction

    region = region if isinstance(region, Region) else parse_region(region, option="--region")
    protect = None if protect is None else (protect if isinstance(protect, Region) else parse_region(protect, option="--protect"))
    progress = bool(options.pop("progress", False))
    b_kw, s_kw = pl._split_kwargs(options)
    bracket = load_bracket(frames, **b_kw)
    settings = pl._settings_from_kwargs(**s_kw)
    masks = {"region": region.as_mask(bracket.shape)}
    if protect is not None:
        masks["protect"] = protect.as_mask(bracket.shape)
    sink = RegionSink(masks)
    preview = pl.PreviewSink(bracket.shape, max_side=1200)
    info = pl.process_bracket(bracket, settings, [sink, preview], progress=progress)
    result = advice_result(sink.sums, sink.counts, region=region, protect=protect, extinction=settings.extinction,
                           analyzer_angles_deg=bracket.angles_deg.tolist(), inputs=[str(p) for p in bracket.paths],
                           shifts_px=info.get("shifts_px"), polarizer="front")
    d = 1.0 if settings.extinction is None else diattenuation_from_extinction(settings.extinction)
    if out_dir is not None:
        from . import render_advice

        prev = preview.finish()
        with pl.OutputStage(out_dir) as stage:
            pics = render_advice.advice_pictures(prev, masks, result, stage.dir, step=preview.step,
                                                 diattenuation=d) if pictures else []
            result["outputs"] = ["advice.json"] + [p.name for p in pics]
            pl.write_json(stage.path("advice.json"), result)
            stage.publish()
    return result
