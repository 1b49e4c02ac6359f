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


def position_samples(intensities, aolp_model_deg, dolp_model, used, *, max_samples: int = 20_000, seed: int = 0):
    """Random sky pixels of one bracket for :func:`fit_position_offsets`.

    Returns a dict of ``intensities`` (4, C, n), ``psi`` (n, radians), ``p`` (C, n).
    """
    from .fit import subsample

    idx = subsample(used, max_samples, seed)
    n_pos, c = intensities.shape[:2]
    return {"intensities": intensities.reshape(n_pos, c, -1)[:, :, idx].astype(np.float64),
            "psi": np.deg2rad(aolp_model_deg.reshape(-1)[idx].astype(np.float64)),
            "p": dolp_model.reshape(c, -1)[:, idx].astype(np.float64)}


def fit_position_offsets(samples: list, angles_deg, *, rounds: int = 4) -> dict:
    """Angle offset of each micro-polarizer position (mosaic cameras) against the sky model.

    For position ``k`` at nominal angle ``theta_k``,
    ``I_k / S0 = 1/2 (1 + a_k p cos(2 (theta_k + delta_k) - 2 psi))`` with the model's AoLP
    ``psi`` and DoLP ``p``; ``delta_k`` and an amplitude ``a_k`` (diattenuation times any
    error of the model's DoLP scale) are fitted per position and channel with a soft-L1
    loss, alternating with ``S0`` (which depends on the position angles).  Phase and
    amplitude separate only where ``psi`` varies over the pixels: over a narrow field
    ``a_k`` and ``delta_k`` are tied, which the returned correlation shows.

    Parameters
    ----------
    samples : list of dict
        From :func:`position_samples` (one per bracket; they are fitted together).
    angles_deg : sequence of 4 float
        Nominal micro-polarizer angles.

    Returns
    -------
    dict
        ``offsets_deg``, ``sigma_deg``, ``amplitude``, ``correlation`` (between amplitude
        and offset), each (4, C).
    """
    from scipy.optimize import least_squares

    from ..stokes import analysis_matrix, solve_matrix

    inten = np.concatenate([s["intensities"] for s in samples], axis=2)
    psi = np.concatenate([s["psi"] for s in samples])
    p = np.concatenate([s["p"] for s in samples], axis=1)
    n_pos, c, _ = inten.shape
    theta = np.deg2rad(np.asarray(angles_deg, dtype=np.float64))
    off = np.zeros((n_pos, c))
    amp = np.ones((n_pos, c))
    sig = np.zeros((n_pos, c))
    corr = np.zeros((n_pos, c))
    for ch in range(c):
        for _ in range(rounds):
            row0 = solve_matrix(analysis_matrix(np.rad2deg(theta) + off[:, ch]))[0]
            s0 = np.tensordot(row0, inten[:, ch], axes=1)
            good = (s0 > 0) & np.isfinite(s0) & np.isfinite(p[ch]) & np.isfinite(psi)
            for k in range(n_pos):
                g = good & np.isfinite(inten[k, ch])
                y = inten[k, ch, g] / s0[g]
                pp, ps, th = p[ch, g], psi[g], theta[k]

                def resid(x, y=y, pp=pp, ps=ps, th=th):
                    return y - 0.5 * (1 + x[0] * pp * np.cos(2 * (th + np.deg2rad(x[1])) - 2 * ps))

                res = least_squares(resid, [amp[k, ch], off[k, ch]], loss="soft_l1", f_scale=0.01, method="trf",
                                    diff_step=1e-6)
                jtj = res.jac.T @ res.jac
                var = 2.0 * res.cost / max(y.size - 2, 1)
                cov = var * np.linalg.pinv(jtj)
                amp[k, ch], off[k, ch] = res.x
                sd = np.sqrt(np.clip(np.diag(cov), 0, None))
                sig[k, ch] = sd[1]
                corr[k, ch] = cov[0, 1] / (sd[0] * sd[1]) if sd[0] > 0 and sd[1] > 0 else 1.0
    off = (off + 90.0) % 180.0 - 90.0
    return {"offsets_deg": off, "sigma_deg": sig, "amplitude": amp, "correlation": corr}


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


def run_sky_calibration(brackets, out_path, *, poses=None, solve=(), reference_dolp_max=None, stokes=None,
                        sky_mask_path=None, model="rayleigh", neutral_point_deg: float = 20.0, sun_mask_deg: float = 10.0,
                        min_elevation_deg: float = 0.0, max_fit_samples: int = 20_000, seed: int = 0,
                        position_data=None, **options) -> dict:
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
        Pre-loaded Stokes products per bracket (mosaic frames, tests).
    position_data : list of dict, optional
        Mosaic cameras, per bracket: ``intensities`` (4, C, h, w) of the micro-polarizer
        positions (no calibration applied), ``angles_deg`` (their nominal angles) and
        ``mosaic``/``mosaic_colour`` (layout text).  Then an offset per position and channel is
        fitted (``angle_offset_deg`` of shape (4, C)).
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
        "sky_pixels": int(fit["samples"]),
    }
    if position_data is not None:
        attrs["mosaic"] = position_data[0].get("mosaic")
        attrs["mosaic_colour"] = position_data[0].get("mosaic_colour") or "none"
        attrs["positions_deg"] = [float(a) for a in position_data[0]["angles_deg"]]
        if diatt is not None:
            diatt = np.broadcast_to(diatt, offsets.shape).copy()
            diatt_sigma = np.broadcast_to(diatt_sigma, offsets.shape).copy()
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
        "sky_pixels": int(fit["samples"]),
        "notes": notes,
        "caution": SUN_CAUTION,
    }
