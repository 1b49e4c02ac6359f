"""Calibrating an analyzer against the clear sky (``polarsky calibrate sky``).

The observed AoLP of clear sky is compared with the single-scattering model at the known
sun position; the per-channel angle by which the observed pattern is turned is the
analyzer's angle offset (added to the nominal analyzer angles, the convention of
:mod:`polarsky.calibration`).  Several brackets (pointing in different directions) may be
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

from ..calibration import Calibration, write_calibration
from ..errors import InputError, PolarskyWarning
from .features import feature_bands
from .fit import fit_dolp_max, sky_mask
from .models import get_model
from .orient import TIE_CORRELATION, fit_orientation, parse_solve, sample_bracket
from .run import SUN_CAUTION, _user_mask, prepare_sky
from .skymap import model_maps

__all__ = ["split_brackets", "run_sky_calibration"]


def _applied_analysis(attrs: dict, n_channels: int):
    """Analyzer offset and diattenuation per channel that the Stokes estimate already used."""
    import json

    info = attrs.get("analysis")
    if isinstance(info, str):
        try:
            info = json.loads(info)
        except ValueError:
            info = None
    off = np.zeros(n_channels)
    dia = np.ones(n_channels)
    if isinstance(info, dict):
        for key, arr in (("angle_offset_deg", off), ("diattenuation", dia)):
            vals = info.get(key)
            if vals is not None:
                v = np.asarray(vals, dtype=np.float64).ravel()
                if v.size in (1, n_channels):
                    arr[:] = v
    return off, dia


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


def run_sky_calibration(brackets, out_path, *, poses=None, solve=(), reference_dolp_max=None, stokes=None,
                        sky_mask_path=None, model="rayleigh", neutral_point_deg: float = 20.0, sun_mask_deg: float = 10.0,
                        min_elevation_deg: float = 0.0, max_fit_samples: int = 20_000, seed: int = 0,
                        **options) -> dict:
    """Fit the analyzer angle offset per channel from clear-sky brackets; write ``out_path``.

    Parameters
    ----------
    brackets : list of list of path
        Frames of each bracket (see :func:`split_brackets`).
    out_path : path
        Calibration file to write (NetCDF-4, ``kind="sky"``).
    poses : list of (yaw, pitch, roll), optional
        Orientation of each bracket (degrees); default the ``yaw_deg``/``pitch_deg``/
        ``roll_deg`` options for every bracket.  With ``solve`` they are starting values.
    solve : str or tuple
        Orientation angles to fit per bracket, any subset of yaw, pitch, roll.
    reference_dolp_max : float, optional
        The sky's true maximum DoLP; when given, the effective diattenuation is estimated.
    stokes : list of dict, optional
        Pre-loaded Stokes products per bracket (tests).
    **options
        Time/place, lens, polarizer and bracket options as for :func:`polarsky.sky.run.run_sky`.

    Returns
    -------
    dict
        Summary: ``angle_offset_deg`` and ``angle_offset_sigma_deg`` per channel, poses,
        correlations, notes, the file written.

    Raises
    ------
    InputError
        The offset cannot be separated from the orientation with this data (no file is
        written), or bad input.
    """
    solve = parse_solve(",".join(solve) if isinstance(solve, (list, tuple)) else solve)
    n_b = len(brackets) if stokes is None else len(stokes)
    if poses is not None and len(poses) not in (n_b,):
        raise InputError(f"{len(poses)} --pose values for {n_b} bracket(s); give one --pose YAW,PITCH,ROLL per bracket")
    if reference_dolp_max is not None and not (0 < float(reference_dolp_max) <= 1):
        raise InputError(f"--reference-dolp-max {reference_dolp_max} must lie in (0, 1]")
    sky_model = get_model(model, **({"neutral_point_deg": neutral_point_deg} if model == "neutral-points" else {}))
    bands = feature_bands(sun_radius_deg=sun_mask_deg)
    samples, infos, fitted_data = [], [], []
    channels = None
    prior_offsets, prior_diatt = [], []
    for i in range(n_b):
        opts = dict(options)
        if poses is not None:
            opts["yaw_deg"], opts["pitch_deg"], opts["roll_deg"] = poses[i]
        frames = brackets[i] if brackets is not None else []
        products, geom, info = prepare_sky(frames, stokes=None if stokes is None else stokes[i], **opts)
        if channels is None:
            channels = products["channels"]
        elif products["channels"] != channels:
            raise InputError(f"bracket {i + 1} has channels {','.join(products['channels'])} but bracket 1 has "
                             f"{','.join(channels)}; calibrate one camera set-up at a time")
        dolp, aolp = products["dolp"], products["aolp"]
        c, h, w = dolp.shape
        po, pd = _applied_analysis(products.get("attrs", {}), c)
        prior_offsets.append(po)
        prior_diatt.append(pd)
        valid = np.all(products["valid"], axis=0)
        s0 = np.nanmean(products["S"][0], axis=0)
        dmean = np.nanmean(dolp, axis=0)
        user = _user_mask(sky_mask_path, (h, w)) if sky_mask_path else None
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
            raise InputError(f"bracket {i + 1} ({', '.join(map(str, frames)) or 'given data'}) has only "
                             f"{np.count_nonzero(used)} clear-sky pixels; check its orientation and --sky-mask")
        samples.append(sample_bracket(geom, aolp, dolp, used, max_samples=max_fit_samples, seed=seed + 100 + i))
        infos.append(info)
        fitted_data.append((dolp, m["dolp"], used))
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
        obs = np.concatenate([d[k][u] for d, _, u in fitted_data])
        shp = np.concatenate([sh[u] for _, sh, u in fitted_data])
        f = fit_dolp_max(obs, shp, seed=seed)
        dmax.append(f["dolp_max"])
        dmax_sigma.append(f["dolp_max_sigma"])
    dmax, dmax_sigma = np.array(dmax), np.array(dmax_sigma)
    notes = list(fit["messages"])
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
        "sky_pixels": int(fit["samples"]),
    }
    unc = {"angle_offset_deg": offsets_sigma}
    if diatt is not None:
        unc["diattenuation"] = diatt_sigma
        attrs["reference_dolp_max"] = float(reference_dolp_max)
    cal = Calibration(kind="sky", angle_offset_deg=offsets, diattenuation=diatt, uncertainty=unc, attrs=attrs)
    inputs = [f for b in (brackets or []) for f in b]
    out_path = Path(out_path)
    write_calibration(out_path, cal, inputs=inputs,
                      method="sky: analyzer angle offset from the clear-sky AoLP pattern (single Rayleigh scattering)")
    return {
        "calibration": str(out_path),
        "kind": "sky",
        "channels": list(channels),
        "angle_offset_deg": offsets.tolist(),
        "angle_offset_sigma_deg": [None if not np.isfinite(x) else float(x) for x in offsets_sigma],
        "diattenuation": None if diatt is None else diatt.tolist(),
        "diattenuation_sigma": None if diatt_sigma is None else diatt_sigma.tolist(),
        "dolp_max": dmax.tolist(),
        "dolp_max_sigma": dmax_sigma.tolist(),
        "offset_already_applied_deg": prior.tolist(),
        "brackets": n_b,
        "poses": poses_out,
        "parameters": fit["parameters"],
        "correlation": fit["correlation"],
        "polarizer": samples[0].geom.placement,
        "sky_pixels": int(fit["samples"]),
        "notes": notes,
        "caution": SUN_CAUTION,
    }
