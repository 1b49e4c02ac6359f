"""Calibrating an analyzer against the clear sky (``polarsky calibrate sky``).

The observed AoLP of clear sky is compared with the single-scattering model at the known
sun position; the per-channel angle by which the observed pattern is turned is the
analyzer's angle offset (added to the nominal analyzer angles, the convention of
:mod:`polarsky.estimate.calibration`).  Several brackets (pointing in different directions) may be
fitted together; they share the offset, each has its own orientation.

Two ties are reported instead of being resolved silently:

* over a narrow field an angle offset and the camera roll turn every AoLP by nearly the
  same angle: with ``roll`` in ``solve`` the fit refuses unless the field (or the set of
  brackets) separates them; give the roll (``--roll-deg`` from a level) instead;
* the effective diattenuation ``D`` scales every DoLP exactly as the sky's own maximum
  DoLP does, so it is only estimated when the sky's true maximum is given
  (``reference_dolp_max``, e.g. from a reference polarimeter):
  ``D = dolp_max_fitted / reference``.

References
----------
.. [1] N. Hagen, Y. Otani, Opt. Eng. 58(8), 080501 (2019) (diattenuation in the analysis
   matrix).
.. [2] Young (1980); Chandrasekhar (1950) (the model, see :mod:`polarsky.sky.rayleigh`).
"""

from __future__ import annotations

import warnings
from pathlib import Path

import numpy as np

from ..conventions import SUN_CAUTION
from ..errors import InputError, PolarskyWarning
from ..estimate.calibration import Calibration, applied_analysis
from ..sky.features import feature_bands
from ..sky.fit import channel_mean, describe_mask, fit_dolp_max, sky_mask
from ..sky.models import get_model
from ..sky.orient import TIE_CORRELATION, fit_orientation, sample_bracket
from ..sky.position_fit import fit_position_offsets, position_samples
from ..sky.skymap import model_maps
from .sky import prepare_sky

__all__ = ["split_brackets", "fit_sky_calibration", "run_calibrate_sky"]


def _none_nan(x):
    if isinstance(x, list):
        return [_none_nan(v) for v in x]
    return None if (isinstance(x, float) and not np.isfinite(x)) else x


def split_brackets(frames, bracket_size: int | None) -> list[list[str]]:
    """Group FRAME... into brackets: ``bracket_size`` consecutive frames each, or one
    bracket per ``stokes.nc``; all frames form one bracket by default."""
    frames = [str(f) for f in frames]
    if not frames:
        raise InputError("give the frames of at least one sky bracket (or stokes.nc files)")
    if all(Path(f).suffix.lower() in (".nc", ".nc4", ".h5") for f in frames):
        if bracket_size not in (None, 1):
            raise InputError("--bracket-size does not apply to stokes.nc inputs (each file is one bracket)")
        return [[f] for f in frames]
    if bracket_size is None:
        return [frames]
    if bracket_size < 3:
        raise InputError(f"--bracket-size {bracket_size} is too small; a bracket needs at least 3 frames")
    if len(frames) % bracket_size:
        raise InputError(f"{len(frames)} frames do not split into brackets of {bracket_size}; "
                         "give a multiple of --bracket-size frames, in bracket order")
    return [frames[i:i + bracket_size] for i in range(0, len(frames), bracket_size)]


def fit_sky_calibration(brackets, settings, *, stokes=None, position_data=None, max_fit_samples: int = 20_000,
                        seed: int = 0):
    """Fit the analyzer angle offset per channel from clear-sky brackets.

    Parameters
    ----------
    brackets : list of list of path
        Frames of each bracket (see :func:`split_brackets`).
    settings : Settings
        Time, place, lens, orientation (``calibrate.pose`` per bracket), sky comparison and
        bracket settings; ``calibrate.reference_dolp_max`` enables the diattenuation estimate.
    stokes : list of dict, optional
        Products per bracket already in memory (mosaic frames).
    position_data : list of dict, optional
        Mosaic cameras, per bracket: ``intensities`` (4, C, h, w) of the micro-polarizer
        positions (no calibration applied), ``angles_deg``, ``mosaic``, ``mosaic_color``:
        an offset per position and channel is fitted.

    Returns
    -------
    cal : Calibration
    result : dict
        ``calibration.json``: ``angle_offset_deg`` and ``angle_offset_sigma_deg`` per channel
        (or per position and channel), poses, correlations, notes.

    Raises
    ------
    InputError
        The offset cannot be separated from the orientation with this data, or bad input.
    """
    sk, cs = settings.sky, settings.calibrate
    solve, poses, reference_dolp_max = sk.solve, cs.pose or None, cs.reference_dolp_max
    min_elevation_deg = sk.min_elevation_deg
    n_b = len(brackets) if stokes is None else len(stokes)
    if poses is not None and len(poses) != n_b:
        raise InputError(f"{len(poses)} --pose values for {n_b} bracket(s); give one --pose YAW,PITCH,ROLL per bracket")
    sky_model = get_model(sk.model, **({"neutral_point_deg": sk.neutral_point_deg} if sk.model == "neutral-points" else {}))
    bands = feature_bands(sun_radius_deg=sk.sun_mask_deg)
    samples, infos, fitted_data = [], [], []
    channels = None
    prior_offsets, prior_diatt = [], []
    for i in range(n_b):
        st = settings
        if poses is not None:
            st = settings.replace({"yaw_deg": poses[i][0], "pitch_deg": poses[i][1], "roll_deg": poses[i][2]})
        frames = brackets[i] if brackets is not None else []
        products, geom, info = prepare_sky(frames, st, stokes=None if stokes is None else stokes[i])
        if channels is None:
            channels = products["channels"]
        elif products["channels"] != channels:
            raise InputError(f"bracket {i + 1} has channels {','.join(products['channels'])} but bracket 1 has "
                             f"{','.join(channels)}; calibrate one camera set-up at a time")
        dolp, aolp = products["dolp"], products["aolp"]
        c, h, w = dolp.shape
        po, pd = applied_analysis(products.get("attrs", {}), c)
        prior_offsets.append(po)
        prior_diatt.append(pd)
        valid = np.all(products["valid"], axis=0)
        s0 = channel_mean(products["S"][0])
        dmean = channel_mean(dolp)
        user = None if sk.sky_mask is None else sk.sky_mask.as_mask((h, w))
        if solve:
            usable = valid & np.isfinite(dmean) & (dmean <= 1) & (s0 >= 0.25 * float(np.nanmedian(s0[valid])))
            if user is not None:
                usable &= user
            b0 = sample_bracket(geom, aolp, dolp, usable, max_samples=max_fit_samples, seed=seed + i)
            pose = fit_orientation([b0], sky_model, solve=solve, search=True, warn=False)["poses"][0]
            geom = geom.with_orientation(pose["yaw_deg"], pose["pitch_deg"], pose["roll_deg"])
        m = model_maps(geom, sky_model, 1.0, want=("dolp", "scattering_angle", "elevation", "inside", "up"))
        reason = sky_mask(inside=m["inside"], up=m["up"], valid=valid, s0=s0, dolp=dmean,
                          scattering_angle_deg=m["scattering_angle"], elevation_deg=m["elevation"], bands=bands,
                          user_mask=user, min_elevation_deg=min_elevation_deg)
        used = reason == 0
        if np.count_nonzero(used) < 50:
            n_used = int(np.count_nonzero(used))
            raise InputError(f"bracket {i + 1} ({', '.join(map(str, frames)) or 'given data'}) has "
                             f"{f'only {n_used}' if n_used else 'no'} clear-sky pixels of the 50 a fit needs "
                             f"({describe_mask(reason)}); check its orientation and --sky-mask")
        samples.append(sample_bracket(geom, aolp, dolp, used, max_samples=max_fit_samples, seed=seed + 100 + i))
        infos.append(info)
        fitted_data.append((dolp, m["dolp"], used, products["S"][0], geom))
    fit = fit_orientation(samples, sky_model, solve=solve, fit_offset=True, search=False, warn=False)
    off_names = {f"offset[{k}]" for k in range(len(channels))}
    offset_ties = [t for t in fit["ties"] if (t["a"] in off_names) != (t["b"] in off_names)]
    if fit["degenerate"] or offset_ties:
        worst = max((abs(t["correlation"]) for t in offset_ties), default=1.0)
        raise InputError(
            f"the analyzer angle offset cannot be told apart from the camera orientation with this data "
            f"(correlation {worst:.3f} > {TIE_CORRELATION}); over a narrow field an offset and the camera roll "
            "turn every AoLP alike: give the roll from a level (--roll-deg, or --pose per bracket) and leave "
            "roll out of --solve, or use a wider field of view; no calibration file was written")
    for msg in fit["messages"]:
        warnings.warn(msg, PolarskyWarning, stacklevel=2)
    # the estimate may already have used an offset (--angle-offset, a calibration): the file
    # holds the total offset relative to the nominal analyzer angles
    prior = np.asarray(prior_offsets[0], dtype=np.float64)
    if any(not np.allclose(p, prior) for p in prior_offsets[1:]):
        raise InputError("the brackets were estimated with different analyzer angle offsets; estimate them "
                         "alike (same --angle-offset / --calibration) before calibrating together")
    offsets = np.array(fit["offsets_deg"], dtype=np.float64) + prior
    offsets_sigma = np.array([np.nan if s is None else s for s in fit["offsets_sigma_deg"]], dtype=np.float64)
    # the DoLP scale per channel, over all brackets' sky pixels
    dmax, dmax_sigma = [], []
    for k in range(len(channels)):
        obs = np.concatenate([fd[0][k][fd[2]] for fd in fitted_data])
        shp = np.concatenate([fd[1][fd[2]] for fd in fitted_data])
        f = fit_dolp_max(obs, shp, seed=seed)
        dmax.append(f["dolp_max"])
        dmax_sigma.append(f["dolp_max_sigma"])
    dmax, dmax_sigma = np.array(dmax), np.array(dmax_sigma)
    notes = list(fit["messages"])
    if position_data is not None:
        # per micro-polarizer position: refit each position's angle at the fitted poses
        psamples = []
        for i, (pdat, fd) in enumerate(zip(position_data, fitted_data)):
            pose = fit["poses"][i]
            g = fd[4].with_orientation(pose["yaw_deg"], pose["pitch_deg"], pose["roll_deg"])
            mm = model_maps(g, sky_model, 1.0, want=("dolp", "aolp"))
            inten = np.asarray(pdat["intensities"], dtype=np.float32)
            if inten.shape[-2:] != fd[2].shape:
                raise InputError(f"bracket {i + 1}: position intensities are {inten.shape[-1]}x{inten.shape[-2]} but the "
                                 f"Stokes maps are {fd[2].shape[1]}x{fd[2].shape[0]}; decode both the same way")
            dm = np.stack([mm["dolp"] * np.float32(x if np.isfinite(x) else 0.0) for x in dmax])
            psamples.append(position_samples(inten, mm["aolp"], dm, fd[2], max_samples=max_fit_samples, seed=seed + i))
        pf = fit_position_offsets(psamples, position_data[0]["angles_deg"])
        worst = float(np.max(np.abs(pf["correlation"])))
        if worst > TIE_CORRELATION:
            raise InputError(
                f"the micro-polarizer positions' angle offsets cannot be told apart from their gains with this data "
                f"(correlation {worst:.3f} > {TIE_CORRELATION}): the sky's AoLP varies too little over the frame; use a "
                "wide-angle lens or several brackets pointing in different directions, or calibrate the positions on "
                "a bench ('polarsky calibrate flat') and fit only the common offset (drop --per-position); "
                "no calibration file was written")
        offsets, offsets_sigma = pf["offsets_deg"], pf["sigma_deg"]
        notes.append("offsets fitted per micro-polarizer position (rows: positions in the cell's row-major order "
                     f"{list(position_data[0]['angles_deg'])})")
    diatt = diatt_sigma = None
    if reference_dolp_max is not None:
        ref = float(reference_dolp_max)
        d_prev = np.asarray(prior_diatt[0], dtype=np.float64)
        diatt = np.clip(d_prev * dmax / ref, 0.0, 1.0)
        diatt_sigma = d_prev * dmax_sigma / ref
        if np.any(dmax / ref > 1.0 + 3 * diatt_sigma):
            warnings.warn(f"the fitted dolp_max ({', '.join(f'{x:.3f}' for x in dmax)}) exceeds "
                          f"--reference-dolp-max {ref:g}; the diattenuation was clipped at 1", PolarskyWarning,
                          stacklevel=2)
    else:
        notes.append("effective diattenuation not estimated: it scales the DoLP exactly as the sky's own maximum "
                     "does; give --reference-dolp-max (the sky's true maximum DoLP) to estimate it")
    poses_out = fit["poses"]
    attrs = {
        "channels": list(channels),
        "method_detail": "clear-sky single-scattering AoLP fit (DoLP-weighted doubled-angle residuals, soft-L1 loss)",
        "brackets": [[str(f) for f in b] for b in (brackets or [[] for _ in range(n_b)])],
        "poses": poses_out,
        "solved_angles": list(solve),
        "sun": [{"azimuth_deg": inf["sun"]["azimuth_deg"], "elevation_deg": inf["sun"]["elevation_deg"],
                 "when": inf["when"]} for inf in infos],
        "polarizer": samples[0].geom.placement,
        "dolp_max_fitted": dmax.tolist(),
        "offset_already_applied_deg": prior.tolist(),
        "sky_pixels": int(sum(np.count_nonzero(fd[2]) for fd in fitted_data)),
        "fit_samples": int(fit["fit_samples"]),
    }
    if position_data is not None:
        attrs["mosaic"] = position_data[0].get("mosaic")
        attrs["mosaic_color"] = position_data[0].get("mosaic_color")
        attrs["positions_deg"] = [float(a) for a in position_data[0]["angles_deg"]]
        if diatt is not None:
            diatt = np.broadcast_to(diatt, offsets.shape).copy()
            diatt_sigma = np.broadcast_to(diatt_sigma, offsets.shape).copy()
    unc = {"angle_offset_deg": offsets_sigma}
    if diatt is not None:
        unc["diattenuation"] = diatt_sigma
        attrs["reference_dolp_max"] = float(reference_dolp_max)
    cal = Calibration(kind="sky", angle_offset_deg=offsets, diattenuation=diatt, uncertainty=unc, attrs=attrs)
    return cal, {
        "kind": "sky",
        "channels": list(channels),
        "angle_offset_deg": offsets.tolist(),
        "angle_offset_sigma_deg": _none_nan(offsets_sigma.tolist()),
        "diattenuation": None if diatt is None else diatt.tolist(),
        "diattenuation_sigma": None if diatt_sigma is None else diatt_sigma.tolist(),
        "dolp_max": dmax.tolist(),
        "dolp_max_sigma": dmax_sigma.tolist(),
        "offset_already_applied_deg": prior.tolist(),
        "per_position": position_data is not None,
        "brackets": n_b,
        "poses": poses_out,
        "parameters": fit["parameters"],
        "correlation": fit["correlation"],
        "polarizer": samples[0].geom.placement,
        "sky_pixels": attrs["sky_pixels"],
        "fit_samples": attrs["fit_samples"],
        "notes": notes,
        "caution": SUN_CAUTION,
    }


def _position_intensities(frames, settings) -> dict:
    """Per-position intensities (4, C, h, w) of mosaic frames, decoded bilinearly without calibration."""
    from ..mosaic.decode import decode_mosaic
    from ..mosaic.layout import parse_mosaic
    from ..read.mosaic_frames import read_mosaic_stack

    rd, mo = settings.read, settings.mosaic
    layout = parse_mosaic(mo.mosaic, mo.mosaic_color)
    stack = read_mosaic_stack(frames, bit_depth=rd.bit_depth, black_level=rd.black_level, transfer=rd.transfer)
    dec = decode_mosaic(stack.values, stack.invalid, layout, method=mo.demosaic)
    return {"intensities": dec["intensities"], "angles_deg": list(layout.angles_deg), "mosaic": layout.text,
            "mosaic_color": layout.colour}


def run_calibrate_sky(frames, out_dir, settings=None, **options) -> dict:
    """``polarsky calibrate sky``: write ``calibration.nc`` and ``calibration.json`` into ``out_dir``.

    FRAME... form one bracket, or brackets of ``calibrate.bracket_size`` consecutive frames,
    or one ``stokes.nc`` each; with ``mosaic`` set, each frame (or group of
    ``bracket_size`` frames, averaged) is one measurement.
    """
    from ..write.calibration_file import publish_calibration
    from ..write.stage import check_out_dir
    from ._common import collect_warnings, resolve_settings
    from .sky import stokes_products

    settings = resolve_settings(settings, options)
    frames = [str(f) for f in frames]
    if not frames:
        raise InputError("give the frames of at least one clear-sky bracket (or stokes.nc files)")
    check_out_dir(out_dir, inputs=frames)
    cs = settings.calibrate
    stokes = position_data = None
    if cs.per_position and settings.mosaic.mosaic is None:
        raise InputError("--per-position applies to polarization-mosaic frames; add --mosaic CELL or drop it")
    if cs.per_position and settings.estimate.calibration is not None:
        raise InputError("--per-position fits the positions from the raw frames; drop --calibration")
    with collect_warnings() as caught:
        if settings.mosaic.mosaic is not None:
            size = cs.bracket_size or 1
            if len(frames) % size:
                raise InputError(f"{len(frames)} mosaic frames do not split into groups of {size}; give a multiple of "
                                 "--bracket-size frames")
            brackets = [frames[i:i + size] for i in range(0, len(frames), size)]
            stokes = [stokes_products(b, settings) for b in brackets]
            if cs.per_position:
                position_data = [_position_intensities(b, settings) for b in brackets]
        else:
            brackets = split_brackets(frames, cs.bracket_size)
        cal, result = fit_sky_calibration(brackets, settings, stokes=stokes, position_data=position_data)
        publish_calibration(out_dir, cal, result, command="calibrate sky", inputs=frames,
                            method="sky: analyzer angle offset from the clear-sky AoLP pattern (single Rayleigh "
                                   "scattering)", warnings=caught.messages())
    return result
