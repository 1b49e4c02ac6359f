"""Stokes estimation checked against published formulas and worked values.

Each check names its source.  Values tagged [X] in the project's reference notes are
recomputed here from the published formula rather than quoted as an authority.
"""

from __future__ import annotations

import numpy as np
import pytest

from polarsky.core import stokes as sk
from polarsky.core.uncertainty import dolp_debiased_plaszczynski2014, sigma_dolp_aolp
from polarsky.errors import InputError, PolarskyWarning


def test_malus_law_cos_squared():
    # Malus's law I = I0 cos^2(theta - alpha): Hecht, Optics 5th ed. (2017), eq. 8.24;
    # cos^2 30 = 0.75, cos^2 45 = 0.5, cos^2 60 = 0.25.  Fully polarized light at alpha = 10 deg.
    alpha = 10.0
    s = np.array([1.0, np.cos(np.radians(2 * alpha)), np.sin(np.radians(2 * alpha))])
    for delta, expected in ((0, 1.0), (30, 0.75), (45, 0.5), (60, 0.25), (90, 0.0)):
        # fully polarized light of intensity S0 = 1: I = S0 cos^2(delta)
        assert sk.intensity_at(s, alpha + delta) == pytest.approx(expected, abs=1e-12)
    # unpolarized light through an ideal polarizer: half is transmitted (Hecht 2017, sec. 8.2)
    assert sk.intensity_at([1.0, 0.0, 0.0], 33.0) == pytest.approx(0.5)


def test_four_angle_closed_forms_worked_example():
    # Hagen & Otani, Opt. Eng. 58(8) 080501 (2019), eq. 1: I0 = (s0+s1)/2, I45 = (s0+s2)/2,
    # I90 = (s0-s1)/2, I135 = (s0-s2)/2; closed forms S0 = (I0+I45+I90+I135)/2, S1 = I0-I90,
    # S2 = I45-I135 (Collett, Field Guide to Polarization, SPIE 2005, p. 10).
    # Worked check: S = (1, 0.3, -0.2) -> I = (0.65, 0.40, 0.35, 0.60), DoLP 0.3605551,
    # AoLP -16.845034 deg = 163.154966 deg in [0, 180).
    s = np.array([1.0, 0.3, -0.2])
    w = sk.analysis_matrix([0, 45, 90, 135])
    i = w @ s
    np.testing.assert_allclose(i, [0.65, 0.40, 0.35, 0.60], atol=1e-12)
    est = sk.fit_stokes(i.reshape(4, 1), w)[:, 0]
    np.testing.assert_allclose(est, [(i.sum()) / 2, i[0] - i[2], i[1] - i[3]], atol=1e-12)
    dolp, aolp = sk.dolp_aolp(est.reshape(3, 1))
    assert dolp[0] == pytest.approx(0.3605551, abs=1e-7)
    assert aolp[0] == pytest.approx(180 - 16.845034, abs=1e-6)


@pytest.mark.parametrize("n", [3, 5, 6, 8, 12])
def test_least_squares_equals_equal_spacing_closed_form(n):
    # For theta_k = k pi / N the least-squares solution reduces to S0 = (2/N) sum I_k,
    # S1 = (4/N) sum I_k cos 2theta_k, S2 = (4/N) sum I_k sin 2theta_k (derived from
    # W^T W = (N/4) diag(1, 1/2, 1/2); Couchot et al., A&AS 135, 579 (1999), appendix).
    rng = np.random.default_rng(n)
    th = np.arange(n) * 180.0 / n
    i = rng.random((n, 10))
    est = sk.fit_stokes(i, sk.analysis_matrix(th))
    t = np.radians(th)[:, None]
    np.testing.assert_allclose(est[0], 2 / n * i.sum(0), atol=1e-12)
    np.testing.assert_allclose(est[1], 4 / n * (i * np.cos(2 * t)).sum(0), atol=1e-12)
    np.testing.assert_allclose(est[2], 4 / n * (i * np.sin(2 * t)).sum(0), atol=1e-12)


@pytest.mark.parametrize("angles, cond", [
    ([0, 45, 90, 135], np.sqrt(2)),     # equally spaced: the minimum sqrt(2) (Tyo, Appl. Opt. 41, 619, 2002)
    ([0, 60, 120], np.sqrt(2)),
    ([0, 45, 90], 1 + np.sqrt(2)),      # recomputed from the formula, tag [X]
])
def test_condition_numbers(angles, cond):
    assert sk.check_angles(angles) == pytest.approx(cond, rel=1e-9)


def test_badly_conditioned_set_warns_with_condition_number():
    # 0/30/60 has cond(W) = 6.2027 (recomputed [X]); below the warning threshold 10 -> no warning
    assert sk.check_angles([0, 30, 60]) == pytest.approx(6.202742, abs=1e-5)
    with pytest.warns(PolarskyWarning, match="condition number"):
        sk.check_angles([0, 10, 20])


@pytest.mark.parametrize("angles", [[0, 90], [0, 180, 90], [0, 0, 0, 0], [10, 190, 370]])
def test_too_few_distinct_angles_is_an_error(angles):
    with pytest.raises(InputError, match="distinct"):
        sk.check_angles(angles)


def test_finite_extinction_scales_dolp_and_calibrated_matrix_recovers_it():
    # A partial polarizer of diattenuation D = (ER-1)/(ER+1) gives I = t/2 (S0 + D(S1 cos + S2 sin))
    # (Chipman, Lam & Young, Polarized Light and Optical Systems, 2018, ch. 5); the ideal formulas then
    # return D x DoLP with AoLP unchanged, and putting D into W recovers DoLP (Hagen & Otani 2019).
    er = 30.0
    d = sk.diattenuation_from_extinction(er)
    assert d == pytest.approx(0.935484, abs=1e-6)
    s = np.array([1.0, 0.4, 0.3]).reshape(3, 1)
    angles = [0, 45, 90, 135]
    i = sk.analysis_matrix(angles, diattenuation=d) @ s[:, 0]
    naive = sk.fit_stokes(i.reshape(4, 1), sk.analysis_matrix(angles))
    fixed = sk.fit_stokes(i.reshape(4, 1), sk.analysis_matrix(angles, diattenuation=d))
    p_true, a_true = sk.dolp_aolp(s)
    p_naive, a_naive = sk.dolp_aolp(naive)
    p_fixed, a_fixed = sk.dolp_aolp(fixed)
    assert p_naive[0] == pytest.approx(d * p_true[0], abs=1e-12)
    assert a_naive[0] == pytest.approx(a_true[0], abs=1e-9)
    assert p_fixed[0] == pytest.approx(p_true[0], abs=1e-12)


def test_rice_bias_at_zero_signal_and_mas_estimator():
    # Rice distribution: E[p_hat | p0 = 0] = sigma sqrt(pi/2) = 1.2533 sigma (Rice 1945; Simmons &
    # Stewart, A&A 142, 100, 1985).  The MAS estimator is unbiased once p0/sigma > 2 (Plaszczynski,
    # Montier, Levrier & Tristram, MNRAS 439, 4048, 2014, abstract): Monte-Carlo means 3.003 sigma at
    # p0 = 3 sigma and 5.002 sigma at 5 sigma (recomputed [X]); tolerance 3 standard errors.
    rng = np.random.default_rng(42)
    sigma, n = 0.01, 400_000
    for p0, expect_raw, expect_mas in ((0.0, 1.2533141, None), (3.0, 3.17258, 3.003), (5.0, 5.10107, 5.002)):
        q = p0 * sigma + rng.normal(0, sigma, n)
        u = rng.normal(0, sigma, n)
        p_hat = np.hypot(q, u)
        assert p_hat.mean() / sigma == pytest.approx(expect_raw, abs=3 * p_hat.std() / sigma / np.sqrt(n) + 2e-3)
        if expect_mas is not None:
            mas = dolp_debiased_plaszczynski2014(p_hat, sigma)
            assert mas.mean() / sigma == pytest.approx(expect_mas, abs=0.01)
            assert abs(mas.mean() / sigma - p0) < 0.01  # unbiased at SNR > 2
    assert np.all(dolp_debiased_plaszczynski2014(np.array([0.0, 1e-4, 0.5]), 0.01) >= 0)  # always positive


def test_first_order_uncertainties_match_monte_carlo():
    # For 0/45/90/135 with i.i.d. noise sigma_I: sigma_AoLP ~ sigma_I / (sqrt(2) P S0) rad and
    # sigma_DoLP ~ sqrt(2 + P^2) sigma_I / S0 (error propagation; Serkowski 1962 form, from memory,
    # checked here against a Monte-Carlo simulation of the estimator itself).
    rng = np.random.default_rng(3)
    s = np.array([1.0, 0.2, 0.0])
    w = sk.analysis_matrix([0, 45, 90, 135])
    sigma_i, n = 0.01, 200_000
    i = (w @ s)[:, None] + rng.normal(0, sigma_i, (4, n))
    est = sk.fit_stokes(i, w)
    p, a = sk.dolp_aolp(est)
    cov = sk.stokes_covariance(w)
    sp, sa, _ = sigma_dolp_aolp(s.reshape(3, 1), sigma_i ** 2, cov)
    assert sp[0] == pytest.approx(np.sqrt(2 + 0.2 ** 2) * sigma_i, rel=1e-6)
    assert np.radians(sa[0]) == pytest.approx(sigma_i / (np.sqrt(2) * 0.2), rel=1e-6)
    a_wrapped = (a - 0 + 90) % 180 - 90
    assert np.std(p) == pytest.approx(sp[0], rel=0.02)
    assert np.std(a_wrapped) == pytest.approx(sa[0], rel=0.02)


def test_float32_stays_float32():
    i = np.random.default_rng(0).random((4, 8, 8)).astype(np.float32)
    s = sk.fit_stokes(i, sk.analysis_matrix([0, 45, 90, 135]))
    assert s.dtype == np.float32
    p, a = sk.dolp_aolp(s)
    assert p.dtype == np.float32 and a.dtype == np.float32
    assert np.all((a >= 0) & (a < 180))


def test_uncertainties_of_unpolarized_pixels_do_not_warn():
    # S1 = S2 = 0 exactly (flat, unpolarized): no floating-point warnings, AoLP uncertainty at its cap
    s = np.array([[0.5, 1e-6], [0.0, 0.0], [0.0, 0.0]], np.float32)
    sp, sa, sr = sigma_dolp_aolp(s, np.float32(1e-6), sk.stokes_covariance(sk.analysis_matrix([0, 45, 90, 135])))
    assert np.all(sa == pytest.approx(180 / np.sqrt(12)))
