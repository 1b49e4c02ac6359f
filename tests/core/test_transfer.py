"""sRGB transfer function against IEC 61966-2-1:1999 (values as in colour-science's tests)."""

from __future__ import annotations

import numpy as np
import pytest

from polarsky.core.transfer import linear_to_srgb, srgb_lut, srgb_to_linear


def test_iec_61966_2_1_values():
    # IEC 61966-2-1:1999 section 5.2; encode(0.18) = 0.461356129500442 as in colour-science's
    # test_srgb.py (tolerance 1e-7, the level of that test).
    assert linear_to_srgb(0.18) == pytest.approx(0.461356129500442, abs=1e-7)
    assert srgb_to_linear(0.461356129500442) == pytest.approx(0.18, abs=1e-7)
    # decode(0.5) = 0.21404114 and decode(0.04045) = 0.0031308, recomputed from the standard's formula [X]
    assert srgb_to_linear(0.5) == pytest.approx(0.21404114, abs=1e-7)
    assert srgb_to_linear(0.04045) == pytest.approx(0.0031308, abs=1e-7)
    assert srgb_to_linear(0.0) == 0.0 and srgb_to_linear(1.0) == pytest.approx(1.0)


def test_round_trip_and_lut():
    v = np.linspace(0.05, 1, 50)
    np.testing.assert_allclose(linear_to_srgb(srgb_to_linear(v)), v, atol=1e-12)
    lut = srgb_lut()
    assert lut.dtype == np.float32 and lut[128] == pytest.approx(0.21586050, abs=1e-6)  # decode(128/255) [X]


def test_stokes_on_encoded_values_is_biased():
    # Polarimetry must run on linear values (common practice): the Stokes formulas applied to
    # sRGB-encoded values give a wrong DoLP, decoding first gives the right one.
    from polarsky.core import stokes as sk

    s = np.array([0.6, 0.2, 0.1])
    w = sk.analysis_matrix([0, 45, 90, 135])
    enc = linear_to_srgb(w @ s)
    p_enc, _ = sk.dolp_aolp(sk.fit_stokes(enc.reshape(4, 1), w))
    p_lin, _ = sk.dolp_aolp(sk.fit_stokes(srgb_to_linear(enc).reshape(4, 1), w))
    assert p_lin[0] == pytest.approx(np.hypot(0.2, 0.1) / 0.6, abs=1e-9)
    assert abs(p_enc[0] - p_lin[0]) > 0.05
