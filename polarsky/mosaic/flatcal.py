"""Per-pixel bench calibration of a polarization-mosaic sensor (flat-field frames).

The bench: a uniform, unpolarized source seen through a reference linear polarizer turned
to known angles ``theta_k`` (at least 3 distinct, typically 12 to 36 over 180 degrees),
optionally with dark frames.  The light reaching the sensor is then fully polarized at
``theta_k`` with the same intensity ``L`` in every frame, so each pixel with transmittance
``t``, diattenuation ``D`` and transmission axis ``phi`` records

.. math:: I_k = \\tfrac{t L}{2}\\,[1 + D \\cos 2(\\theta_k - \\phi)] = a + b\\cos 2\\theta_k + c \\sin 2\\theta_k

a linear least-squares problem per pixel, solved in closed form with the pseudo-inverse of
the (K, 3) design matrix (the frames are streamed; memory is a few images).  From it
``phi = atan2(c, b)/2``, ``D = sqrt(b^2 + c^2)/a`` and ``t ∝ a``.  This is the
calibration-matrix approach of Powell & Gruev (2013): every pixel keeps its own analysis
vector ``t/2 [1, D cos 2phi, D sin 2phi]`` (the rows of its measurement matrix), which the
decoder then uses in place of the nominal one.

Gains are normalised so that the median gain of the sensor (of each colour on colour
sensors) is 1: the calibration flattens pixel-to-pixel differences without changing the
colour balance.  Angles are on the reference polarizer's scale.

Defects: *dead* pixels respond with less than half the median gain (or not at all); *hot*
pixels have a dark level far above the others (with ``--dark``) or, without dark frames, a
gain above 1.5 times the median; *saturated* pixels reached 98 % of full scale in some
frame.  They are flagged in ``pixel_defect`` (1 dead, 2 hot, 3 saturated) and repaired
from their neighbours during decoding.

References
----------
.. [1] S. B. Powell, V. Gruev, "Calibration methods for division-of-focal-plane
   polarimeters", Opt. Express 21(18), 21039-21055 (2013), doi:10.1364/OE.21.021039.
.. [2] N. Hagen, S. Shibata, Y. Otani, "Calibration and performance assessment of microgrid
   polarization cameras", Opt. Eng. 58(8), 082408 (2019), doi:10.1117/1.OE.58.8.082408
   (prefer diattenuation to the statistically unstable extinction ratio).
"""

from __future__ import annotations

import hashlib
import warnings
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .._shared.checks import check_distinct_files
from ..core.stokes import check_angles
from ..conventions import SATURATION_FRACTION
from ..errors import InputError, PolarskyWarning
from ..estimate.calibration import Calibration
from ..read.mosaic_frames import read_mosaic_frame
from .layout import MosaicLayout, bayer_cell_colours, check_frame_shape, parse_mosaic

__all__ = ["FlatFit", "fit_flat", "fit_flat_files", "flat_summary", "flat_calibration", "DEFECT_CODES"]

DEFECT_CODES = {0: "ok", 1: "dead", 2: "hot", 3: "saturated"}


@dataclass
class FlatFit:
    """Per-pixel fit results (all (H, W) arrays, float32)."""

    gain: np.ndarray
    diattenuation: np.ndarray
    angle_deg: np.ndarray
    sigma_angle_deg: np.ndarray
    sigma_diattenuation: np.ndarray
    residual_rms: np.ndarray
    defect: np.ndarray
    layout: MosaicLayout
    angles_deg: np.ndarray
    info: dict = field(default_factory=dict)


def _check_bench_angles(angles_deg, n_frames):
    a = np.asarray(angles_deg, dtype=np.float64).ravel()
    if a.size != n_frames:
        raise InputError(f"{n_frames} calibration frames but {a.size} angles; give one --angles value per frame")
    check_angles(a, what="reference-polarizer angles")  # at least 3 orientations; typically 12 to 36
    return a


def fit_flat(frames, angles_deg, layout, *, dark=None, invalid=None):
    """Fit each pixel's analysis vector from bench frames in memory.

    Parameters
    ----------
    frames : iterable of ndarray (H, W)
        Linear frames (any scale), one per reference-polarizer angle.
    angles_deg : array_like, shape (K,)
        Reference-polarizer transmission-axis angles, degrees, image convention.
    layout : MosaicLayout or str
    dark : ndarray (H, W), optional
        Mean dark frame on the same scale, subtracted from every frame.
    invalid : ndarray (H, W) bool, optional
        Pixels saturated in some frame.

    Returns
    -------
    FlatFit

    References
    ----------
    .. [1] S. B. Powell, V. Gruev, Opt. Express 21(18), 21039-21055 (2013).
    """
    layout = parse_mosaic(layout) if not isinstance(layout, MosaicLayout) else layout
    if not hasattr(frames, "__len__"):
        frames = list(frames)
    theta = np.deg2rad(_check_bench_angles(angles_deg, len(frames)))
    x = np.stack([np.ones_like(theta), np.cos(2 * theta), np.sin(2 * theta)], axis=1)  # (K, 3)
    xtx_inv = np.linalg.inv(x.T @ x)
    shape = acc = sq = None
    for k, f in enumerate(frames):
        f = np.asarray(f, dtype=np.float64)
        if shape is None:
            shape = f.shape
            check_frame_shape(shape, layout, source="calibration frame")
            acc = np.zeros((3,) + shape, dtype=np.float64)
            sq = np.zeros(shape, dtype=np.float64)
        elif f.shape != shape:
            raise InputError(f"calibration frame {k + 1} is {f.shape[1]}x{f.shape[0]} pixels, the first is "
                             f"{shape[1]}x{shape[0]}; give frames of one sensor")
        if dark is not None:
            f = f - dark
        acc += x[k][:, None, None] * f
        sq += f * f
    coef = np.einsum("ij,j...->i...", xtx_inv, acc)
    kk = len(frames)
    rss = np.maximum(sq - np.einsum("i...,i...->...", coef, acc), 0.0)
    var_i = rss / max(kk - 3, 1)
    a, b, c = coef
    amp = np.hypot(b, c)
    with np.errstate(divide="ignore", invalid="ignore"):
        dia = amp / a
        phi = np.mod(0.5 * np.degrees(np.arctan2(c, b)), 180.0)
        sig_b = np.sqrt(var_i * 0.5 * (xtx_inv[1, 1] + xtx_inv[2, 2]))
        sig_phi = np.degrees(sig_b / (2 * amp))
        sig_d = np.sqrt(var_i * (xtx_inv[1, 1] + xtx_inv[2, 2]) * 0.5 + dia**2 * var_i * xtx_inv[0, 0]) / a
    # gain normalised to the median of the sensor (of each colour on colour sensors)
    gain = np.full(shape, np.nan)
    groups = _colour_groups(layout, shape)
    for g in groups:
        med = np.nanmedian(a[g]) if np.any(np.isfinite(a[g])) else np.nan
        if not (med > 0):
            raise InputError("the calibration frames show no light; check the source, exposure and --black-level")
        gain[g] = a[g] / med
    defect = np.zeros(shape, dtype=np.uint8)
    defect[~(gain >= 0.5) | ~np.isfinite(dia) | ~np.isfinite(phi)] = 1
    if dark is not None:
        d = np.asarray(dark, dtype=np.float64)
        med = np.median(d)
        mad = 1.4826 * np.median(np.abs(d - med))
        defect[(d > med + max(8 * mad, 0.005)) & (defect == 0)] = 2
    else:
        defect[(gain > 1.5) & (defect == 0)] = 2
    if invalid is not None:
        defect[np.asarray(invalid, bool)] = 3
    dia = np.clip(dia, 0.0, 1.0)
    f32 = lambda v: np.asarray(v, dtype=np.float32)  # noqa: E731
    return FlatFit(f32(gain), f32(dia), f32(phi), f32(sig_phi), f32(sig_d), f32(np.sqrt(var_i)),
                   defect, layout, np.rad2deg(theta),
                   {"n_frames": kk, "n_dark": 0 if dark is None else 1})


def _colour_groups(layout, shape):
    h, w = shape
    if layout.colour is None:
        return [np.ones(shape, bool)]
    cc = bayer_cell_colours(layout.colour)
    cmap = np.tile(np.repeat(np.repeat(cc, 2, 0), 2, 1), (h // 4, w // 4))
    return [cmap == i for i in range(3)]


def fit_flat_files(frames, angles_deg, *, mosaic, mosaic_color=None, dark=(), bit_depth=None,
                   black_level=None, transfer="auto"):
    """Fit a flat calibration from bench frame files (streamed; see :func:`fit_flat`)."""
    layout = parse_mosaic(mosaic, mosaic_color)
    frames = list(frames)
    if not frames:
        raise InputError("no calibration frames given; give one FRAME per reference-polarizer angle")
    _check_bench_angles(angles_deg, len(frames))
    check_distinct_files(frames, angles_deg)
    dark_mean = None
    for i, d in enumerate(dark or ()):
        v, _, _ = read_mosaic_frame(d, bit_depth=bit_depth, black_level=black_level, transfer=transfer,
                                    hint_bit_depth=False)
        if dark_mean is not None and v.shape != dark_mean.shape:
            raise InputError(f"dark frame {d} is {v.shape[1]}x{v.shape[0]} pixels but {dark[0]} is "
                             f"{dark_mean.shape[1]}x{dark_mean.shape[0]}; give dark frames of the same sensor")
        dark_mean = v.astype(np.float64) if dark_mean is None else dark_mean + v
    if dark_mean is not None:
        dark_mean /= len(dark)
    invalid = None
    n_sat = 0
    digests: dict = {}

    def gen():
        nonlocal invalid, n_sat
        for k, f in enumerate(frames):
            v, inv, info = read_mosaic_frame(f, bit_depth=bit_depth, black_level=black_level, transfer=transfer)
            ref = invalid if invalid is not None else dark_mean
            if ref is not None and v.shape != ref.shape:
                other = frames[0] if invalid is not None else f"the dark frame {dark[0]}"
                raise InputError(f"bench frame {f} is {v.shape[1]}x{v.shape[0]} pixels but {other} is "
                                 f"{ref.shape[1]}x{ref.shape[0]}; give frames of one sensor")
            _warn_identical(digests, hashlib.sha1(v.tobytes()).hexdigest(), f, angles_deg[k])
            sat = v >= SATURATION_FRACTION
            n_sat += int(sat.sum())
            invalid = sat if invalid is None else (invalid | sat)
            yield v

    # fit_flat needs the list once; stream through a lazy list of arrays read one at a time
    fit = fit_flat(_LazyFrames(gen, len(frames)), angles_deg, layout, dark=dark_mean, invalid=None)
    if invalid is not None and invalid.any():
        fit.defect[invalid] = 3
        warnings.warn(f"{int(invalid.sum())} pixels were saturated in some calibration frame and are flagged "
                      "unusable; lower the exposure", PolarskyWarning, stacklevel=2)
    fit.info.update(n_dark=len(dark or ()), files=[str(f) for f in frames], dark_files=[str(d) for d in dark or ()])
    return fit


def _warn_identical(digests: dict, digest: str, f, angle) -> None:
    """Warn when a bench frame holds the very same values as one at another angle."""
    other = digests.setdefault(digest, (f, angle))
    if other[0] != f and (float(other[1]) - float(angle)) % 180.0 != 0.0:
        warnings.warn(f"bench frames {Path(other[0]).name} and {Path(f).name} hold identical values although their "
                      f"angles differ ({float(other[1]):g} and {float(angle):g} deg); if one picture was saved twice, "
                      "the calibration is wrong", PolarskyWarning, stacklevel=4)


class _LazyFrames:
    """A sequence that reads frames one at a time (keeps memory to one frame)."""

    def __init__(self, gen, n):
        self._gen, self._n = gen, n

    def __len__(self):
        return self._n

    def __iter__(self):
        return self._gen()


def flat_summary(fit: FlatFit) -> dict:
    """Summary statistics per micro-polarizer position (and colour): orientation errors,
    diattenuation, extinction ratios, gains, defect counts."""
    shape = fit.gain.shape
    h, w = shape
    ok = fit.defect == 0
    nominal = np.asarray(fit.layout.angles_deg)
    groups = _colour_groups(fit.layout, shape)
    names = ["all"] if fit.layout.colour is None else ["R", "G", "B"]
    positions = []
    pos_map = np.tile(np.arange(4).reshape(2, 2), (h // 2, w // 2))
    for gi, g in enumerate(groups):
        for p in range(4):
            sel = (pos_map == p) & g & ok
            err = (fit.angle_deg[sel] - nominal[p] + 90.0) % 180.0 - 90.0
            d = fit.diattenuation[sel].astype(np.float64)
            d_pct = np.percentile(d, [5, 50, 95])
            # ER = (1 + D)/(1 - D) is monotonic in D: its percentiles are those of D mapped;
            # None where D reached 1 within the noise (ER not resolved)
            er_pct = [None if v >= 1 else round(float((1 + v) / (1 - v)), 1) for v in d_pct]
            entry = {"position": p, "nominal_angle_deg": float(nominal[p]), "pixels": int(sel.sum())}
            if names[0] != "all":
                entry["colour"] = names[gi]
            if sel.any():
                entry.update(
                    angle_error_mean_deg=round(float(err.mean()), 4),
                    angle_error_std_deg=round(float(err.std()), 4),
                    angle_error_rms_deg=round(float(np.sqrt(np.mean(err**2))), 4),
                    angle_error_p05_p50_p95_deg=[round(float(v), 4) for v in np.percentile(err, [5, 50, 95])],
                    diattenuation_p05_p50_p95=[round(float(v), 5) for v in d_pct],
                    extinction_ratio_p05_p50_p95=er_pct,
                    gain_std=round(float(fit.gain[sel].std()), 5),
                )
            positions.append(entry)
    return {
        "sensor_shape": [int(h), int(w)],
        "mosaic": fit.layout.text,
        "mosaic_color": fit.layout.colour,
        "n_frames": int(fit.info.get("n_frames", 0)),
        "n_dark_frames": int(fit.info.get("n_dark", 0)),
        "reference_angles_deg": [round(float(a), 4) for a in fit.angles_deg],
        "dead_pixels": int((fit.defect == 1).sum()),
        "hot_pixels": int((fit.defect == 2).sum()),
        "saturated_pixels": int((fit.defect == 3).sum()),
        "median_pixel_angle_sigma_deg": round(float(np.nanmedian(fit.sigma_angle_deg[ok])), 5) if ok.any() else None,
        "median_residual_rms": float(np.nanmedian(fit.residual_rms[ok])) if ok.any() else None,
        "positions": positions,
    }


def flat_calibration(fit: FlatFit, summary=None) -> Calibration:
    """Pack a :class:`FlatFit` into a :class:`~polarsky.estimate.calibration.Calibration` (kind "flat")."""
    summary = flat_summary(fit) if summary is None else summary
    px = lambda a: np.asarray(a, dtype=np.float32)[None]  # noqa: E731 - channel dim of the raw sensor grid
    return Calibration(
        kind="flat",
        pixel={
            "pixel_gain": px(fit.gain),
            "pixel_diattenuation": px(fit.diattenuation),
            "pixel_angle_deg": px(fit.angle_deg),
            "pixel_defect": px(fit.defect),
            "pixel_angle_sigma_deg": px(fit.sigma_angle_deg),
            "pixel_diattenuation_sigma": px(fit.sigma_diattenuation),
        },
        attrs={
            "mosaic": fit.layout.text,
            "mosaic_color": fit.layout.colour,
            "sensor_shape": [int(v) for v in fit.gain.shape],
            "channels": ["sensor"],
            "reference_angles_deg": [float(a) for a in fit.angles_deg],
            "defect_codes": {str(k): v for k, v in DEFECT_CODES.items()},
            "summary": summary,
            "angle_convention": "reference polarizer scale, image convention (from +x, counter-clockwise as displayed)",
        },
    )
