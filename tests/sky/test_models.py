"""Single-scattering model: closed forms (REFERENCES 2.1, 2.2) and the model maps."""

import numpy as np
import pytest

from polarsky.geometry import make_lens
from polarsky.registries import SKY_MODELS
from polarsky.sky.models import get_model
from polarsky.sky.rayleigh import (RHO_AIR_YOUNG1980, dolp_max_bound, rayleigh_dolp,
                                   rayleigh_dolp_depolarized)
from polarsky.sky.skymap import SkyGeometry, model_maps
from polarsky.errors import InputError

# REFERENCES 2.1 [X, closed forms]: P = sin^2 g / (1 + cos^2 g); and the rho form
# sin^2 g / (1 + cos^2 g + 2 rho/(1 - rho)) (Chandrasekhar 1950; rho = 0.0279 Young 1980).
TABLE = [(0, 0.0, 0.0), (30, 1 / 7, 0.138320), (45, 1 / 3, 0.321048), (60, 0.6, 0.573657), (90, 1.0, 0.945715),
         (120, 0.6, 0.573657), (135, 1 / 3, 0.321048), (150, 1 / 7, 0.138320), (180, 0.0, 0.0)]


@pytest.mark.parametrize("gamma,ideal,depol", TABLE)
def test_rayleigh_dolp_closed_forms(gamma, ideal, depol):
    c = np.cos(np.deg2rad(gamma))
    assert float(rayleigh_dolp(c)) == pytest.approx(ideal, abs=1e-12)
    assert float(rayleigh_dolp_depolarized(c, 0.0279)) == pytest.approx(depol, abs=1e-6)


def test_depolarization_bound_young1980():
    # Young (1980), Appl. Opt. 19, 3427: rho(air) = 0.0279 -> P_max = (1 - rho)/(1 + rho) = 0.94571
    assert RHO_AIR_YOUNG1980 == 0.0279
    assert dolp_max_bound() == pytest.approx(0.94571, abs=1e-5)
    assert dolp_max_bound() == pytest.approx(float(rayleigh_dolp_depolarized(0.0)), abs=1e-12)
    # Hansen & Travis (1974) rho = 0.031 -> 0.93986 (REFERENCES 2.2)
    assert dolp_max_bound(0.031) == pytest.approx(0.93986, abs=1e-5)


def test_dtype_is_kept():
    c = np.linspace(-1, 1, 5, dtype=np.float32)
    assert rayleigh_dolp(c, 0.8).dtype == np.float32


def _wide_geom():
    lens = make_lens("fisheye-equidistant", 181, 181, fov_deg=360)  # the full sphere
    return SkyGeometry(lens, 0.0, 90.0, 0.0, 135.0, 30.0, "front")


def test_model_maximum_at_90_degrees_and_zeros_toward_sun_and_antisun():
    m = model_maps(_wide_geom(), get_model("rayleigh"), 0.8, dtype=np.float64)
    ok = m["inside"]
    d, g = m["dolp"][ok], m["scattering_angle"][ok]
    np.testing.assert_allclose(d, 0.8 * np.sin(np.deg2rad(g)) ** 2 / (1 + np.cos(np.deg2rad(g)) ** 2), atol=1e-9)
    assert abs(g[np.argmax(d)] - 90.0) < 2.0
    assert d[np.argmin(np.abs(g))] < 1e-3 and d[np.argmin(np.abs(g - 180))] < 1e-3
    assert np.all(d[np.abs(g - 90) < 1] > 0.79)


def test_model_maps_dtype_and_invalid_pixels():
    lens = make_lens("fisheye-equisolid", 64, 48, fov_deg=180)
    m = model_maps(SkyGeometry(lens, 0, 60, 0, 100, 20), get_model("rayleigh"), 0.7)
    assert m["dolp"].dtype == np.float32 and m["aolp"].dtype == np.float32
    assert np.isnan(m["dolp"][0, 0]) and not m["inside"][0, 0] and not m["up"][0, 0]
    a = m["aolp"][m["inside"]]
    assert np.all((a >= 0) & (a < 180))


def test_pinhole_fast_aolp_path_equals_direct_formula():
    lens = make_lens("pinhole", 64, 48, hfov_deg=75)
    g = SkyGeometry(lens, 210, 35, 12, 95, 15, "front")
    m32 = model_maps(g, get_model("rayleigh"), 1.0, want=("aolp",))["aolp"]
    m64 = model_maps(g, get_model("rayleigh"), 1.0, dtype=np.float64, want=("aolp",))["aolp"]
    v, u = np.mgrid[0:48, 0:64].astype(float)
    ray = np.stack([(u - lens.cx) / lens.focal_px, (v - lens.cy) / lens.focal_px, np.ones_like(u)])
    s = g.sun_cam
    e = np.cross(s[:, None, None], ray, axis=0)
    ref = np.rad2deg(np.arctan2(-e[1], e[0])) % 180
    for got in (m32, m64):
        d = (got - ref + 90) % 180 - 90
        assert np.max(np.abs(d)) < 2e-3


def test_horizon_is_never_sky():
    lens = make_lens("pinhole", 64, 48, hfov_deg=60)
    m = model_maps(SkyGeometry(lens, 0, 0, 0, 100, 20), get_model("rayleigh"))
    np.testing.assert_array_equal(m["up"], m["elevation"] > 0)
    assert m["up"][0].all() and not m["up"][-1].any()


def test_model_registry():
    assert "rayleigh" in SKY_MODELS
    with pytest.raises(InputError, match="--model 'nope' is not a known sky model; choose one of rayleigh"):
        get_model("nope")


# ---- Berry, Dennis & Lee (2004) neutral-point model ---------------------------------------
def _sky(model, delta=20.0, sun_el=30.0):
    lens = make_lens("fisheye-equidistant", 201, 201, fov_deg=360)
    g = SkyGeometry(lens, 0.0, 90.0, 0.0, 135.0, sun_el, "front")
    return g, model_maps(g, get_model(model, **({"neutral_point_deg": delta} if model != "rayleigh" else {})),
                         1.0, dtype=np.float64)


def test_neutral_points_reduce_to_rayleigh_without_splitting():
    # Berry, Dennis & Lee (2004), New J. Phys. 6, 162: the singularity model tends to the
    # Rayleigh pattern w_R as the neutral points merge into the sun and antisun
    _, a = _sky("rayleigh")
    _, b = _sky("neutral-points", delta=0.0)
    ok = a["inside"]
    np.testing.assert_allclose(((a["aolp"] - b["aolp"] + 90) % 180 - 90)[ok], 0, atol=1e-7)
    np.testing.assert_allclose(a["dolp"][ok], b["dolp"][ok], atol=1e-9)


def _at(geom, az, el, model="neutral-points", delta=20.0):
    from polarsky.geometry import enu_from_az_el
    from polarsky.sky.skymap import model_at_rays

    v = geom.rotation.T @ enu_from_az_el(az, el)
    m = get_model(model, **({"neutral_point_deg": delta} if model != "rayleigh" else {}))
    return model_at_rays(m, geom.sun_cam, geom.up_cam, tuple(np.atleast_1d(c) for c in v), "front",
                         want=("shape", "aolp"))


@pytest.mark.parametrize("name,az,el", [("Babinet", 135.0, 50.0), ("Brewster", 135.0, 10.0),
                                        ("Arago", 315.0, -10.0), ("fourth", 315.0, -50.0)])
def test_neutral_points_are_zeros_of_index_one_half(name, az, el):
    # the four neutral points (Berry et al. 2004; AMS Glossary 'Arago point'): 20 deg above and
    # below the sun (elevation 30) and the antisun (elevation -30) on the solar vertical
    g, _ = _sky("neutral-points")
    assert _at(g, az, el)["shape"][0] < 1e-9
    assert _at(g, az, el, model="rayleigh")["shape"][0] > 0.05  # sin^2 20 / (1 + cos^2 20) = 0.062
    # the E-line field turns by half a turn around the point: index +1/2
    t = np.linspace(0, 2 * np.pi, 73)
    r = 2.0
    ring = [_at(g, az + r * np.cos(u) / np.cos(np.deg2rad(el)), el + r * np.sin(u))["aolp"][0] for u in t]
    turns = np.sum((np.diff(np.unwrap(np.deg2rad(ring) * 2)) / 2)) / (2 * np.pi)
    assert abs(turns) == pytest.approx(0.5, abs=0.02)


@pytest.mark.parametrize("placement", ["front", "sensor"])
@pytest.mark.parametrize("want", [("dolp", "aolp", "up"),
                                  ("dolp", "aolp", "scattering_angle", "elevation", "azimuth", "inside", "up")])
def test_compiled_pinhole_kernel_matches_numpy_reference(placement, want):
    lens = make_lens("pinhole", 64, 48, hfov_deg=80)
    g = SkyGeometry(lens, 250.0, 35.0, -8.0, 200.0, 30.0, placement)
    fast = model_maps(g, get_model("rayleigh"), 0.7, want=want)
    ref = model_maps(g, get_model("rayleigh"), 0.7, want=want, engine="numpy", dtype=np.float64)
    for k in want:
        d = fast[k].astype(float) - ref[k].astype(float)
        if k == "aolp":
            d = (d + 90) % 180 - 90
        if k == "azimuth":
            d = (d + 180) % 360 - 180
        assert np.max(np.abs(d)) < 1e-4, k
        assert fast[k].dtype == (bool if k in ("up", "inside") else np.float32)
