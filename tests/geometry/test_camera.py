"""Orientation convention and lens models (CONVENTIONS.md, 'Camera and world geometry')."""

import numpy as np
import pytest

from polarsky.errors import InputError
from polarsky.geometry import az_el_from_enu, camera_to_world, enu_from_az_el, make_lens

X, Y, Z = np.eye(3)


@pytest.mark.parametrize("yaw,pitch", [(0, 0), (90, 0), (200, 35), (315, -20), (10, 89)])
def test_yaw_is_azimuth_and_pitch_is_elevation_of_the_optical_axis(yaw, pitch):
    az, el = az_el_from_enu(camera_to_world(yaw, pitch, 17.0) @ Z)
    assert el == pytest.approx(pitch, abs=1e-9)
    if pitch < 89.9:
        assert (az - yaw + 180) % 360 - 180 == pytest.approx(0, abs=1e-9)


def test_start_pose_level_north_x_east_y_down():
    r = camera_to_world(0, 0, 0)
    np.testing.assert_allclose(r @ X, [1, 0, 0], atol=1e-15)
    np.testing.assert_allclose(r @ Y, [0, 0, -1], atol=1e-15)
    np.testing.assert_allclose(r @ Z, [0, 1, 0], atol=1e-15)


@pytest.mark.parametrize("yaw,pitch", [(0, 30), (123, -10), (250, 60)])
def test_roll_zero_keeps_image_x_horizontal(yaw, pitch):
    assert (camera_to_world(yaw, pitch, 0) @ X)[2] == pytest.approx(0, abs=1e-15)


def test_looking_up_image_top_points_to_yaw_plus_180():
    for yaw in (0.0, 40.0, 270.0):
        top = camera_to_world(yaw, 90, 0) @ (-Y)
        az, el = az_el_from_enu(top)
        assert el == pytest.approx(0, abs=1e-9)
        assert (az - (yaw + 180)) % 360 == pytest.approx(0, abs=1e-9) or (az - (yaw + 180)) % 360 == pytest.approx(360)


def test_roll_clockwise_tilts_the_horizon_counter_clockwise_in_the_image():
    # roll +10: camera x axis (image right) goes down on the right side, seen from behind
    r = camera_to_world(0, 0, 10)
    assert (r @ X)[2] < 0  # image +x now points below the horizon
    # a horizontal world direction to the east-north seen in the image: its image
    # 'up' component (-y) is positive at the right => horizon line rises to the right (CCW)
    east = r.T @ np.array([1.0, 0.2, 0.0])
    assert east[0] > 0 and -east[1] > 0


def test_enu_round_trip():
    v = enu_from_az_el([10.0, 200.0], [5.0, -30.0])
    az, el = az_el_from_enu(v)
    np.testing.assert_allclose(az, [10, 200])
    np.testing.assert_allclose(el, [5, -30])


def test_pinhole_focal_from_hfov_and_mm():
    a = make_lens("pinhole", 64, 48, hfov_deg=90)
    assert a.focal_px == pytest.approx(32.0)
    b = make_lens("pinhole", 6000, 4000, focal_mm=24, sensor_width_mm=36)
    assert b.focal_px == pytest.approx(4000.0)
    assert make_lens("pinhole", 64, 48, focal_px=50).hfov_deg == pytest.approx(np.rad2deg(2 * np.arctan(0.64)))


def test_pinhole_principal_point_and_edge_rays():
    lens = make_lens("pinhole", 64, 48, hfov_deg=60)
    assert (lens.cx, lens.cy) == (31.5, 23.5)
    ray, inside = lens.rays_at(np.array([31.5, 31.5 + lens.focal_px]), np.array([23.5, 23.5]))
    ang = np.rad2deg(np.arctan2(ray[0], ray[2]))
    np.testing.assert_allclose(ang, [0, 45], atol=1e-12)
    assert inside.all()


@pytest.mark.parametrize("dist", [None, (0.1, -0.05, 0.001, 0.002), (0.05, 0.0, 0.0, 0.0, -0.01)])
def test_pinhole_project_inverts_rays(dist):
    lens = make_lens("pinhole", 64, 48, hfov_deg=70, distortion=dist)
    u, v = np.meshgrid(np.arange(0, 64, 7.0), np.arange(0, 48, 5.0))
    ray, _ = lens.rays_at(u, v)
    pu, pv, ok = lens.project(np.stack(np.broadcast_arrays(*ray)))
    assert ok.all()
    np.testing.assert_allclose(pu, u, atol=1e-3)
    np.testing.assert_allclose(pv, v, atol=1e-3)


def test_pinhole_behind_camera_does_not_project():
    lens = make_lens("pinhole", 64, 48, hfov_deg=70)
    assert not lens.project(np.array([[0.0], [0.0], [-1.0]]))[2][0]


@pytest.mark.parametrize("name,rfun", [("fisheye-equidistant", lambda f, t: f * t),
                                       ("fisheye-equisolid", lambda f, t: 2 * f * np.sin(t / 2))])
def test_fisheye_projections(name, rfun):
    # Kannala & Brandt (2006): equidistant r = f theta, equisolid r = 2 f sin(theta/2)
    lens = make_lens(name, 64, 48, fov_deg=180)
    assert lens.radius_px == 24.0
    theta = np.deg2rad([0.0, 30.0, 60.0, 90.0])
    vec = np.stack([np.sin(theta), np.zeros(4), np.cos(theta)])
    u, v, ok = lens.project(vec)
    np.testing.assert_allclose(u - lens.cx, rfun(lens.f, theta), atol=1e-9)
    np.testing.assert_allclose(u[-1] - lens.cx, 24.0, atol=1e-9)  # 90 deg lands on the circle
    ray, inside = lens.rays_at(u, v)
    ray = np.stack(np.broadcast_arrays(*ray))
    np.testing.assert_allclose(np.arccos(ray[2] / np.linalg.norm(ray, axis=0)), theta, atol=1e-9)


def test_fisheye_outside_circle_sees_nothing():
    lens = make_lens("fisheye-equidistant", 64, 48, fov_deg=180)
    _, inside = lens.rays(slice(0, 48))
    assert not inside[0, 0] and inside[24, 32]


def test_fisheye_custom_circle():
    lens = make_lens("fisheye-equisolid", 64, 48, fov_deg=150, circle_center_px=(30, 20), circle_radius_px=18)
    u, v, _ = lens.project(np.array([[0.0], [0.0], [1.0]]))
    assert (u[0], v[0]) == (30.0, 20.0)


@pytest.mark.parametrize("kw,match", [
    ({"name": "pinhole"}, "needs its focal length"),
    ({"name": "pinhole", "hfov_deg": -3}, "must be a positive"),
    ({"name": "pinhole", "hfov_deg": 190}, "below 180"),
    ({"name": "pinhole", "focal_px": 10, "distortion": [0.1, 0.2]}, "4, 5 or 8"),
    ({"name": "fisheye-equidistant"}, "needs --fov-deg"),
    ({"name": "fisheye-equisolid", "fov_deg": 180, "distortion": [0, 0, 0, 0]}, "pinhole only"),
    ({"name": "cylinder"}, "--lens .cylinder. is not a known lens model; choose one of pinhole"),
])
def test_bad_lens_options(kw, match):
    name = kw.pop("name")
    with pytest.raises(InputError, match=match):
        make_lens(name, 64, 48, **kw)


def test_pixel_viewing_directions_azimuth_elevation():
    from polarsky.sky.models import get_model
    from polarsky.sky.skymap import SkyGeometry, model_maps

    lens = make_lens("pinhole", 65, 49, hfov_deg=60)
    m = model_maps(SkyGeometry(lens, 200.0, 30.0, 0.0, 0.0, 10.0), get_model("rayleigh"), dtype=np.float64,
                   want=("azimuth", "elevation"))
    assert m["azimuth"][24, 32] == pytest.approx(200.0, abs=1e-9)  # the principal point looks along the axis
    assert m["elevation"][24, 32] == pytest.approx(30.0, abs=1e-9)
    assert m["elevation"][0, 32] > 30 > m["elevation"][-1, 32]  # row 0 is the top of the image
    assert m["azimuth"][24, -1] > 200 > m["azimuth"][24, 0]  # image right is clockwise (east of south-west)
