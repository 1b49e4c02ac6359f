"""The compiled kernels agree with the numpy reference implementation (one source, two builds)."""

from __future__ import annotations

import numpy as np
import pytest

from polarsky.core import stokes as sk
from polarsky.core.kernels import dispatch
from polarsky.core.kernels.source import generate, target
from polarsky.core.noise import model_variance
from polarsky.core.uncertainty import dolp_debiased_plaszczynski2014, sigma_dolp_aolp


def test_generated_kernels_are_up_to_date():
    assert target().read_text() == generate(), "run: python -m polarsky.core.kernels.source"


def test_generated_solve_pass_covers_3_to_8_frames():
    from polarsky.core.kernels._generated import SOLVE_PASS

    assert sorted(SOLVE_PASS) == list(range(3, 9)) and dispatch.MAX_FRAMES == 8


def _bracket_pixels(n, npx=500, seed=None):
    rng = np.random.default_rng(n if seed is None else seed)
    angles = np.arange(n) * 180.0 / n + 3.0
    w = sk.analysis_matrix(angles, diattenuation=0.97)
    s_true = np.stack([rng.uniform(0.2, 1, npx), rng.uniform(-0.2, 0.2, npx), rng.uniform(-0.2, 0.2, npx)])
    frames = (w @ s_true + rng.normal(0, 1e-3, (n, npx))).astype(np.float32)
    invalid = np.zeros(npx, bool)
    invalid[::17] = True
    return w, frames, invalid


@pytest.mark.parametrize("n, mode", [(3, 0), (4, 1), (5, 0), (5, 1), (8, 1)])  # mode 1 needs more than 3 frames
def test_solve_pass_matches_numpy(n, mode):
    w, frames, invalid = _bracket_pixels(n)
    npx = frames.shape[1]
    solve = sk.solve_matrix(w).astype(np.float32)
    s = np.empty((3, npx), np.float32)
    d, a, r, v = (np.empty(npx, np.float32) for _ in range(4))
    inv_fw, q_var = 1 / 2e4, 1e-8
    dispatch.solve_pass(frames, invalid, solve, w.astype(np.float32), mode, inv_fw, q_var, False, s, d, a, r, v)
    ref = sk.fit_stokes(frames.astype(np.float64), w)
    p_ref, a_ref = sk.dolp_aolp(ref)
    ok = ~invalid
    np.testing.assert_allclose(s[:, ok], ref[:, ok], atol=2e-6)
    np.testing.assert_allclose(d[ok], p_ref[ok], atol=2e-6)
    assert np.abs((a[ok] - a_ref[ok] + 90) % 180 - 90).max() < 1e-3
    assert np.all(np.isnan(d[invalid])) and np.all(np.isnan(s[:, invalid]))
    assert np.all((a[ok] >= 0) & (a[ok] < 180))
    if n > 3:
        rms = sk.residual_rms(frames.astype(np.float64), w, ref)
        np.testing.assert_allclose(r[ok], rms[ok], rtol=1e-3, atol=1e-7)
    if mode == 1:
        np.testing.assert_allclose(v[ok], rms[ok] ** 2, rtol=2e-3, atol=1e-12)
    else:
        np.testing.assert_allclose(v[ok], model_variance(frames.mean(axis=0), inv_fw, q_var, False)[ok], rtol=1e-5)


@pytest.mark.parametrize("srgb", [False, True])
def test_finish_pass_matches_numpy(srgb):
    w, frames, invalid = _bracket_pixels(4, seed=11)
    s = sk.fit_stokes(frames, w).astype(np.float32)
    mean = frames.mean(axis=0)
    rss = (sk.residual_rms(frames, w, s) ** 2).astype(np.float32)
    npx = frames.shape[1]
    d, a, r, v = (np.empty(npx, np.float32) for _ in range(4))
    s_in = s.copy()
    dispatch.finish_pass(s_in, mean, rss, invalid, 0, np.float32(1.0), np.float32(1 / 2e4), np.float32(1e-8), srgb,
                         True, d, a, r, v)
    p_ref, a_ref = sk.dolp_aolp(s)
    ok = ~invalid
    np.testing.assert_allclose(d[ok], p_ref[ok], atol=2e-6)
    assert np.abs((a[ok] - a_ref[ok] + 90) % 180 - 90).max() < 1e-3
    np.testing.assert_allclose(r[ok], np.sqrt(rss[ok]), rtol=1e-5)
    np.testing.assert_allclose(v[ok], model_variance(mean, 1 / 2e4, 1e-8, srgb)[ok], rtol=1e-5)
    assert np.all(np.isnan(s_in[:, invalid])) and np.all(np.isnan(d[invalid]))


def test_uncertainty_pass_matches_numpy():
    rng = np.random.default_rng(1)
    s = np.stack([rng.uniform(0.3, 1, 400), rng.uniform(-0.3, 0.3, 400), rng.uniform(-0.3, 0.3, 400)]).astype(np.float32)
    var = rng.uniform(1e-6, 1e-4, 400).astype(np.float32)
    cov = sk.stokes_covariance(sk.analysis_matrix([0, 30, 70, 130]))
    p, _ = sk.dolp_aolp(s)
    sp_ref, sa_ref, sr_ref = sigma_dolp_aolp(s, var, cov)
    c6 = np.array([cov[0, 0], cov[1, 1], cov[2, 2], cov[0, 1], cov[0, 2], cov[1, 2]], np.float32)
    sp, sa, unb = (np.empty(400, np.float32) for _ in range(3))
    dispatch.uncertainty_pass(s, p, var, c6, sp, sa, unb)
    np.testing.assert_allclose(sp, sp_ref, rtol=1e-4)
    np.testing.assert_allclose(sa, sa_ref, rtol=1e-4)
    np.testing.assert_allclose(unb, dolp_debiased_plaszczynski2014(p, sr_ref), rtol=1e-4, atol=1e-7)


def test_fast_arctangent_accuracy():
    # Abramowitz & Stegun (1964) eq. 4.4.49 bounds the polynomial's error by 2e-8 rad on [0, 1];
    # in float32 arithmetic we ask for 1e-6 rad everywhere.
    from numba import njit

    from polarsky.core.kernels.compiled import atan2_poly

    f = njit(lambda y, x: atan2_poly(y, x))
    rng = np.random.default_rng(0)
    ys, xs = rng.normal(size=2000), rng.normal(size=2000)
    err = max(abs(f(np.float32(y), np.float32(x)) - np.arctan2(np.float32(y), np.float32(x))) for y, x in zip(ys, xs))
    assert err < 1e-6
