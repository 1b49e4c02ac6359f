"""What every task does first: settings, the frames' source, the warnings of the run.

:func:`open_source` reads the input (a bracket of frames or polarization-mosaic frames) and
returns the estimate's source with the facts a summary records; every task that estimates
Stokes products starts from it, so a bracket means the same thing in every command.
"""

from __future__ import annotations

import contextlib
import time
import warnings
from dataclasses import dataclass, field

import numpy as np

from ..errors import PolarskyWarning

__all__ = ["resolve_settings", "open_source", "Opened", "collect_warnings", "publish_result", "check_estimate",
           "IMPOSSIBLE_FRACTION"]

#: Refuse a result when more than this fraction of a channel's valid pixels had a DoLP above 1
#: beyond their uncertainty (fewer are masked with a warning).
IMPOSSIBLE_FRACTION = 0.01


def resolve_settings(settings=None, options=None):
    """A :class:`~polarsky.options.settings.Settings` from a settings object and/or option keywords."""
    from ..options.settings import Settings

    if settings is None:
        return Settings.from_options(options or {})
    return settings.replace(options) if options else settings


@dataclass
class Opened:
    """An input ready for the row-block runner.

    Attributes
    ----------
    source : BracketSource or MosaicSource
    noise : NoiseModel
    facts : dict
        Summary keys known before the estimate (:mod:`polarsky.write.summary`).
    bracket : Bracket or None
        The bracket (brackets only).
    inputs : list of str
    timing : dict
    calibration : Calibration or None
        The calibration applied (``--calibration``).
    """

    source: object
    noise: object
    facts: dict
    bracket: object = None
    inputs: list = field(default_factory=list)
    timing: dict = field(default_factory=dict)
    calibration: object = None


def load_calibration(value):
    """The Calibration of a setting: None, a Calibration object, or a file/folder to read."""
    from ..estimate.calibration import Calibration
    from ..read.calibration_file import read_calibration

    if value is None or isinstance(value, Calibration):
        return value
    return read_calibration(value)


def open_source(frames, settings, *, compiled: bool | None = None) -> Opened:
    """Read a bracket or mosaic frames as ``settings`` say, ready to estimate.

    ``compiled`` forces the compiled kernels on or off (default: by the input's size).
    """
    from ..core.noise import NoiseModel
    settings.check_frame_options()
    est = settings.estimate
    noise = NoiseModel(gain_e_per_dn=est.gain_e_per_dn, read_noise_dn=est.read_noise_dn, source=est.noise)
    cal = load_calibration(est.calibration)
    if settings.mosaic.mosaic is not None:
        if cal is not None and cal.kind == "ring":
            from ..errors import InputError

            raise InputError(f"--calibration {cal.source} is a filter-ring calibration; a mosaic camera has no filter "
                             "ring: drop --calibration or give a flat or sky calibration of the camera")
        opened = _open_mosaic(frames, settings, cal, noise, compiled)
    else:
        opened = _open_bracket(frames, settings, cal, noise, compiled)
    opened.calibration = cal
    return opened


def _open_bracket(frames, settings, cal, noise, compiled) -> Opened:
    from ..core.stokes import check_angles
    from ..estimate.calibration import analysis_matrices
    from ..estimate.sources import BracketSource
    from ..read.bracket import load_bracket
    from ..write.summary import calibration_facts

    est = settings.estimate
    if compiled is not False:
        _prefetch_kernels(frames)
    t0 = time.perf_counter()
    bracket = load_bracket(frames, settings.read)
    t_read = time.perf_counter() - t0
    shifts = corrections = None
    if est.align:
        from ..estimate.align import align_bracket, roll_corrections

        shifts = align_bracket(bracket).round(3).tolist()
        if est.filter_mount == "lens":
            corrections = roll_corrections(bracket.rotations_deg)
    elif "filter_mount" in settings.given:
        from ..errors import InputError

        raise InputError("--filter-mount says how the analyzer angles follow a roll that --align measures; add "
                         "--align or drop --filter-mount")
    t_align = time.perf_counter() - t0 - t_read
    angles = bracket.display_angles_deg + (0.0 if corrections is None else corrections)
    w, _ = analysis_matrices(angles, bracket.n_channels, extinction=est.extinction, angle_offset=est.angle_offset,
                             calibration=cal)
    checks = _self_checks(bracket, w, settings)
    if checks.pop("reweighted"):
        w, _ = analysis_matrices(angles, bracket.n_channels, extinction=est.extinction,
                                 angle_offset=est.angle_offset, calibration=cal)
    h, wd = bracket.shape
    sign = bracket.angle_map[0]
    facts = {
        "source_kind": "bracket", "inputs": [str(p) for p in bracket.paths], "frames": bracket.n,
        "analyzer_angles_deg": (bracket.angles_deg if sign > 0 else bracket.display_angles_deg).tolist(),
        "angle_source": bracket.angle_source,
        "width_px": int(wd), "height_px": int(h), "output_pixel_size_px": 1, "channels": bracket.channels,
        "transfer": bracket.encodings, "polarizer": "front", "exposure_scale": bracket.exposure_scale.tolist(),
        "exposure_source": bracket.exposure_source,
        "condition_number": round(check_angles(bracket.angles_deg, warn_condition=np.inf), 4),
        "extinction_ratio": est.extinction, "analysis_matrix": np.round(w, 8).tolist(),
        "calibration": calibration_facts(cal), "aligned": bool(est.align), "shifts_px": shifts,
        "orientation": bracket.orientation, "frame_orientations": [fr.orientation for fr in bracket.frames],
        "angle_frame": settings.read.angle_frame,
        "rotations_deg": None if bracket.rotations_deg is None else np.round(bracket.rotations_deg, 4).tolist(),
        "scales": None if bracket.scales is None else np.round(bracket.scales, 6).tolist(),
        "filter_mount": est.filter_mount if est.align else None,
        "roll_corrections_deg": None if corrections is None else np.round(corrections, 4).tolist(),
        "bit_depth": None if bracket.frames[0].floating else int(round(np.log2(bracket.frames[0].full_scale + 1))),
        "float_scale": bracket.frames[0].full_scale if bracket.frames[0].floating else None,
        "response": None if bracket.response is None else {"file": bracket.response.source,
                                                           "method": bracket.response.method},
        **checks,
    }
    return Opened(source=BracketSource(bracket, w, compiled=compiled), noise=noise, facts=facts, bracket=bracket,
                  inputs=facts["inputs"], timing={"read": t_read, "align": t_align})


def _prefetch_kernels(frames) -> None:
    """Load the compiled kernels in the background while the frames are decoded, when the
    headers say the bracket is large enough to use them (:func:`polarsky.estimate.runner.use_compiled`)."""
    from pathlib import Path

    from .._shared.prefetch import prefetch
    from ..estimate.runner import use_compiled
    from ..read.formats import header_pixels

    files = [f for f in frames if Path(f).is_file()]
    pixels = [header_pixels(f) for f in files]
    if not files or None in pixels or not use_compiled(sum(pixels)):
        return

    def load():
        from ..core.kernels.dispatch import warm

        warm(len(files))

    prefetch(load)


def _self_checks(bracket, w, settings) -> dict:
    """The bracket's own exposure estimate (4+ angles) and tone-curve check (5+ angles).

    With ``--exposure auto`` the estimate becomes the bracket's exposure scale (``reweighted``
    is then True); otherwise it is compared with the metadata and a disagreement is warned.
    """
    from ..errors import InputError
    from ..estimate.consistency import estimate_exposure, evidently_wrong, sample_values, tone_check

    out = {"exposure_estimate": None, "exposure_estimate_sigma": None, "response_check": None, "reweighted": False}
    if bracket.n < 4:
        if settings.read.exposure == "auto":
            raise InputError(f"--exposure auto estimates each frame's exposure from a bracket of 4 or more angles; "
                             f"this one has {bracket.n}; give exposure_s in a --manifest instead")
        return out
    values, valid = sample_values(bracket)
    gain, sigma = estimate_exposure(values, valid, w)
    applied = np.asarray(bracket.exposure_scale, dtype=np.float64)
    if gain is not None:
        total = applied * gain
        out["exposure_estimate"] = np.round(total / total[0], 5).tolist()
        out["exposure_estimate_sigma"] = np.round(sigma * applied / applied[0], 5).tolist()
        off = np.abs(gain - 1) > np.maximum(0.03, 4 * sigma)
        if settings.read.exposure == "auto":
            if np.any(sigma > 0.02):
                raise InputError("--exposure auto: the bracket does not pin down each frame's exposure (the scene "
                                 "shows too few kinds of polarization); give exposure_s in a --manifest")
            bracket.exposure_scale = total / total[0]
            bracket.exposure_source = "bracket"
            out["reweighted"] = True
            values, valid = sample_values(bracket)
        elif off.any():
            names = ", ".join(f"{fr.path.name} x{g:.3f}" for fr, g, o in zip(bracket.frames, gain, off) if o)
            what = "the metadata" if bracket.exposure_source != "none" else "equal exposures"
            warnings.warn(f"the bracket itself says some frames were exposed differently from {what} ({names} "
                          "relative to the first); check the exposure settings, or give --exposure auto to use "
                          "the bracket's estimate", PolarskyWarning, stacklevel=3)
    elif settings.read.exposure == "auto":
        raise InputError("--exposure auto: the bracket does not pin down each frame's exposure (too few lit pixels, "
                         "or too few kinds of polarization in the scene); give exposure_s in a --manifest")
    check = tone_check(values, valid, w)
    out["response_check"] = check
    bad = evidently_wrong(check)
    if bad:
        where = "; ".join(f"levels {lo:g}..{hi:g}: {k:+.2f}" for lo, hi, k in bad)
        how = (f"the response curve {bracket.response.source}" if bracket.response is not None
               else "the assumed " + ("sRGB curve" if bracket.srgb else "linear response"))
        warnings.warn(f"the bracket's fit residual says {how} is evidently wrong (tone curvature {where}; 0 = "
                      "linear); DoLP is biased there: measure the camera's curve with 'polarsky calibrate response' "
                      "and give --response", PolarskyWarning, stacklevel=3)
    return out


def _open_mosaic(frames, settings, cal, noise, compiled) -> Opened:
    from ..estimate.sources import MosaicSource
    from ..errors import InputError
    from ..mosaic.layout import check_frame_shape, parse_mosaic
    from ..mosaic.methods import validate_method
    from ..read.mosaic_frames import read_mosaic_stack
    from ..write.summary import calibration_facts

    rd, mo = settings.read, settings.mosaic
    layout = parse_mosaic(mo.mosaic, mo.mosaic_color)
    method = validate_method(mo.demosaic)
    t0 = time.perf_counter()
    stack = read_mosaic_stack(list(frames), bit_depth=rd.bit_depth, black_level=rd.black_level, transfer=rd.transfer)
    check_frame_shape(stack.values.shape, layout, source=str(stack.info["files"][0]))
    hs, ws = stack.values.shape
    if stack.values.size > rd.max_pixels:
        raise InputError(f"mosaic frames are {ws}x{hs} = {stack.values.size} pixels, above --max-pixels {rd.max_pixels}; "
                         "raise --max-pixels")
    t_read = time.perf_counter() - t0
    info = stack.info
    k = method.scale
    source = MosaicSource(stack.values, stack.invalid, layout, method, cal, full_scale=info["white_level"],
                          srgb=info["transfer"] == "srgb", compiled=compiled)
    facts = {
        "source_kind": "polarization mosaic", "inputs": info["files"], "frames": info["n_frames"],
        "analyzer_angles_deg": list(layout.angles_deg), "angle_source": "mosaic cell",
        "width_px": int(ws // k), "height_px": int(hs // k), "sensor_width_px": int(ws), "sensor_height_px": int(hs),
        "output_pixel_size_px": int(k), "channels": layout.channels, "transfer": [info["transfer"]] * info["n_frames"],
        "polarizer": "sensor", "mosaic": layout.text, "mosaic_color": layout.colour, "demosaic": method.name,
        "demosaic_reference": method.reference, "bit_depth": info["bit_depth"], "black_level": info["black_level"],
        "exposure_source": "none", "condition_number": round(_cond(source.w[0]), 4), "extinction_ratio": None,
        "analysis_matrix": np.round(source.w, 8).tolist(), "calibration": calibration_facts(cal, per_pixel=source.per_pixel),
        "aligned": False, "saturated_px": info["saturated_px"], "black_px": info["black_px"],
    }
    return Opened(source=source, noise=noise, facts=facts, inputs=list(info["files"]), timing={"read": t_read})


def check_estimate(info: dict, settings, channels) -> None:
    """Refuse a result no light can give, warn about one that is partly so.

    ``info`` is what :func:`polarsky.estimate.runner.run_blocks` returned.  No valid pixel at
    all, or a DoLP above 1 (beyond its uncertainty) in more than :data:`IMPOSSIBLE_FRACTION`
    of a channel's valid pixels, raises :class:`InputError` naming the likely cause; a few
    such pixels were masked and are counted in a warning; a channel without valid pixels is
    warned about.

    Raises
    ------
    InputError
    """
    from ..errors import InputError

    valid = np.asarray(info["valid_px"])
    bad = np.asarray(info["impossible_px"])
    if not (valid + bad).any():
        align = " or outside the frames' common area after alignment" if settings.estimate.align else ""
        raise InputError(f"none of the {info['pixels']} pixels is valid: each is saturated (>= 98% of full scale) "
                         f"or at the black level in at least one frame{align}; expose the frames again so that the "
                         "scene is neither clipped nor black")
    counted = valid + bad
    worst = int(np.argmax(bad / np.maximum(counted, 1)))
    if bad[worst] > IMPOSSIBLE_FRACTION * counted[worst]:
        from .._shared.checks import dolp_above_one_cause

        est = settings.estimate
        cause = dolp_above_one_cause(est.extinction, est.calibration)
        where = "" if len(channels) == 1 else f" of channel {channels[worst]}"
        raise InputError(f"DoLP above 1, which no light has, in {bad[worst]} of {counted[worst]} valid pixels{where} "
                         f"(up to {_plain(info['largest_dolp'])}): the filter model does not fit these frames; {cause}")
    if bad.any():
        warnings.warn(f"{int(bad.sum())} pixel values had a DoLP above 1 beyond their uncertainty (up to "
                      f"{_plain(info['largest_dolp'])}) and were masked: no light is more than fully polarized "
                      "(motion, a hot pixel or a reflection that changed between frames?)", PolarskyWarning,
                      stacklevel=3)
    if len(channels) > 1:
        for name, n in zip(channels, valid):
            if n == 0:
                warnings.warn(f"channel {name} has no valid pixel (saturated or black in some frame everywhere)",
                              PolarskyWarning, stacklevel=3)


def _plain(x: float) -> str:
    """A DoLP for a message: three decimals, whole numbers when large (never an exponent)."""
    return f"{x:.3f}" if x < 100 else f"{x:.0f}"


def _cond(w) -> float:
    sv = np.linalg.svd(np.asarray(w, dtype=np.float64), compute_uv=False)
    return float(sv[0] / sv[-1])


class RunWarnings:
    """The warnings recorded so far in a run (see :func:`collect_warnings`)."""

    def __init__(self, caught):
        self._caught = caught

    def messages(self) -> list:
        """Texts of the :class:`PolarskyWarning` messages so far, once each, in order."""
        return list(dict.fromkeys(str(w.message) for w in self._caught if issubclass(w.category, PolarskyWarning)))


@contextlib.contextmanager
def collect_warnings(*, reemit: bool = True):
    """Record the run's warnings (yields a :class:`RunWarnings`) and, with ``reemit``, hand
    them on to the caller's warning handlers at the end, so the command line still prints them."""
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", PolarskyWarning)
        yield RunWarnings(caught)
    if reemit:
        for w in caught:
            warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)


def publish_result(out_dir, result: dict, json_name: str, *, command: str, draw=None) -> dict:
    """Write ``result`` as ``json_name`` into ``out_dir`` with the files ``draw(folder)`` makes
    (it returns their names), published whole; ``result["outputs"]`` lists them, JSON first."""
    from ..write.jsonio import write_json
    from ..write.stage import OutputStage

    with OutputStage(out_dir, command=command) as stage:
        result["outputs"] = [json_name] + (list(draw(stage.dir)) if draw is not None else [])
        write_json(stage.path(json_name), result)
        stage.publish()
    return result
