"""Sky radiance weights against the CIE standard general sky's definitions."""

from __future__ import annotations

import pytest

from polarsky.plan.radiance import radiance_cie_clear_sky, radiance_uniform


def test_cie_clear_sky_normalization():
    # CIE S 011/E:2003: L/Lz = f(chi) phi(Z) / (f(Zs) phi(0)), so the zenith is 1 for any sun (the
    # type-12 parameters are from memory).
    for zs in (20.0, 45.0, 70.0):
        assert radiance_cie_clear_sky(0.0, zs, zs) == pytest.approx(1.0, abs=1e-12)


def test_cie_clear_sky_gradation_at_the_horizon():
    # CIE S 011/E:2003: the gradation phi(Z) = 1 + a exp(b / cos Z) is 1 at the horizon by definition,
    # so there L/Lz = f(chi) / (f(Zs) phi(0)).
    import numpy as np

    a, b, c, d, e = -1.0, -0.32, 10.0, -3.0, 0.45

    def f(x):
        return 1 + c * (np.exp(d * x) - np.exp(d * np.pi / 2)) + e * np.cos(x) ** 2

    chi, zs = np.radians(70.0), np.radians(40.0)
    assert radiance_cie_clear_sky(90.0, 70.0, 40.0) == pytest.approx(f(chi) / (f(zs) * (1 + a * np.exp(b))), rel=1e-12)


def test_brighter_toward_the_sun():
    assert radiance_cie_clear_sky(60.0, 20.0, 50.0) > radiance_cie_clear_sky(60.0, 110.0, 50.0)
    assert radiance_uniform([10.0, 80.0], [20.0, 110.0], 50.0).tolist() == [1.0, 1.0]
