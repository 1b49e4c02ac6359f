"""What a bracket says about itself: each frame's relative exposure, and the tone curve.

The analyzer model ``I_k = 1/2 (S0 + D (S1 cos 2theta_k + S2 sin 2theta_k))`` has three
unknowns per pixel.  With 4 or more analyzer angles it is over-determined, so a gain per
frame (an exposure that changed between frames) is identifiable from pixels of varied
polarization: :func:`estimate_exposure` fits ``I_kp = g_k (w_k . S_p)`` on a sample of pixels
(``g`` relative to the first frame) in closed form.

With 5 or more angles the fit can also hold the fourth harmonic ``cos 4theta, sin 4theta``,
which a linear response never produces.  If the values are ``f(L)`` of the linear light ``L``
(a tone curve left in the data), a second-order Taylor expansion of ``f`` about the mean
``m`` of ``L = m (1 + p cos(2theta - phi))`` gives a fourth harmonic along
``cos(4theta - 2phi)`` of ``f''(m) m^2 p^2 / 4`` beside the second harmonic ``f'(m) m p``, so

    kappa = 4 a4 a0 / a2^2 ~= f f'' / f'^2

(``a0``, ``a2``, ``a4`` the fitted mean, second-harmonic amplitude and fourth-harmonic part
along the second's phase) is independent of the degree of polarization; it is 0 for a correct
linearization and ``1 - 1/gamma`` for a residual power law ``L^gamma``.
:func:`tone_check` reports the median kappa against the intensity level; a curve that leaves
``|kappa|`` above :data:`KAPPA_WARNING` at some level is evidently wrong there.

References
----------
.. [1] G. H. Golub, C. F. Van Loan, "An analysis of the total least squares problem",
   SIAM J. Numer. Anal. 17(6), 883-893 (1980), doi:10.1137/0717073 (the smallest
   generalized eigenvector as the errors-in-variables estimate).
.. [2] E. Collett, *Field Guide to Polarization*, SPIE (2005): Malus's law and the
   Stokes analyzer equation (the model whose over-determination is used here).
"""

from __future__ import annotations

import numpy as np

from .._shared.stats import percentile

__all__ = ["sample_values", "estimate_exposure", "tone_check", "evidently_wrong", "KAPPA_WARNING", "LEVEL_EDGES"]

#: Ratio of the second-smallest to the smallest generalized eigenvalue below which per-frame
#: gains are not identifiable (another set of gains fits the bracket about as well).
SEPARATION = 30.0
#: |kappa| above which the tone curve is evidently wrong at a level (a residual gamma of 1.1).
KAPPA_WARNING = 0.09
#: Edges of the intensity levels of the tone check (linear, fraction of full scale).
LEVEL_EDGES = (0.0, 0.02, 0.05, 0.1, 0.2, 0.4, 0.7, 1.0)


def sample_values(bracket, max_pixels: int = 50_000):
    """Linear values of evenly spaced rows: ``(values (N, C, P) float64, valid (C, P) bool)``."""
    h, w = bracket.shape
    rows = np.linspace(0, h - 1, max(1, min(h, max_pixels // max(w, 1)))).astype(int)
    rows = rows[np.r_[True, rows[1:] != rows[:-1]]]  # sorted: drop repeats (np.unique imports numpy.ma)
    vals, valid = [], []
    for r in rows:
        v, inv, _ = bracket.linear_block(int(r), int(r) + 1)
        vals.append(v[:, :, 0])
        valid.append(~inv[:, 0])
    return np.concatenate(vals, axis=-1).astype(np.float64), np.concatenate(valid, axis=-1)


def estimate_exposure(values, valid, w):
    """Relative exposure of each frame from the bracket itself.

    With ``h_k = 1/g_k`` the model ``h_k I_kp = w_k . S_p`` is linear: eliminating ``S_p``
    leaves ``P diag(I_p) h = 0`` for every pixel, ``P = 1 - W W^+`` the projector off the
    analysis matrix's columns, so ``h`` makes ``h^T M h`` small, ``M = P o sum_p I_p I_p^T``
    (element-wise product).  Noise in ``I`` adds ``D = diag(P_kk sum_p var(I_kp))`` to ``M``;
    the estimate free of that bias (total least squares) is the generalized eigenvector of
    ``(M, D)`` with the smallest eigenvalue [1]_, scaled to ``h_0 = 1``.  The variance is
    first taken proportional to the value (photon noise), then ``a + b I`` fitted to the
    residuals of that first estimate (read and photon noise), and the estimate repeated.

    Parameters
    ----------
    values : ndarray (N, C, P)
        Linear values (already divided by any exposure applied).
    valid : ndarray (C, P) bool
    w : ndarray (C, N, 3)
        Analysis matrices.

    Returns
    -------
    gain : ndarray (N,) or None
        Gain of each frame relative to the first (None: fewer than 4 frames or too few pixels).
    sigma : ndarray (N,) or None
        Standard uncertainty of each gain, from the spread over 4 disjoint pixel subsets.
    """
    n = values.shape[0]
    if n < 4:
        return None, None
    w = np.asarray(w, dtype=np.float64)
    # per channel (part) and per disjoint subset of its pixels, the moments every step uses:
    # G = sum_p v_p v_p^T, T = sum_p l_p v_p v_p^T (l_p = the pixel's mean value), s = sum_p v_p,
    # and sums of l and l^2; the fits below are exact functions of them (no pass over pixels)
    parts, n_pixels = [], 0
    for c in range(values.shape[1]):
        keep = valid[c] & (values[:, c].mean(axis=0) > 0.02)
        wc = w[min(c, w.shape[0] - 1)]
        proj = np.eye(n) - wc @ np.linalg.pinv(wc)
        v = values[:, c, keep]
        n_pixels += v.shape[1]
        subsets = []
        for i in range(4):  # interleaved subsets: disjoint and each spread over the whole sample
            vv = v[:, i::4]
            lv = vv.mean(axis=0)
            subsets.append({"G": vv @ vv.T, "T": (vv * lv) @ vv.T, "s": vv.sum(axis=1), "n": float(vv.shape[1]),
                            "l": float(lv.sum()), "ll": float(lv @ lv)})
        parts.append((proj, subsets))
    if n_pixels < 400:
        return None, None

    def moments(select):
        """The moments of the chosen subsets (None: all) of every part."""
        out = []
        for proj, subsets in parts:
            chosen = subsets if select is None else [subsets[select]]
            out.append((proj, {k: sum(sub[k] for sub in chosen) for k in chosen[0]}))
        return out

    def solve(mom, noise=(0.0, 1.0)):
        a, b = noise
        m = np.zeros((n, n))
        d = np.zeros(n)
        for proj, mo in mom:
            m += proj * mo["G"]
            d += np.diag(proj) * (a * mo["n"] + b * mo["s"])
        # noise of variance a + b I adds D = diag(P_kk sum_p var_kp) to M: the consistent
        # estimate is the generalized eigenvector of (M, D) with the smallest eigenvalue;
        # D is diagonal and positive: with D^-1/2 M D^-1/2 y = lam y, x = D^-1/2 y
        inv_sqrt = 1.0 / np.sqrt(np.maximum(d, 1e-12 * d.max()))
        lam, y = np.linalg.eigh(m * np.outer(inv_sqrt, inv_sqrt))
        vecs = y * inv_sqrt[:, None]
        lam = np.maximum(lam, 0.0)
        if not lam[1] > SEPARATION * max(lam[0], 1e-9 * lam[-1]):
            # a second solution fits (nearly) as well: the scene shows too few kinds of
            # polarization for the gains to be told from the Stokes parameters
            raise np.linalg.LinAlgError("gains not identifiable")
        return vecs[:, 0] / vecs[0, 0]

    def noise_model(mom, h):
        """Variance ``a + b I`` fitted to the per-pixel residuals at ``h`` (read and photon noise).

        A pixel's residual energy is ``v^T Q v`` with ``Q = diag(h) P diag(h)`` (P is a
        symmetric projector), so the least-squares line through (mean value, energy) needs
        only ``trace(Q G)`` and ``trace(Q T)``.
        """
        n_, sx, sxx, sy, sxy = 0.0, 0.0, 0.0, 0.0, 0.0
        for proj, mo in mom:
            q = proj * np.outer(h, h)
            scale = max(float(np.trace(proj @ np.diag(h * h) @ proj)), 1e-12)
            n_ += mo["n"]
            sx += mo["l"]
            sxx += mo["ll"]
            sy += float(np.sum(q * mo["G"])) / scale
            sxy += float(np.sum(q * mo["T"])) / scale
        det = n_ * sxx - sx * sx
        if not det > 0:
            return 0.0, max(sy / max(sx, 1e-12), 0.0) + 1e-12
        b = (n_ * sxy - sx * sy) / det
        a = (sy - b * sx) / n_
        return max(a, 0.0), max(b, 0.0) + 1e-12

    def gains(select):
        mom = moments(select)
        h = solve(mom)
        return 1.0 / solve(mom, noise_model(mom, h))

    try:
        gain = gains(None)
        subs = np.stack([gains(i) for i in range(4)])
    except np.linalg.LinAlgError:  # a scene of one polarization state: gains not identifiable
        return None, None
    sigma = subs.std(axis=0, ddof=1) / 2.0
    if not np.all(np.isfinite(gain)) or np.any(gain <= 0):
        return None, None
    return gain, sigma


def tone_check(values, valid, w, *, min_pixels: int = 300, min_dolp: float = 0.15):
    """The fourth-harmonic curvature ``kappa`` of the fit residual against intensity level.

    Parameters
    ----------
    values : ndarray (N, C, P)
    valid : ndarray (C, P) bool
    w : ndarray (C, N, 3)
        Analysis matrices (their angles and diattenuation are used).
    min_pixels : int
        Levels with fewer usable pixels report no kappa.
    min_dolp : float
        Pixels less polarized than this are not used (kappa's noise grows as 1/DoLP^2).

    Returns
    -------
    dict or None
        ``levels`` (``[lo, hi]`` of each level), ``pixels``, ``curvature`` (median kappa or
        None), ``curvature_sigma``; None when the angles cannot resolve the fourth harmonic
        (fewer than 5 distinct angles).
    """
    w = np.asarray(w, dtype=np.float64)
    out_k, out_s, out_n = [], [], []
    kap_all, lvl_all = [], []
    for c in range(values.shape[1]):
        theta = 0.5 * np.arctan2(w[c, :, 2], w[c, :, 1])
        x = np.stack([np.ones_like(theta), np.cos(2 * theta), np.sin(2 * theta), np.cos(4 * theta),
                      np.sin(4 * theta)], axis=1)
        if x.shape[0] < 5 or np.linalg.cond(x) > 1e3:
            return None
        coef = np.linalg.lstsq(x, values[:, c, valid[c]], rcond=None)[0]
        a0 = coef[0]
        a2 = np.hypot(coef[1], coef[2])
        phi = np.arctan2(coef[2], coef[1])
        a4 = coef[3] * np.cos(2 * phi) + coef[4] * np.sin(2 * phi)
        use = (a0 > 0) & (a2 > min_dolp * a0)
        kap_all.append(4 * a4[use] * a0[use] / a2[use] ** 2)
        lvl_all.append(a0[use])
    kap, lvl = np.concatenate(kap_all), np.concatenate(lvl_all)
    for lo, hi in zip(LEVEL_EDGES[:-1], LEVEL_EDGES[1:]):
        k = kap[(lvl >= lo) & (lvl < hi)]
        out_n.append(int(k.size))
        if k.size < min_pixels:
            out_k.append(None)
            out_s.append(None)
            continue
        med = percentile(k, 50)
        mad = percentile(np.abs(k - med), 50) * 1.4826
        out_k.append(round(med, 4))
        out_s.append(round(1.2533 * mad / np.sqrt(k.size), 4))
    return {"levels": [[lo, hi] for lo, hi in zip(LEVEL_EDGES[:-1], LEVEL_EDGES[1:])], "pixels": out_n,
            "curvature": out_k, "curvature_sigma": out_s}


def evidently_wrong(check) -> list:
    """Levels ``[lo, hi, kappa]`` where the tone check says the curve is evidently wrong."""
    if check is None:
        return []
    bad = []
    for (lo, hi), k, s in zip(check["levels"], check["curvature"], check["curvature_sigma"]):
        if k is not None and abs(k) > KAPPA_WARNING and abs(k) > 4 * s:
            bad.append([lo, hi, k])
    return bad
