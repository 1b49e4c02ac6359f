"""The compiled kernels agree with the numpy reference implementation."""

from __future__ import annotations

import numpy as np
import pytest

from polarsky import _kernels
from polarsky import stokes as sk
from polarsky._kernel_source import generate, target


def test_generated_kernels_are_up_to_date():
    assert target().read_text() == generate(), "run: python -m polarsky._kernel_source"


@pytest.mark.parametrize("n", [3, 4, 5, 9])
def test_pass_stokes_matches_numpy(n):
    rng = np.random.default_rng(n)
    angles = np.arange(n) * 180.0 / n + 3.0
    w = sk.analysis_matrix(angles, diattenuation=0.97)
    s_true = np.stack([rng.uniform(0.2, 1, 500), rng.uniform(-0.2, 0.2, 500), rng.uniform(-0.2, 0.2, 500)])
    frames = (w @ s_true + rng.normal(0, 1e-3, (n, 500))).astype(np.float32)
    invalid = np.zeros(500, bool)
    invalid[::17] = True
    solve = sk.solve_matrix(w).astype(np.float32)
    s = np.empty((3, 500), np.float32)
    d, a, r, v = (np.empty(500, np.float32) for _ in range(4))
    _kernels.pass_stokes(frames, invalid, solve, w.astype(np.float32), s, d, a, r, v,
                         1 if n > 3 else 0, np.float32(1 / 2e4), np.float32(1e-8), False)
    ref = sk.fit_stokes(frames.astype(np.float64), w)
    p_ref, a_ref = sk.dolp_aolp(ref)
    ok = ~invalid
    np.testing.assert_allclose(s[:, ok], ref[:, ok], atol=2e-6)
    np.testing.assert_allclose(d[ok], p_ref[ok], atol=2e-6)
    assert np.abs((a[ok] - a_ref[ok] + 90) % 180 - 90).max() < 1e-3
    assert np.all(np.isnan(d[invalid])) and np.all((a[ok] >= 0) & (a[ok] < 180))
    if n > 3:
        np.testing.assert_allclose(r[ok], sk.residual_rms(frames.astype(np.float64), w, ref)[ok], rtol=1e-3, atol=1e-7)


def test_uncertainty_pass_matches_numpy():
    rng = np.random.default_rng(1)
    s = np.stack([rng.uniform(0.3, 1, 400), rng.uniform(-0.3, 0.3, 400), rng.uniform(-0.3, 0.3, 400)]).astype(np.float32)
    var = rng.uniform(1e-6, 1e-4, 400).astype(np.float32)
    cov = sk.stokes_covariance(sk.analysis_matrix([0, 30, 70, 130]))
    p, _ = sk.dolp_aolp(s)
    sp_ref, sa_ref, sr_ref = sk.sigma_dolp_aolp(s, var, cov)
    c6 = np.array([cov[0, 0], cov[1, 1], cov[2, 2], cov[0, 1], cov[0, 2], cov[1, 2]], np.float32)
    sp, sa, unb = (np.empty(400, np.float32) for _ in range(3))
    _kernels.pass_uncertainty(s, p, var, c6, sp, sa, unb)
    np.testing.assert_allclose(sp, sp_ref, rtol=1e-4)
    np.testing.assert_allclose(sa, sa_ref, rtol=1e-4)
    np.testing.assert_allclose(unb, sk.dolp_debiased_plaszczynski2014(p, sr_ref), rtol=1e-4, atol=1e-7)


def test_fast_arctangent_accuracy():
    # Abramowitz & Stegun (1964) eq. 4.4.49 bounds the polynomial's error by 2e-8 rad on [0, 1];
    # in float32 arithmetic we ask for 1e-6 rad everywhere.
    from numba import njit

    f = njit(lambda y, x: _kernels.atan2_as(y, x))
    rng = np.random.default_rng(0)
    ys, xs = rng.normal(size=2000), rng.normal(size=2000)
    err = max(abs(f(np.float32(y), np.float32(x)) - np.arctan2(np.float32(y), np.float32(x))) for y, x in zip(ys, xs))
    assert err < 1e-6
