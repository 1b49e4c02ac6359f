"""Camera orientation (and analyzer angle offsets) from the observed AoLP pattern.

With the sun position known, the single-scattering AoLP pattern fixes the camera's
orientation.  The fit minimizes, over a random subsample of sky pixels, the DoLP-weighted
difference of the doubled angles,

.. math:: r = \\sqrt{p_{obs}}\\,[\\cos 2(\\psi_{obs} + c) - \\cos 2\\psi_{mod},\\;
          \\sin 2(\\psi_{obs} + c) - \\sin 2\\psi_{mod}]

(smooth across the 0/180 wrap) with a soft-L1 robust loss, where ``c`` is an optional
per-channel analyzer angle offset (calibration).  Uncertainties and correlations come from
the Gauss-Newton covariance.

Two ties are inherent in the physics and are reported, not hidden:

* the single-scattering pattern is symmetric about the sun direction, so turning the
  camera about the sun-observer line changes nothing: yaw, pitch and roll cannot all three
  be fixed from the sky's polarization alone;
* over a narrow field an analyzer angle offset and the camera roll both turn every AoLP
  by nearly the same angle.

References
----------
.. [1] G. Horvath, A. Barta, J. Gal, B. Suhai, O. Haiman, "Ground-based full-sky
   imaging polarimetry of rapidly changing skies and its use for polarimetric cloud
   detection", Appl. Opt. 41(3), 543-559 (2002), doi:10.1364/AO.41.000543 (sky AoLP maps
   from a camera with a rotating analyzer).
.. [2] Triggs et al. (2000) (Gauss-Newton covariance); Huber & Ronchetti (2009) (robust loss).
"""

from __future__ import annotations

import itertools
import warnings
from dataclasses import dataclass

import numpy as np

from ..errors import InputError, PolarskyWarning
from .fit import subsample
from .skymap import SkyGeometry, model_at_rays

__all__ = ["ANGLES", "BracketSamples", "sample_bracket", "fit_orientation", "parse_solve"]

ANGLES = ("yaw", "pitch", "roll")
#: Correlation above which two parameters are reported as not separable.
TIE_CORRELATION = 0.95
#: Standard uncertainty (deg) above which an angle is reported as poorly determined.
LOOSE_SIGMA_DEG = 2.0


def parse_solve(text) -> tuple[str, ...]:
    """``"yaw,roll"`` -> ``("yaw", "roll")``; InputError for unknown names."""
    if text is None or text == "":
        return ()
    names = tuple(dict.fromkeys(p.strip().lower() for p in str(text).split(",") if p.strip()))
    bad = [n for n in names if n not in ANGLES]
    if bad:
        raise InputError(f"--solve {text!r}: {', '.join(bad)} not known; give any of yaw,pitch,roll separated by commas")
    return tuple(n for n in ANGLES if n in names)


@dataclass
class BracketSamples:
    """Sky pixels of one bracket prepared for the orientation fit."""

    geom: SkyGeometry
    rays: tuple  # three (n,) float64 arrays, camera frame
    aolp_rad: np.ndarray  # (C, n)
    weight: np.ndarray  # (C, n) observed DoLP in [0, 1]
    index: np.ndarray  # flat pixel indices


def sample_bracket(geom: SkyGeometry, aolp_deg, dolp, usable, *, max_samples: int = 20_000, seed: int = 0):
    """Draw up to ``max_samples`` usable pixels of a bracket (arrays (C, h, w))."""
    aolp_deg = np.asarray(aolp_deg)
    dolp = np.asarray(dolp)
    c = aolp_deg.shape[0]
    idx = subsample(usable, max_samples, seed)
    h, w = usable.shape
    v, u = np.divmod(idx, w)
    rays, inside = geom.lens.rays_at(u.astype(np.float64), v.astype(np.float64))
    inside = np.broadcast_to(inside, idx.shape)
    rays = tuple(np.broadcast_to(r, idx.shape).astype(np.float64) for r in rays)
    a = np.deg2rad(aolp_deg.reshape(c, -1)[:, idx].astype(np.float64))
    wt = np.clip(dolp.reshape(c, -1)[:, idx].astype(np.float64), 0.0, 1.0)
    bad = ~np.isfinite(a) | ~np.isfinite(wt) | ~inside[None, :]
    a[bad] = 0.0
    wt[bad] = 0.0
    return BracketSamples(geom, rays, a, wt, idx)


def _model_doubled(model, geom, yaw, pitch, roll, rays):
    g = geom.with_orientation(yaw, pitch, roll)
    q = model_at_rays(model, g.sun_cam, g.up_cam, rays, geom.placement, want=("doubled",))
    c2, s2 = q["cos2"], q["sin2"]
    ok = np.isfinite(c2) & np.isfinite(s2)
    return np.where(ok, c2, 0.0), np.where(ok, s2, 0.0), ok


def _unpack(p, brackets, solve, n_offsets):
    poses = []
    k = 0
    for b in brackets:
        pose = {"yaw": b.geom.yaw_deg, "pitch": b.geom.pitch_deg, "roll": b.geom.roll_deg}
        for name in solve:
            pose[name] = p[k]
            k += 1
        poses.append(pose)
    offsets = np.asarray(p[k:k + n_offsets]) if n_offsets else None
    return poses, offsets


def _residuals(p, model, brackets, solve, n_offsets):
    poses, offsets = _unpack(p, brackets, solve, n_offsets)
    out = []
    for b, pose in zip(brackets, poses):
        c2m, s2m, ok = _model_doubled(model, b.geom, pose["yaw"], pose["pitch"], pose["roll"], b.rays)
        a = b.aolp_rad
        if offsets is not None:
            a = a + np.deg2rad(offsets)[:, None]
        sw = np.sqrt(b.weight * ok[None, :])
        out.append((sw * (np.cos(2 * a) - c2m[None, :])).ravel())
        out.append((sw * (np.sin(2 * a) - s2m[None, :])).ravel())
    return np.concatenate(out)


def _angle_dist(a, b) -> float:
    d = (np.asarray(a, dtype=float) - np.asarray(b, dtype=float) + 180.0) % 360.0 - 180.0
    return float(np.sqrt(np.sum(d * d)))


def _robust_cost(r, scale=0.1) -> float:
    return float(np.sum(np.sqrt(1 + (r / scale) ** 2) - 1))


def _small(b: BracketSamples, n_small: int, seed: int = 1) -> BracketSamples:
    n = b.aolp_rad.shape[1]
    if n <= n_small:
        return b
    sel = np.sort(np.random.default_rng(seed).choice(n, n_small, replace=False))
    return BracketSamples(b.geom, tuple(r[sel] for r in b.rays), b.aolp_rad[:, sel], b.weight[:, sel], b.index[sel])


def _candidates(model, b: BracketSamples, solve, *, n_small: int = 800, keep: int = 6):
    """Coarse grid over the solved angles, then local fits from the best distinct cells.

    Returns a list of ``(pose_vector, cost)`` of distinct local minima on a small
    subsample, best first.
    """
    from scipy.optimize import least_squares

    small = _small(b, n_small)
    grids = {"yaw": np.arange(0.0, 360.0, 10.0), "pitch": np.arange(-80.0, 90.1, 10.0),
             "roll": np.arange(-180.0, 180.0, 15.0)}
    if len(solve) == 3:  # keep the three-angle grid affordable
        grids = {"yaw": np.arange(0.0, 360.0, 20.0), "pitch": np.arange(-80.0, 90.1, 20.0),
                 "roll": np.arange(-180.0, 180.0, 30.0)}
    start = np.array([getattr(b.geom, f"{n}_deg") for n in solve], dtype=float)
    cells = [start] + [np.array(c, dtype=float) for c in itertools.product(*(grids[n] for n in solve))]
    costs = np.array([_robust_cost(_residuals(c, model, [small], solve, 0)) for c in cells])
    order = np.argsort(costs)
    seeds: list = []
    for i in order:
        if all(_angle_dist(cells[i], s_) > 25.0 for s_ in seeds):
            seeds.append(cells[i])
        if len(seeds) >= keep:
            break
    if not any(_angle_dist(start, s_) < 1e-9 for s_ in seeds):
        seeds.append(start)
    found: list = []
    for s_ in seeds:
        lo, hi = _bounds(solve, 1)
        res = least_squares(_residuals, np.clip(s_, lo, hi), args=(model, [small], solve, 0), loss="soft_l1",
                            f_scale=0.1, method="trf", diff_step=1e-6, max_nfev=60, bounds=(lo, hi))
        x = _wrap_pose(res.x, solve)
        cost = _robust_cost(res.fun)
        if _above_horizon_fraction(small, solve, x) < 0.5:
            continue  # the frame's sky would lie mostly below the horizon: not a candidate
        if all(_angle_dist(x, f[0]) > 1.0 for f in found):
            found.append((x, cost))
    if not found:  # keep the start so the caller always has a pose
        found.append((_wrap_pose(start, solve), float("inf")))
    found.sort(key=lambda f: f[1])
    return found


def _above_horizon_fraction(b: BracketSamples, solve, x) -> float:
    pose = {"yaw": b.geom.yaw_deg, "pitch": b.geom.pitch_deg, "roll": b.geom.roll_deg}
    pose.update(zip(solve, x))
    up = b.geom.with_orientation(pose["yaw"], pose["pitch"], pose["roll"]).up_cam
    dot = up[0] * b.rays[0] + up[1] * b.rays[1] + up[2] * b.rays[2]
    w = b.weight.sum(axis=0)
    return float(np.sum(w * (dot > 0)) / max(np.sum(w), 1e-300))


def _bounds(solve, n_brackets, n_off=0):
    lo, hi = [], []
    for _ in range(n_brackets):
        for n in solve:
            lo.append(-90.0 if n == "pitch" else -np.inf)
            hi.append(90.0 if n == "pitch" else np.inf)
    return np.array(lo + [-np.inf] * n_off), np.array(hi + [np.inf] * n_off)


def _wrap_pose(x, solve):
    x = np.array(x, dtype=float)
    for i, n in enumerate(solve):
        x[i] = x[i] % 360.0 if n == "yaw" else (x[i] + 180.0) % 360.0 - 180.0
    return x


def fit_orientation(brackets: list, model, *, solve=("yaw", "pitch", "roll"), fit_offset: bool = False,
                    search: bool = True, warn: bool = True) -> dict:
    """Fit the solved orientation angles of each bracket and, optionally, per-channel offsets.

    Parameters
    ----------
    brackets : list of BracketSamples
        One per bracket (a single one for ``polarsky sky --solve``); their geometries hold
        the starting (and the fixed) angles.
    model : sky model
    solve : tuple of str
        Angles to fit (any subset of yaw, pitch, roll), per bracket.
    fit_offset : bool
        Also fit an analyzer angle offset per channel, shared by all brackets (added to
        the nominal analyzer angles, i.e. ``AoLP_true = AoLP_observed + offset``).
    search : bool
        Start from a coarse grid search of the solved angles (per bracket).

    Returns
    -------
    dict
        ``poses`` (list of dicts yaw_deg/pitch_deg/roll_deg and *_sigma_deg),
        ``offsets_deg``/``offsets_sigma_deg`` (or None), ``parameters`` (names),
        ``correlation`` (matrix as nested lists), ``ties`` (pairs with |corr| > 0.95),
        ``degenerate`` (bool), ``samples``, ``rms_doubled`` and ``messages``.
    """
    from scipy.optimize import least_squares

    n_ch = brackets[0].aolp_rad.shape[0]
    n_off = n_ch if fit_offset else 0
    names = [f"{n}[{i}]" if len(brackets) > 1 else n for i, _ in enumerate(brackets) for n in solve]
    names += [f"offset[{c}]" for c in range(n_off)]
    samples = int(sum(int(np.count_nonzero(b.weight > 0)) for b in brackets))
    if not names:
        raise InputError("nothing to fit: give --solve yaw,pitch,roll (any subset)")
    if samples < 50:
        raise InputError(f"only {samples} usable sky pixels for the orientation fit; "
                         "give a frame with more clear sky, or check --sky-mask")
    p0 = []
    alternatives = []
    messages = []
    for b in brackets:
        start = [getattr(b.geom, f"{n}_deg") for n in solve]
        if not (search and solve):
            p0.extend(start)
            continue
        found = _candidates(model, b, solve)
        best_cost = found[0][1]
        # minima that fit as well as the best (the pattern's symmetry makes twins)
        equal = [f for f in found if f[1] <= 1.2 * best_cost + 1.0]
        equal.sort(key=lambda f: _angle_dist(f[0], start))
        chosen = equal[0][0]
        p0.extend(chosen)
        twins = [dict(zip([f"{n}_deg" for n in solve], map(float, f[0]))) for f in equal[1:]]
        alternatives.append(twins)
        if twins and len(solve) < 3:
            alt = "; ".join(", ".join(f"{k[:-4]} {v:.1f}" for k, v in t.items()) for t in twins)
            messages.append("the sky pattern fits equally well at another orientation (" + alt + "); the one "
                            "nearest the given starting angles was kept - give the angles you know roughly "
                            "(--yaw-deg ...) to pick the right one")
    if fit_offset:
        # start from the weighted circular mean of model - observed, at the start poses
        poses, _ = _unpack(np.array(p0, dtype=float), brackets, solve, 0)
        num = np.zeros(n_ch, dtype=complex)
        for b, pose in zip(brackets, poses):
            c2m, s2m, ok = _model_doubled(model, b.geom, pose["yaw"], pose["pitch"], pose["roll"], b.rays)
            num += np.sum(b.weight * ok * (c2m + 1j * s2m) * np.exp(-2j * b.aolp_rad), axis=1)
        p0.extend(np.rad2deg(np.angle(num) / 2))
    p0 = np.asarray(p0, dtype=np.float64)
    lo, hi = _bounds(solve, len(brackets), n_off)
    res = least_squares(_residuals, np.clip(p0, lo, hi), args=(model, brackets, solve, n_off), loss="soft_l1",
                        f_scale=0.1, method="trf", x_scale=1.0, diff_step=1e-6, bounds=(lo, hi))
    j = res.jac
    m, n = j.shape
    var = 2.0 * res.cost / max(np.count_nonzero(res.fun) - n, 1)
    jtj = j.T @ j
    norms = np.sqrt(np.diag(jtj))
    norms[norms == 0] = 1e-300
    jn = jtj / np.outer(norms, norms)
    evals = np.linalg.eigvalsh(jn)
    degenerate = bool(evals[0] < 1e-6 * max(evals[-1], 1e-300))
    cov = var * np.linalg.pinv(jtj, rcond=1e-12)
    sig = np.sqrt(np.clip(np.diag(cov), 0, None))
    with np.errstate(invalid="ignore", divide="ignore"):
        corr = cov / np.outer(sig, sig)
    corr = np.where(np.isfinite(corr), corr, 0.0)
    np.fill_diagonal(corr, 1.0)
    if degenerate:
        sig = np.full(n, np.inf)
    ties = [(names[a], names[b], float(corr[a, b])) for a in range(n) for b in range(a + 1, n)
            if abs(corr[a, b]) > TIE_CORRELATION or degenerate]
    poses, offsets = _unpack(res.x, brackets, solve, n_off)
    out_poses = []
    k = 0
    for pose in poses:
        d = {}
        for ang in ANGLES:
            val = float(pose[ang])
            if ang == "yaw":
                val %= 360.0
            elif ang == "roll":
                val = (val + 180.0) % 360.0 - 180.0
            d[f"{ang}_deg"] = val
            if ang in solve:
                d[f"{ang}_sigma_deg"] = _finite(sig[k])
                k += 1
        out_poses.append(d)
    off = off_sig = None
    if n_off:
        off = [float((o + 90.0) % 180.0 - 90.0) for o in offsets]
        off_sig = [_finite(s) for s in sig[k:k + n_off]]
    if degenerate or ties:
        messages.append(_tie_message(ties, solve, fit_offset, degenerate))
    loose = [names[i] for i in range(n) if np.isfinite(sig[i]) and sig[i] > LOOSE_SIGMA_DEG]
    if loose:
        messages.append(f"poorly determined ({', '.join(loose)} uncertainty above {LOOSE_SIGMA_DEG:g} deg): "
                        "the frame holds too little sky structure for a reliable answer")
    if warn:
        for msg in messages:
            warnings.warn(msg, PolarskyWarning, stacklevel=2)
    return {
        "poses": out_poses,
        "offsets_deg": off,
        "offsets_sigma_deg": off_sig,
        "parameters": names,
        "correlation": [[float(x) for x in row] for row in corr],
        "ties": [{"a": a, "b": b, "correlation": c} for a, b, c in ties],
        "degenerate": degenerate,
        "fit_samples": samples,
        "rms_doubled": float(np.sqrt(np.mean(res.fun ** 2))) if res.fun.size else float("nan"),
        "messages": messages,
        "alternatives": alternatives,
    }


def _finite(x):
    x = float(x)
    return x if np.isfinite(x) else None


def _tie_message(ties, solve, fit_offset, degenerate) -> str:
    if degenerate and set(solve) == set(ANGLES) and not fit_offset:
        return ("yaw, pitch and roll cannot all be fixed from the sky's polarization: the single-scattering "
                "pattern is symmetric about the sun direction; give one of them (e.g. --pitch-deg from a "
                "level or --roll-deg 0 on a levelled tripod) and solve the others")
    pairs = ", ".join(f"{t[0]}/{t[1]} (correlation {t[2]:+.3f})" for t in ties) or "the parameters"
    hint = ""
    if fit_offset and any("roll" in t[0] or "roll" in t[1] for t in ties):
        hint = ("; the analyzer angle offset and the camera roll cannot be told apart over this field of view: "
                "give the roll (e.g. --roll-deg 0 from a level) and leave roll out of --solve")
    return f"not separable from this data: {pairs}{hint}"
