"""Refractive indices against their published sources (polarsky.core.refractive_index)."""

from __future__ import annotations

import numpy as np
import pytest

from polarsky.core.refractive_index import (GLASS, ICE, ICE_INDEX_WARREN2008, N_AIR, WATER,
                                            refractive_index_air_peck1972, refractive_index_crown_glass_sellmeier,
                                            refractive_index_ice_warren2008, refractive_index_water_iapws1997)
from polarsky.errors import InputError


@pytest.mark.parametrize("rho, t_k, lam_um, n_ref", [
    # IAPWS R9-97 (1997), the release's check values for computer programs: 8 decimals.
    (997.047435, 298.15, 0.2265, 1.39277824),
    (997.047435, 298.15, 0.5893, 1.33285819),
    (30.4758534, 773.15, 0.5893, 1.00949307),
])
def test_iapws_r9_97_check_values(rho, t_k, lam_um, n_ref):
    assert refractive_index_water_iapws1997(lam_um, t_k, rho) == pytest.approx(n_ref, abs=5e-9)


def test_iapws_takes_arrays():
    n = refractive_index_water_iapws1997(np.array([0.2265, 0.5893]), 298.15, 997.047435)
    np.testing.assert_allclose(n, [1.39277824, 1.33285819], atol=5e-9)   # IAPWS R9-97 check values


def test_water_relative_to_air_matches_handbook_nd():
    # n_D(20 deg C) of pure water relative to air = 1.33299: first entry (0 deg Brix) of the ICUMSA
    # 1974 sugar-solution refractive-index table. The table entry is IAPWS R9-97 divided by standard
    # air; 5 printed decimals, and the air of the two differs by a few kelvin (~5e-6 in n).
    assert WATER.index == pytest.approx(1.33299, abs=2e-5)
    assert WATER.temperature_c == 20.0 and WATER.wavelength_nm == 589.3
    # the same at the sodium D line with the default density of 20 deg C water and n_air ~ 1.00027
    assert refractive_index_water_iapws1997(0.58926) / 1.00027 == pytest.approx(1.33299, abs=5e-5)


def test_standard_air_index():
    # (n - 1)(550 nm) = 2.7783e-4 for standard air: Peck & Reeder (1972) as used in Bodhaine et al.
    # (1999) eq. 4 (the project reference list recomputes 2.7783e-4 with 360 ppm CO2 [X]; the CO2
    # scaling changes it by 9e-9).
    assert refractive_index_air_peck1972(0.55) - 1 == pytest.approx(2.7783e-4, abs=2e-8)
    assert N_AIR - 1 == pytest.approx(2.7783e-4, abs=1e-12)


def test_crown_glass_against_its_glass_code():
    # The six-digit glass code 517642 states n_d = 1.517 and V_d = 64.2 (common practice in
    # optical-glass catalogues: n_d - 1 and V_d x 10 in the digits). Fraunhofer d, F, C lines at
    # 587.5618, 486.1327 and 656.2725 nm.
    nd = refractive_index_crown_glass_sellmeier(0.5875618)
    nf = refractive_index_crown_glass_sellmeier(0.4861327)
    nc = refractive_index_crown_glass_sellmeier(0.6562725)
    assert round(nd, 3) == 1.517
    assert (nd - 1) / (nf - nc) == pytest.approx(64.2, abs=0.05)
    assert GLASS.index == pytest.approx(refractive_index_crown_glass_sellmeier(0.5893), abs=1e-12)


@pytest.mark.parametrize("lam, n", sorted(ICE_INDEX_WARREN2008.items()))
def test_ice_table_warren_brandt_2008(lam, n):
    # Warren & Brandt (2008), J. Geophys. Res. 113 D14220: the tabulated real index of ice.
    assert refractive_index_ice_warren2008(lam) == pytest.approx(n, abs=1e-12)


def test_ice_surface_from_warren_brandt_2008():
    # Warren & Brandt (2008): real index of ice 1.3097 at 590 nm (relative to vacuum); the surface
    # table divides by standard air.
    assert ICE.index * refractive_index_air_peck1972(0.590) == pytest.approx(1.3097, abs=1e-12)


def test_every_surface_names_its_source_and_conditions():
    from polarsky.registries import SURFACES

    assert list(SURFACES) == ["water", "glass", "ice"]
    for name in SURFACES:
        s = SURFACES[name]
        assert s.name == name and s.source and s.wavelength_nm and 1.2 < s.index < 1.7


def test_iapws_outside_its_range():
    with pytest.raises(InputError, match="outside the IAPWS R9-97 range"):
        refractive_index_water_iapws1997(1.5, 293.15, 998.0)
