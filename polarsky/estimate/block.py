"""The Stokes estimate of a block of pixels, from analyzer intensities to every product.

Three steps, each with a numpy reference and a compiled (numba) twin that the tests hold
equal:

1. *solve*: least-squares Stokes vector, mean intensity and residual sum of squares of each
   pixel (or, for mosaic fast paths, Stokes vectors computed by the demosaicing kernels);
2. *finish*: DoLP, AoLP, RMS residual and the per-pixel noise variance (from the residual or
   the noise model), NaN where a pixel is not valid;
3. *uncertainty*: the residual-based variance smoothed over 5x5 pixels, then sigma_dolp,
   sigma_aolp and the bias-corrected DoLP.

The smoothing needs two rows of context above and below a block; the row-block runner
(:mod:`polarsky.estimate.runner`) supplies them, so products never depend on the block size.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..core import stokes as sk
from ..core.noise import NoiseModel, model_variance
from ..core.uncertainty import dolp_debiased_plaszczynski2014, sigma_dolp_aolp

__all__ = ["BlockInput", "estimate", "needs_context", "SMOOTH_RADIUS", "PRODUCTS", "BASE_PRODUCTS"]

#: Half-size of the window the residual-based variance is averaged over (5x5 pixels).
SMOOTH_RADIUS = 2
#: Names of the per-pixel products (``residual`` only with more than 3 analyzers).
PRODUCTS = ("S0", "S1", "S2", "dolp", "dolp_unbiased", "aolp", "sigma_dolp", "sigma_aolp", "residual", "valid")


@dataclass
class BlockInput:
    """What the estimate needs for one block (C channels, h rows, w columns).

    Either ``intensities`` with analysis matrices ``w`` (and optionally per-pixel ``solve``
    matrices), or precomputed Stokes vectors ``s`` with ``mean`` and ``rss`` (mosaic fast
    paths).

    Attributes
    ----------
    invalid : ndarray (C, h, w) bool
    w : ndarray (C, N, 3)
        Analysis matrix of each channel (the nominal one with per-pixel calibration).
    n_analyzers : int
    full_scale : float
        Native full scale (DN) of the data, for the noise model.
    srgb : bool
        The data were sRGB-encoded (noise model).
    intensities : ndarray (N, C, h, w) float32, optional
    weights : ndarray (N,), optional
        Relative inverse variances of the frames.
    solve : ndarray (C, 3, N, h, w) float32, optional
        Per-pixel solve matrices (per-pixel calibration).
    s, mean, rss : ndarray, optional
        (C, 3, h, w), (C, h, w), (C, h, w) float32.
    """

    invalid: np.ndarray
    w: np.ndarray
    n_analyzers: int
    full_scale: float = 65535.0
    srgb: bool = False
    intensities: np.ndarray | None = None
    weights: np.ndarray | None = None
    solve: np.ndarray | None = None
    s: np.ndarray | None = None
    mean: np.ndarray | None = None
    rss: np.ndarray | None = None

    @property
    def shape(self) -> tuple:
        return self.invalid.shape


def _solve_numpy(frames, invalid, w, weights):
    """Step 1, reference: S (3, h, w), mean (h, w), rss (h, w) of one channel."""
    s = sk.fit_stokes(frames, w, weights=weights)
    mean = frames.mean(axis=0)
    n = frames.shape[0]
    rss = sk.residual_rms(frames, w, s) ** 2 * np.float32(max(n - 3, 1)) if n > 3 else np.zeros_like(mean)
    return s, mean, rss


def _finish_numpy(s, mean, rss, invalid, n, mode, inv_fw, q_var, srgb):
    """Step 2, reference: dolp, aolp, residual, var (NaN where not valid); NaNs into ``s``."""
    bad = invalid | ~(s[0] > 0)
    s[:, bad] = np.nan
    dolp, aolp = sk.dolp_aolp(s)
    ms = rss * np.float32(1.0 / max(n - 3, 1))
    res = np.sqrt(ms)
    var = ms if mode == 1 else model_variance(mean, np.float32(inv_fw), np.float32(q_var), bool(srgb)).astype(np.float32)
    for a in (dolp, aolp, res, var):
        a[bad] = np.nan
    return dolp, aolp, res, var


def _box_sum(a: np.ndarray, r: int) -> np.ndarray:
    """Sum over the (2r+1)^2 window of each pixel, edges mirrored, float32: columns first,
    then rows, in the order the compiled smoothing pass adds them (bit-identical results)."""
    h, w = a.shape
    ap = np.pad(a, r, mode="symmetric")
    cols = np.zeros((h + 2 * r, w), np.float32)
    for dx in range(2 * r + 1):
        cols += ap[:, dx:dx + w]
    out = np.zeros((h, w), np.float32)
    for dy in range(2 * r + 1):
        out += cols[dy:dy + h]
    return out


def smooth_variance(var: np.ndarray) -> np.ndarray:
    """Mean of the finite values in the 5x5 window around each pixel (NaN stays NaN).

    Sums run over the same window in the same order at every pixel (explicit shifted sums of
    a reflect-padded array), so a pixel's result does not depend on where a block starts.
    """
    r = SMOOTH_RADIUS
    finite = np.isfinite(var)
    every = bool(finite.all())
    # every value finite: each window counts (2r+1)^2 values (the padding repeats finite ones)
    v0 = var.astype(np.float32) if every else np.where(finite, var, np.float32(0)).astype(np.float32)
    num2 = _box_sum(v0, r)
    if every:
        num2 /= np.float32((2 * r + 1) ** 2)
        return num2
    den2 = _box_sum(finite.astype(np.float32), r)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(finite, num2 / den2, np.float32(np.nan)).astype(np.float32)


def _uncertainty_numpy(s, dolp, var, cov):
    """Step 3, reference: sigma_dolp, sigma_aolp (deg), dolp_unbiased."""
    sig_p, sig_a, sig_rice = sigma_dolp_aolp(s, var, cov)
    unb = dolp_debiased_plaszczynski2014(dolp, sig_rice)
    bad = ~(s[0] > 0)
    for a in (sig_p, sig_a, unb):
        a[bad] = np.nan
    return sig_p, sig_a, unb


#: The products every estimate returns (the others are computed when a sink needs them).
BASE_PRODUCTS = frozenset({"S0", "S1", "S2", "valid"})
_UNCERTAINTY = frozenset({"sigma_dolp", "sigma_aolp", "dolp_unbiased"})


def needs_context(needs) -> bool:
    """Whether products ``needs`` include the uncertainties (the only ones smoothed over 5x5)."""
    return needs is None or bool(_UNCERTAINTY & set(needs))


def estimate(inp: BlockInput, noise: NoiseModel, *, compiled: bool, smooth: bool = True, needs=None) -> dict:
    """The Stokes products of a block.

    Parameters
    ----------
    inp : BlockInput
    noise : NoiseModel
    compiled : bool
        Use the compiled kernels (large frames) instead of the numpy reference.
    smooth : bool
        Smooth the residual-based variance over 5x5 pixels (the caller supplies context rows).
    needs : iterable of str, optional
        The products wanted (default all of :data:`PRODUCTS`); S0, S1, S2 and ``valid`` are
        always returned.  A product's values do not depend on which others are wanted.

    Returns
    -------
    dict
        The products wanted, float32 (C, h, w) with NaN where not valid (``residual`` only
        with more than 3 analyzers), and bool ``valid``.
    """
    c, h, w = inp.shape
    n = inp.n_analyzers
    want = set(PRODUCTS) if needs is None else set(needs) | BASE_PRODUCTS
    if n <= 3:
        want.discard("residual")
    uncertain = bool(_UNCERTAINTY & want)
    angles = uncertain or bool({"dolp", "aolp"} & want)
    mode = 1 if noise.resolved_source(n) == "residual" else 0
    inv_fw, q_var = noise.parameters(inp.full_scale)
    shape = (c, h, w)
    out = {k: np.empty(shape, np.float32) for k in PRODUCTS if k in want and k != "valid"}

    def channel(ci):
        """Every wanted product of channel ``ci``, written into its slice of ``out``."""
        if not angles and "residual" not in want and not compiled:
            s = _solve_stokes_numpy(inp, ci)
            out["S0"][ci], out["S1"][ci], out["S2"][ci] = s
            return
        s, var, dolp, aolp, res = _solve_and_finish(inp, ci, n, mode, inv_fw, q_var, compiled)
        out["S0"][ci], out["S1"][ci], out["S2"][ci] = s
        if "dolp" in want:
            out["dolp"][ci] = dolp
        if "aolp" in want:
            out["aolp"][ci] = aolp
        if "residual" in want:
            out["residual"][ci] = res
        if not uncertain:
            return
        if mode == 1 and smooth:
            if compiled:
                from ..core.kernels.dispatch import smooth_pass

                smoothed = np.empty(var.shape, np.float32)
                smooth_pass(np.ascontiguousarray(var, np.float32), SMOOTH_RADIUS, smoothed)
                var = smoothed
            else:
                var = smooth_variance(var)
        wm = inp.w[ci]
        cov = sk.stokes_covariance(wm, inp.weights)
        if compiled:
            from ..core.kernels.dispatch import uncertainty_pass

            c6 = np.array([cov[0, 0], cov[1, 1], cov[2, 2], cov[0, 1], cov[0, 2], cov[1, 2]], np.float32)
            npx = h * w
            tmp = {k: out[k][ci] if k in out else np.empty((h, w), np.float32) for k in _UNCERTAINTY}
            uncertainty_pass(s.reshape(3, npx), dolp.reshape(npx), np.ascontiguousarray(var).reshape(npx), c6,
                             tmp["sigma_dolp"].reshape(npx), tmp["sigma_aolp"].reshape(npx),
                             tmp["dolp_unbiased"].reshape(npx))
        else:
            sig_p, sig_a, unb = _uncertainty_numpy(s, dolp, var, cov)
            for k, v in (("sigma_dolp", sig_p), ("sigma_aolp", sig_a), ("dolp_unbiased", unb)):
                if k in out:
                    out[k][ci] = v

    if compiled or c == 1:  # the compiled kernels use every core themselves
        for ci in range(c):
            channel(ci)
    else:  # numpy releases the GIL on these arrays: one channel per core
        from .._shared.threads import thread_map

        thread_map(channel, range(c))
    out["valid"] = ~inp.invalid & np.isfinite(out["S0"])
    return out


def _solve_stokes_numpy(inp: BlockInput, ci: int) -> np.ndarray:
    """S (3, h, w) of one channel alone (numpy), NaN where not valid: what
    :func:`_solve_and_finish` gives for S without the other products."""
    invalid = inp.invalid[ci]
    if inp.s is not None:
        s = inp.s[ci].copy()
    elif inp.solve is not None:
        s = sk.fit_stokes_per_pixel(inp.intensities[:, ci], inp.solve[ci])
    else:
        s = sk.fit_stokes(inp.intensities[:, ci], inp.w[ci], weights=inp.weights)
    s[:, invalid | ~(s[0] > 0)] = np.nan
    return s


def _solve_and_finish(inp: BlockInput, ci: int, n: int, mode: int, inv_fw: float, q_var: float, compiled: bool):
    h, w = inp.shape[1:]
    npx = h * w
    invalid = inp.invalid[ci]
    if inp.s is None and inp.solve is None and compiled and n <= _max_frames():
        from ..core.kernels.dispatch import solve_pass

        frames = np.ascontiguousarray(inp.intensities[:, ci]).reshape(n, npx)
        s = np.empty((3, npx), np.float32)
        dolp, aolp, res, var = (np.empty(npx, np.float32) for _ in range(4))
        wm = inp.w[ci]
        solve_pass(frames, np.ascontiguousarray(invalid).reshape(npx), sk.solve_matrix(wm, inp.weights).astype(np.float32),
                   wm.astype(np.float32), mode, inv_fw, q_var, inp.srgb, s, dolp, aolp, res, var)
        return s.reshape(3, h, w), var.reshape(h, w), dolp.reshape(h, w), aolp.reshape(h, w), res.reshape(h, w)
    if inp.s is not None:
        s, mean, rss = inp.s[ci].copy(), inp.mean[ci], inp.rss[ci]
    elif inp.solve is not None:
        frames = inp.intensities[:, ci]
        s = sk.fit_stokes_per_pixel(frames, inp.solve[ci])
        mean = frames.mean(axis=0)
        rss = (sk.residual_rms(frames, inp.w[ci], s) ** 2 * np.float32(max(n - 3, 1)) if n > 3
               else np.zeros_like(mean))
    else:
        s, mean, rss = _solve_numpy(inp.intensities[:, ci], invalid, inp.w[ci], inp.weights)
    if compiled:
        from ..core.kernels.dispatch import finish_pass

        sf = np.ascontiguousarray(s, dtype=np.float32).reshape(3, npx)
        dolp, aolp, res, var = (np.empty(npx, np.float32) for _ in range(4))
        finish_pass(sf, np.ascontiguousarray(mean, np.float32).reshape(npx),
                    np.ascontiguousarray(rss, np.float32).reshape(npx), np.ascontiguousarray(invalid).reshape(npx),
                    mode, np.float32(1.0 / max(n - 3, 1)), np.float32(inv_fw), np.float32(q_var), bool(inp.srgb),
                    n > 3, dolp, aolp, res, var)
        return sf.reshape(3, h, w), var.reshape(h, w), dolp.reshape(h, w), aolp.reshape(h, w), res.reshape(h, w)
    dolp, aolp, res, var = _finish_numpy(s, mean, rss, invalid, n, mode, inv_fw, q_var, inp.srgb)
    return s, var, dolp, aolp, res


def _max_frames() -> int:
    from ..core.kernels.dispatch import MAX_FRAMES

    return MAX_FRAMES
