"""``polarsky sky`` as a task: round trips on invented sky brackets rendered from the model.

The frames go through the project's bracket path (16-bit TIFF -> the Stokes estimate) before
the sky comparison, as a user's frames would.
"""

import json

import numpy as np
import pytest
import xarray as xr

from polarsky.errors import InputError, PolarskyWarning
from polarsky.geometry import make_lens
from polarsky.read.stokes_file import products_from_dataset
from polarsky.sky.skymap import SkyGeometry
from polarsky.options.syntax import parse_when
from polarsky.sky.sun import sun_position
from polarsky.synthetic.sky import render_sky_bracket, write_tiff_bracket
from polarsky.tasks.sky import run_sky
from polarsky.tasks.stokes import stokes_from_files
from tests.sky_scene import ANGLES, LAT, LON, PLACE, WHEN
from tests.sky_scene import bracket as _bracket
from tests.sky_scene import geom as _geom
from tests.sky_scene import products as _products


@pytest.fixture(scope="module")
def plain(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("plain")
    return _bracket(tmp, _geom())


REQUIRED = ["sun_azimuth_deg", "sun_elevation_deg", "dolp_max", "dolp_max_sigma", "rms_aolp_residual_deg",
            "rms_dolp_residual", "mad_aolp_residual_deg", "median_aolp_residual_deg", "sky_pixels", "fit_samples",
            "yaw_deg", "pitch_deg", "roll_deg", "polarizer", "dolp_max_bound", "model_title", "outputs"]


def test_round_trip_known_orientation(plain, tmp_path):
    res = run_sky(plain, tmp_path / "out", hfov_deg=70, yaw_deg=10, pitch_deg=25, roll_deg=4, pictures=False, **PLACE)
    for k in REQUIRED:
        assert k in res
    assert res["dolp_max"] == pytest.approx(0.75, abs=0.01)
    assert 0 < res["dolp_max_sigma"] < 0.01
    assert res["dolp_max_bound"] == pytest.approx(0.94571, abs=1e-5)  # Young (1980) rho = 0.0279
    assert res["rms_aolp_residual_deg"] < 1.5 and res["rms_dolp_residual"] < 0.03
    assert res["sky_pixels"] > 0.5 * 64 * 48
    assert res["polarizer"] == "front" and res["time_source"] == "option"
    on_disk = json.loads((tmp_path / "out" / "sky.json").read_text())
    assert on_disk["dolp_max"] == res["dolp_max"]
    with xr.open_dataset(tmp_path / "out" / "sky.nc", engine="h5netcdf") as ds:
        for v in ("dolp_model", "aolp_model", "dolp_residual", "aolp_residual", "scattering_angle", "elevation",
                  "sky_mask_reason"):
            assert v in ds and "units" in ds[v].attrs
        assert ds["dolp_model"].dims == ("channel", "y", "x")
        assert ds["dolp_model"].dtype == np.float32


def test_pictures_are_written(plain, tmp_path):
    res = run_sky(plain, tmp_path / "pic", hfov_deg=70, yaw_deg=10, pitch_deg=25, roll_deg=4, **PLACE)
    for name in ("sky_aolp_observed.png", "sky_aolp_model.png", "sky_dolp_observed.png", "sky_dolp_model.png",
                 "sky_aolp_residual.png", "sky_dolp_residual.png", "sky_mask.png"):
        assert name in res["outputs"]
        assert (tmp_path / "pic" / name).stat().st_size > 1000
    assert [p.name for p in (tmp_path / "pic").iterdir() if p.name.startswith(".")] == [".polarsky-run.json"]
    assert res["outputs"] == sorted(p.name for p in (tmp_path / "pic").iterdir() if not p.name.startswith("."))


def test_wrong_orientation_shows_in_the_residuals(plain, tmp_path):
    res = run_sky(plain, tmp_path / "o", hfov_deg=70, yaw_deg=30, pitch_deg=25, roll_deg=4, pictures=False, **PLACE)
    assert res["rms_aolp_residual_deg"] > 5


def test_solve_yaw(plain, tmp_path):
    res = run_sky(plain, tmp_path / "s", hfov_deg=70, yaw_deg=60, pitch_deg=25, roll_deg=4, solve="yaw",
                  pictures=False, **PLACE)
    assert res["yaw_deg"] == pytest.approx(10.0, abs=0.3)
    assert res["orientation"]["source"] == "solved"
    assert 0 < res["yaw_sigma_deg"] < 0.3
    assert res["orientation"]["correlation"] == [[1.0]]


def test_solve_pitch_and_roll_with_correlation(plain, tmp_path):
    # the pattern has an upside-down twin (the sky's symmetry); the one nearest the start is kept
    with pytest.warns(PolarskyWarning, match="fits equally well at another orientation"):
        res = run_sky(plain, tmp_path / "s2", hfov_deg=70, yaw_deg=10, pitch_deg=0, roll_deg=0, solve="pitch,roll",
                  pictures=False, **PLACE)
    assert res["pitch_deg"] == pytest.approx(25.0, abs=0.3)
    assert res["roll_deg"] == pytest.approx(4.0, abs=0.3)
    corr = np.array(res["orientation"]["correlation"])
    assert corr.shape == (2, 2) and abs(corr[0, 1]) < 1


def test_solve_all_three_warns_about_the_sun_axis_symmetry(plain, tmp_path):
    with pytest.warns(PolarskyWarning, match="cannot all be fixed"):
        res = run_sky(plain, tmp_path / "s3", hfov_deg=70, yaw_deg=10, pitch_deg=25, roll_deg=4,
                      solve="yaw,pitch,roll", pictures=False, **PLACE)
    assert res["orientation"]["degenerate"] is True
    assert res["yaw_sigma_deg"] is None


def test_little_sky_structure_warns(tmp_path):
    import imageio.v3 as iio

    prods = _products(_geom(), noise_sigma=0.05)
    mask = np.zeros((48, 64), np.uint8)
    mask[20:28, 30:38] = 255
    iio.imwrite(tmp_path / "m.png", mask)
    with pytest.warns(PolarskyWarning, match="too little sky structure|only .* sky pixels"):
        run_sky([], tmp_path / "w", stokes=prods, hfov_deg=70, yaw_deg=15, pitch_deg=25, roll_deg=4, solve="yaw",
                sky_mask=tmp_path / "m.png", pictures=False, **PLACE)


def test_sky_mask_limits_the_fit(plain, tmp_path):
    import imageio.v3 as iio

    mask = np.zeros((48, 64), np.uint8)
    mask[:, :32] = 1
    iio.imwrite(tmp_path / "half.png", mask)
    res = run_sky(plain, tmp_path / "m", hfov_deg=70, yaw_deg=10, pitch_deg=25, roll_deg=4,
                  sky_mask=tmp_path / "half.png", pictures=False, **PLACE)
    assert res["sky_pixels"] <= 32 * 48
    assert res["mask_counts"]["excluded by --sky-mask"] > 0


def test_sky_mask_of_wrong_size(plain, tmp_path):
    import imageio.v3 as iio

    iio.imwrite(tmp_path / "small.png", np.ones((10, 10), np.uint8))
    with pytest.raises(InputError, match="--sky-mask mask .*small.png is 10x10 but the frames are 64x48"):
        run_sky(plain, tmp_path / "x", hfov_deg=70, sky_mask=tmp_path / "small.png", pictures=False, **PLACE)
    assert not (tmp_path / "x" / "sky.json").exists()


def test_below_horizon_is_never_sky(plain, tmp_path):
    res = run_sky(plain, tmp_path / "h", hfov_deg=70, yaw_deg=10, pitch_deg=25, roll_deg=4, pictures=False, **PLACE)
    with xr.open_dataset(tmp_path / "h" / "sky.nc", engine="h5netcdf") as ds:
        used = ds["sky_mask_reason"].values == 0
        assert np.all(ds["elevation"].values[used] > 0)
    assert res["mask_counts"]["below the horizon"] > 0


def test_clouds_do_not_pull_the_fit(tmp_path):
    # bright unpolarized blobs over ~15 % of the sky; the robust loss keeps dolp_max
    g = _geom()
    v, u = np.mgrid[0:48, 0:64]
    clouds = ((u - 45) ** 2 + (v - 12) ** 2 < 80) | ((u - 15) ** 2 + (v - 20) ** 2 < 50)
    files = _bracket(tmp_path, g, clouds=clouds)
    res = run_sky(files, tmp_path / "c", hfov_deg=70, yaw_deg=10, pitch_deg=25, roll_deg=4, pictures=False, **PLACE)
    assert res["dolp_max"] == pytest.approx(0.75, abs=0.02)


def test_sensor_placement_round_trip_fisheye(tmp_path):
    lens = make_lens("fisheye-equidistant", 64, 64, fov_deg=180)
    g = _geom(yaw=30, pitch=80, roll=0, lens=lens, placement="sensor")
    frames = render_sky_bracket(g, ANGLES, noise_sigma=0.002)
    ds = stokes_from_files([str(p) for p in write_tiff_bracket(tmp_path / "f", frames, ANGLES)])
    prods = products_from_dataset(ds)
    kw = dict(stokes=prods, lens="fisheye-equidistant", fov_deg=180, yaw_deg=30, pitch_deg=80, roll_deg=0,
              pictures=False, **PLACE)
    right = run_sky([], tmp_path / "r", polarizer="sensor", **kw)
    wrong = run_sky([], tmp_path / "w", polarizer="front", **kw)
    assert right["polarizer"] == "sensor" and right["mad_aolp_residual_deg"] < 1.0
    assert wrong["mad_aolp_residual_deg"] > 2 * right["mad_aolp_residual_deg"]


def test_colour_bracket_per_channel_fit(tmp_path):
    files = _bracket(tmp_path, _geom(), channels=3)
    res = run_sky(files, tmp_path / "rgb", hfov_deg=70, yaw_deg=10, pitch_deg=25, roll_deg=4, pictures=False, **PLACE)
    assert [c["channel"] for c in res["channels"]] == ["R", "G", "B"]
    for c in res["channels"]:
        assert c["dolp_max"] == pytest.approx(0.75, abs=0.01)


def test_manifest_only(plain, tmp_path):
    man = tmp_path / "m.csv"
    man.write_text("file,angle_deg\n" + "".join(f"{f},{a}\n" for f, a in zip(plain, ANGLES)))
    res = run_sky([], tmp_path / "man", manifest=str(man), hfov_deg=70, yaw_deg=10, pitch_deg=25, roll_deg=4,
                  pictures=False, **PLACE)
    assert res["dolp_max"] == pytest.approx(0.75, abs=0.01)


def test_neutral_point_model_fits_a_sky_with_an_arago_point(tmp_path):
    # an invented evening sky rendered with the neutral-point model (Berry et al. 2004): the
    # camera looks at the antisolar side, where the Arago point sits ~20 deg above the antisun
    from polarsky.core.stokes import dolp_aolp
    from polarsky.synthetic.sky import render_sky_stokes

    when = "2024-06-21T20:00:00+02:00"
    sun = sun_position(parse_when(when), LAT, LON)
    lens = make_lens("pinhole", 64, 48, hfov_deg=80)
    g = SkyGeometry(lens, (sun["azimuth_deg"] + 180) % 360, 20.0, 0.0, sun["azimuth_deg"], sun["elevation_deg"])
    s = render_sky_stokes(g, model="neutral-points")
    d, a = dolp_aolp(s)
    prods = {"S": s[:, None], "dolp": d[None], "aolp": a[None], "valid": np.isfinite(d)[None], "channels": ["L"],
             "attrs": {}}
    kw = dict(stokes=prods, when=when, lat=LAT, lon=LON, hfov_deg=80, yaw_deg=g.yaw_deg, pitch_deg=20.0,
              roll_deg=0.0, pictures=False, sun_mask_deg=5.0)
    bdl = run_sky([], tmp_path / "n", model="neutral-points", **kw)
    ray = run_sky([], tmp_path / "r", model="rayleigh", **kw)
    assert bdl["model"] == "neutral-points" and bdl["neutral_point_deg"] == pytest.approx(20.0)
    assert bdl["rms_aolp_residual_deg"] < 0.1 < ray["rms_aolp_residual_deg"]


def test_time_and_place_from_exif_of_jpeg_frames(tmp_path):
    from PIL import Image
    from PIL.TiffImagePlugin import IFDRational

    frames = render_sky_bracket(_geom(), ANGLES)
    paths = []
    for k, a in enumerate(ANGLES):
        lin = np.clip(frames[k, 0], 0, 1)
        srgb = np.where(lin <= 0.0031308, 12.92 * lin, 1.055 * lin ** (1 / 2.4) - 0.055)  # IEC 61966-2-1
        img = Image.fromarray(np.round(srgb * 255).astype(np.uint8))
        ex = Image.Exif()
        e = ex.get_ifd(0x8769)
        e[0x9003], e[0x9011] = "2024:06:21 17:30:00", "+02:00"
        g = ex.get_ifd(0x8825)
        g[1], g[2], g[3], g[4] = "N", (47.0, 0.0, 0.0), "E", (8.0, 0.0, 0.0)
        g[5], g[6] = b"\x00", IFDRational(400, 1)
        p = tmp_path / f"sky_{a:03d}deg.jpg"
        img.save(p, exif=ex, quality=98)
        paths.append(str(p))
    # transfer given: the frames are sRGB-encoded here (no note on an assumed curve)
    res = run_sky(paths, tmp_path / "e", hfov_deg=70, yaw_deg=10, pitch_deg=25, roll_deg=4, pictures=False,
                  transfer="srgb")
    assert res["time_source"] == "exif" and res["place_source"] == "exif"
    assert res["altitude_m"] == pytest.approx(400.0)
    ref = sun_position(parse_when(WHEN), LAT, LON, altitude_m=400.0)
    assert res["sun_azimuth_deg"] == pytest.approx(ref["azimuth_deg"], abs=1e-9)
    assert res["rms_aolp_residual_deg"] < 3.0


def test_unknown_option_is_named(plain, tmp_path):
    with pytest.raises(InputError, match="unknown setting 'hfov'"):
        run_sky(plain, tmp_path / "u", hfov=70, **PLACE)


def test_focal_length_from_exif_35mm_equivalent(tmp_path):
    # CIPA DC-008: the 35 mm equivalent focal length refers to the 43.27 mm diagonal
    from PIL import Image

    frames = render_sky_bracket(_geom(), ANGLES)
    paths = []
    for k, a in enumerate(ANGLES):
        img = Image.fromarray(np.round(np.clip(frames[k, 0], 0, 1) ** (1 / 2.2) * 255).astype(np.uint8))
        ex = Image.Exif()
        ex.get_ifd(0x8769)[0xA405] = 28
        p = tmp_path / f"f_{a:03d}deg.jpg"
        img.save(p, exif=ex, quality=95)
        paths.append(str(p))
    res = run_sky(paths, tmp_path / "f", yaw_deg=10, pitch_deg=25, roll_deg=4, pictures=False, transfer="srgb",
                  **PLACE)
    assert res["focal_source"] == "exif FocalLengthIn35mmFilm"
    assert res["lens"]["focal_px"] == pytest.approx(28 * np.hypot(64, 48) / 43.2666)
