"""Sky planning against the sky model, the closed-form Rayleigh degree, Malus's law and advise on a bracket."""

from __future__ import annotations

import numpy as np
import pytest

from polarsky.errors import InputError
from polarsky.geometry import make_lens
from polarsky.options.syntax import parse_when
from polarsky.plan.radiance import CIE_CLEAR_SKY, UNIFORM
from polarsky.plan.sky import SkySetup, darkening_stops, plan_at
from polarsky.sky.models import get_model
from polarsky.sky.skymap import SkyGeometry, model_maps
from polarsky.sky.sun import sun_position

WHEN = "2026-06-21T19:10:00+02:00"   # the demo's invented site and evening
LAT, LON, ALT = 46.37, 9.84, 420.0
CAM = {"yaw_deg": 72.0, "pitch_deg": 28.0, "roll_deg": 2.5}
W, H = 96, 64


def sun_at(when=WHEN, lat=LAT, lon=LON):
    sun = sun_position(parse_when(when), lat, lon, altitude_m=ALT)
    return dict(sun, when=when)


def setup(**kw):
    args = dict(lens=make_lens("pinhole", W, H, hfov_deg=70.0), model=get_model("rayleigh"), placement="front",
                dolp_max=0.7, diattenuation=1.0, radiance=UNIFORM, **CAM)
    args.update(kw)
    return SkySetup(**args)


@pytest.fixture(scope="module")
def plan():
    return plan_at(setup(), sun_at())


def test_predicted_dolp_is_the_sky_model(plan):
    # The plan's DoLP and AoLP maps are those of the sky model 'polarsky sky' compares with, same geometry.
    sun = sun_at()
    geom = SkyGeometry(make_lens("pinhole", W, H, hfov_deg=70.0), *CAM.values(), sun["azimuth_deg"],
                       sun["elevation_deg"], "front")
    m = model_maps(geom, get_model("rayleigh"), 0.7,
                   want=("dolp", "aolp", "scattering_angle", "elevation", "inside", "up"))
    np.testing.assert_array_equal(plan.maps["dolp"], m["dolp"])
    np.testing.assert_array_equal(plan.maps["aolp"], m["aolp"])


def test_centre_dolp_is_rayleigh_closed_form(plan):
    # Single-scattering Rayleigh degree P = dmax sin^2(g) / (1 + cos^2(g)) (Chandrasekhar 1950;
    # project references 2.1: P(60) = 0.6, P(90) = 1 for dmax = 1) at the frame centre's scattering
    # angle; the map at the centre pixels agrees to the pixel's size.
    g = np.radians(plan.numbers["scattering_angle_center_deg"])
    p = 0.7 * np.sin(g) ** 2 / (1 + np.cos(g) ** 2)
    assert plan.numbers["dolp_center"] == pytest.approx(p, abs=1e-4)
    centre = plan.maps["dolp"][H // 2 - 1:H // 2 + 1, W // 2 - 1:W // 2 + 1]
    assert float(centre.mean()) == pytest.approx(p, abs=5e-3)


def test_darkening_is_malus():
    # Malus's law in Stokes form (Collett 2005, p. 12): light of DoLP P behind a filter crossed to its
    # E-vector passes (1 - P)/2, i.e. -log2(1 - P) stops below the mean over a turn; parallel: brighter.
    assert darkening_stops(0.5, 30.0, 120.0) == pytest.approx(1.0)
    assert darkening_stops(0.5, 30.0, 30.0) == pytest.approx(-np.log2(1.5))
    assert darkening_stops(0.6, 30.0, 120.0, diattenuation=0.5) == pytest.approx(-np.log2(0.7))


def test_statistics_follow_the_map(plan):
    n, m = plan.numbers, plan.maps
    sky = m["sky"]
    assert n["darkening_stops"] == pytest.approx(float(np.mean(m["darkening_stops"][sky])), abs=1e-4)
    assert n["darkening_stops_min"] <= n["darkening_stops"] <= n["darkening_stops_max"]
    # the recommended axis is perpendicular to the sky's mean E-vector (Collett 2005 p. 12)
    assert (n["best_angle_deg"] - n["sky_aolp_deg"]) % 180 == pytest.approx(90.0, abs=1e-3)
    # the darkest band lies 90 deg from the sun (Coulson 1988), on the sun's side (left) here
    t = n["darkening_stops_thirds"]
    assert t["left"] > t["right"] and n["unevenness_text"].startswith("the left third darkens")


def test_extinction_lowers_the_darkening(plan):
    real = plan_at(setup(diattenuation=29 / 31), sun_at()).numbers
    assert real["darkening_stops"] < plan.numbers["darkening_stops"]
    assert real["darkening_stops_ideal"] == pytest.approx(plan.numbers["darkening_stops"], abs=1e-9)
    assert plan.numbers["darkening_stops_examples"]["30"] == pytest.approx(real["darkening_stops"], abs=1e-9)


def test_region_plan():
    mask = np.zeros((H, W), bool)
    mask[:21, :32] = True
    n = plan_at(setup(region_mask=mask), sun_at()).numbers
    assert n["region_pixels"] == 32 * 21
    assert n["region_darkening_stops"] >= n["region_darkening_stops_at_best_angle"] - 1e-9


def _uniform_bracket(plan, folder, angles=(0, 45, 90, 135)):
    """A bracket of the plan's geometry rendered from the model with uniform sky radiance."""
    import tifffile

    p, psi = np.nan_to_num(plan.maps["dolp"]).astype(np.float64), np.radians(np.nan_to_num(plan.maps["aolp"]))
    folder.mkdir(parents=True, exist_ok=True)
    paths = []
    for a in angles:
        i = 0.5 * 0.6 * (1 + p * np.cos(2 * (np.radians(a) - psi)))
        path = folder / f"planbracket_{a:03d}deg.tif"
        tifffile.imwrite(path, np.clip(i * 65535 + 0.5, 1, 60000).astype(np.uint16))
        paths.append(path)
    return paths


def test_best_angle_matches_advise_on_a_rendered_bracket(plan, tmp_path):
    # The plan's recommended angle and total darkening against 'advise' (closed-form filter advice from
    # the Stokes estimate, Collett 2005) on a bracket rendered for the same geometry, the region being
    # the plan's sky part given as a mask image.
    import cv2

    from polarsky.tasks.advise import run_advise

    mask = tmp_path / "sky.png"
    cv2.imwrite(str(mask), plan.maps["sky"].astype(np.uint8) * 255)
    adv = run_advise(_uniform_bracket(plan, tmp_path / "b"), region=str(mask))
    assert adv["best_angle_deg"] == pytest.approx(plan.numbers["best_angle_deg"], abs=0.05)
    assert adv["reduction_stops"] == pytest.approx(plan.numbers["darkening_stops_total"], abs=2e-3)


def test_night_and_no_sky_are_refused():
    with pytest.raises(InputError, match="sun is below the horizon"):
        plan_at(setup(), sun_at("2026-06-21T23:30:00+02:00"))
    with pytest.raises(InputError, match="whole frame lies below the horizon"):
        plan_at(setup(lens=make_lens("pinhole", W, H, hfov_deg=40.0), pitch_deg=-60.0), sun_at())
    with pytest.raises(InputError, match="within 80 deg of the sun"):
        plan_at(setup(sun_mask_deg=80.0, yaw_deg=284.6, pitch_deg=19.0), sun_at())


def test_cie_clear_sky_changes_only_the_weighting(plan):
    b = plan_at(setup(radiance=CIE_CLEAR_SKY), sun_at())
    np.testing.assert_array_equal(plan.maps["dolp"], b.maps["dolp"])
    assert b.numbers["best_angle_deg"] != plan.numbers["best_angle_deg"]
    assert abs(plan.numbers["best_angle_deg"] - b.numbers["best_angle_deg"]) < 20
