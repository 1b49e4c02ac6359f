"""E-vector to image AoLP in both polarizer placements (CONVENTIONS.md; REFERENCES 2.4)."""

import numpy as np
import pytest

from polarsky.geometry import camera_to_world, enu_from_az_el, image_aolp_from_evector, make_lens
from polarsky.sky.models import get_model
from polarsky.sky.rayleigh import rayleigh_evector
from polarsky.sky.skymap import SkyGeometry, model_at_rays, model_maps

RNG = np.random.default_rng(3)


def _unit(v):
    return v / np.linalg.norm(v, axis=0)


def test_placements_agree_on_the_optical_axis():
    ray = np.array([[0.0], [0.0], [1.0]])
    for _ in range(20):
        e = np.cross(ray[:, 0], RNG.normal(size=3))[:, None]
        assert image_aolp_from_evector(e, ray, "front")[0] == pytest.approx(image_aolp_from_evector(e, ray, "sensor")[0],
                                                                           abs=1e-9)


def test_front_aolp_is_angle_of_projection_on_x_up_plane():
    e = np.array([[1.0], [-1.0], [0.3]])  # image x right, y down: (1, up 1) -> 45 deg
    assert image_aolp_from_evector(e, np.array([[0.1], [0.2], [1.0]]), "front")[0] == pytest.approx(45.0)


def test_placements_differ_off_axis():
    ray = _unit(np.array([[0.6], [0.5], [1.0]]))
    e = np.cross(ray[:, 0], [0.3, -1.0, 0.2])[:, None]
    a = image_aolp_from_evector(e, ray, "front")[0]
    b = image_aolp_from_evector(e, ray, "sensor")[0]
    assert abs(((a - b) + 90) % 180 - 90) > 0.5


def test_front_pinhole_evector_perpendicular_to_line_toward_sun():
    # Rayleigh rule (REFERENCES 2.4: E ~ s x v, perpendicular to the scattering plane).  A
    # pinhole maps the scattering plane's great circle to the straight image line through
    # the pixel and the sun's image point; the front-projected E must be perpendicular to it.
    lens = make_lens("pinhole", 64, 48, hfov_deg=80)
    geom = SkyGeometry(lens, 30.0, 20.0, 7.0, 10.0, 35.0, "front")
    su, sv, ok = lens.project(geom.sun_cam.reshape(3, 1))
    assert ok[0]
    m = model_maps(geom, get_model("rayleigh"), 1.0, dtype=np.float64, want=("aolp",))
    v, u = np.mgrid[0:48, 0:64].astype(float)
    line = np.arctan2(-(sv[0] - v), su[0] - u)  # image convention: up is -row
    diff = (np.deg2rad(m["aolp"]) - line) % np.pi
    far = np.hypot(u - su[0], v - sv[0]) > 3
    np.testing.assert_allclose(diff[far], np.pi / 2, atol=1e-7)


@pytest.mark.parametrize("lens_kw", [dict(name="pinhole", hfov_deg=90),
                                     dict(name="fisheye-equidistant", fov_deg=180),
                                     dict(name="fisheye-equisolid", fov_deg=200)])
def test_sensor_evector_perpendicular_to_scattering_plane(lens_kw):
    # In the sensor placement the image shows E's meridional/sagittal components as radial/
    # tangential ones; the scattering plane's direction at the pixel (toward the sun), written
    # the same way, must be perpendicular to the AoLP (REFERENCES 2.4 rule).
    lens_kw = dict(lens_kw)
    lens = make_lens(lens_kw.pop("name"), 64, 48, **lens_kw)
    geom = SkyGeometry(lens, 120.0, 40.0, -5.0, 200.0, 25.0, "sensor")
    u = RNG.uniform(5, 58, 200)
    v = RNG.uniform(5, 42, 200)
    rays, inside = lens.rays_at(u, v)
    rays = np.stack(np.broadcast_arrays(*rays)).astype(float)
    q = model_at_rays(get_model("rayleigh"), geom.sun_cam, geom.up_cam, tuple(rays), "sensor", want=("aolp",))
    r = _unit(rays)
    s = geom.sun_cam[:, None]
    t = s - (s * r).sum(axis=0) * r  # tangent toward the sun at the view point
    phi = np.arctan2(r[1], r[0])
    th = np.arccos(r[2])
    em = np.stack([np.cos(th) * np.cos(phi), np.cos(th) * np.sin(phi), -np.sin(th)])
    es = np.stack([-np.sin(phi), np.cos(phi), np.zeros_like(phi)])
    a, b = (t * em).sum(0), (t * es).sum(0)
    dx, dy = a * np.cos(phi) - b * np.sin(phi), a * np.sin(phi) + b * np.cos(phi)
    sun_dir = np.arctan2(-dy, dx)
    diff = (np.deg2rad(q["aolp"]) - sun_dir) % np.pi
    np.testing.assert_allclose(diff[inside], np.pi / 2, atol=1e-7)


# REFERENCES.md 2.4 check cases [X]: angle of E from the local meridian e_theta toward e_phi
# (azimuth clockwise from north), mod 180 -- derived there from the rule E ~ s x v.
CASES = [((90, 0), (0, 0), 90.0), ((60, 0), (30, 0), 90.0), ((60, 0), (30, 180), 90.0),
         ((0, 0), (60, 45), 90.0), ((60, 0), (60, 90), 153.4349), ((30, 0), (60, 90), 123.6901),
         ((45, 0), (45, 90), 144.7356)]


@pytest.mark.parametrize("sun,view,chi", CASES)
def test_rayleigh_evector_meridian_angle_check_cases(sun, view, chi):
    s = enu_from_az_el(sun[1], 90 - sun[0])
    w = enu_from_az_el(view[1], 90 - view[0])
    e = np.array(rayleigh_evector(s, w))
    t, p = np.deg2rad(view)
    e_theta = np.array([np.cos(t) * np.sin(p), np.cos(t) * np.cos(p), -np.sin(t)])
    e_phi = np.array([np.cos(p), -np.sin(p), 0.0])
    got = np.rad2deg(np.arctan2(e @ e_phi, e @ e_theta)) % 180
    assert got == pytest.approx(chi, abs=1e-4)


@pytest.mark.parametrize("sun,view,chi", [c for c in CASES if c[1][0] > 0])
def test_zenith_fisheye_sensor_aolp_against_meridian_check_cases(sun, view, chi):
    # A fisheye looking at the zenith (pitch 90, yaw 0) with micro-polarizers: the image's
    # radial direction is the local meridian, so image AoLP - angle of the radial direction
    # (counter-clockwise as displayed) = chi of REFERENCES 2.4 (e_phi is clockwise from the
    # radial direction as displayed, because the image top points south).
    lens = make_lens("fisheye-equidistant", 64, 64, fov_deg=180)
    geom = SkyGeometry(lens, 0.0, 90.0, 0.0, sun[1], 90.0 - sun[0], "sensor")
    w = camera_to_world(0, 90, 0).T @ enu_from_az_el(view[1], 90 - view[0])
    u, v, ok = lens.project(w.reshape(3, 1))
    rays, _ = lens.rays_at(u, v)
    q = model_at_rays(get_model("rayleigh"), geom.sun_cam, geom.up_cam, rays, "sensor", want=("aolp",))
    radial = np.rad2deg(np.arctan2(-(v - lens.circle_cy), u - lens.circle_cx))
    assert (q["aolp"][0] - radial[0]) % 180 == pytest.approx(chi, abs=1e-4)
