"""Every bad-input case of the sky code raises InputError with a message naming the fix."""

import numpy as np
import pytest
import xarray as xr

from polarsky.errors import InputError
from polarsky.geometry import make_lens
from polarsky.options.settings import Settings
from polarsky.read.stokes_file import products_from_dataset, read_stokes
from polarsky.sky.models import get_model
from polarsky.sky.orient import fit_orientation, sample_bracket
from polarsky.sky.skymap import SkyGeometry
from polarsky.options.syntax import parse_when
from polarsky.sky.sun import resolve_time_place, sun_position
from polarsky.tasks.calibrate_sky import fit_sky_calibration, split_brackets
from polarsky.tasks.sky import run_sky, stokes_products
from tests.sky_scene import PLACE
from tests.sky_scene import geom as _geom
from tests.sky_scene import products as _products

WHEN = parse_when("2024-06-21T12:00:00Z")


def test_bad_longitude_and_pressure():
    with pytest.raises(InputError, match="--lon 400"):
        sun_position(WHEN, 10.0, 400.0)
    with pytest.raises(InputError, match="--pressure-hpa -5"):
        sun_position(WHEN, 10.0, 10.0, pressure_hpa=-5)


def test_bad_altitude():
    with pytest.raises(InputError, match="--altitude-m nan"):
        resolve_time_place(when="2024-06-21T12:00:00Z", lat=1, lon=2, altitude_m=float("nan"))


def test_fisheye_fov_too_large():
    with pytest.raises(InputError, match="--fov-deg 400 is above 360"):
        make_lens("fisheye-equidistant", 64, 48, fov_deg=400)


@pytest.fixture(scope="module")
def prods():
    return _products(_geom(), noise_sigma=0.002)


@pytest.mark.parametrize("kw,match", [
    (dict(sun_mask_deg=95), "--sun-mask-deg 95"),
    (dict(polarizer="behind"), "--polarizer 'behind' is not one of front, sensor"),
    (dict(yaw_deg=float("nan")), "--yaw-deg must be a finite number, got nan"),
    (dict(lens="barrel"), "--lens 'barrel'"),
    (dict(model="mie"), "--model 'mie' is not a known sky model"),
])
def test_run_sky_bad_options(prods, tmp_path, kw, match):
    opts = dict(hfov_deg=70, pictures=False, **PLACE)
    opts.update(kw)
    with pytest.raises(InputError, match=match):
        run_sky([], tmp_path / "o", stokes=prods, **opts)


def test_unreadable_sky_mask(prods, tmp_path):
    bad = tmp_path / "m.png"
    bad.write_bytes(b"not a png")
    with pytest.raises(InputError, match="--sky-mask mask .*m.png cannot be decoded: .*; save the image again"):
        run_sky([], tmp_path / "o", stokes=prods, hfov_deg=70, sky_mask=bad, pictures=False, **PLACE)


def test_stokes_input_errors(tmp_path):
    with pytest.raises(InputError, match="no frames given"):
        stokes_products([], Settings())
    with pytest.raises(InputError, match="does not exist"):
        stokes_products([tmp_path / "nope_000deg.tif", tmp_path / "nope_060deg.tif", tmp_path / "nope_120deg.tif"],
                        Settings())
    junk = tmp_path / "junk.nc"
    junk.write_bytes(b"\x00" * 64)
    with pytest.raises(InputError, match="cannot be read as a Stokes result"):
        stokes_products([junk], Settings())
    with pytest.raises(InputError, match="does not exist"):
        read_stokes(tmp_path / "none.nc")


def test_dataset_without_stokes():
    ds = xr.Dataset({"S0": (("channel", "y", "x"), np.ones((1, 2, 2)))}, coords={"channel": ["L"]})
    with pytest.raises(InputError, match="lacks S1, S2"):
        products_from_dataset(ds)


def test_orientation_fit_needs_sky_and_angles(prods):
    g = _geom()
    few = np.zeros((48, 64), bool)
    few[0, :10] = True
    b = sample_bracket(g, prods["aolp"], prods["dolp"], few)
    with pytest.raises(InputError, match="only 10 usable sky pixels"):
        fit_orientation([b], get_model("rayleigh"), solve=("yaw",))
    with pytest.raises(InputError, match="nothing to fit"):
        fit_orientation([b], get_model("rayleigh"), solve=())


def test_calibration_bad_inputs(prods, tmp_path):
    with pytest.raises(InputError, match="--bracket-size does not apply"):
        split_brackets(["a.nc", "b.nc"], 4)
    with pytest.raises(InputError, match="--reference-dolp-max must lie in \\(0, 1\\], got 1.5"):
        Settings.from_options(dict(reference_dolp_max=1.5, hfov_deg=70, **PLACE))
    rgb = dict(prods, channels=["R"])
    settings = Settings.from_options(dict(hfov_deg=70, yaw_deg=10, pitch_deg=25, roll_deg=4, **PLACE))
    with pytest.raises(InputError, match="bracket 2 has channels R but bracket 1 has L"):
        fit_sky_calibration(None, settings, stokes=[prods, rgb])
    with pytest.raises(InputError, match="has no clear-sky pixels of the 50 a fit needs "
                                         "\\(3072 px below the horizon\\); check its orientation"):
        fit_sky_calibration(None, settings.replace({"pitch_deg": -60}), stokes=[prods])


def test_geometry_unknown_placement():
    from polarsky.geometry.polarizer import image_direction_from_evector

    lens = make_lens("pinhole", 8, 8, hfov_deg=40)
    SkyGeometry(lens, 0, 0, 0, 0, 10)
    with pytest.raises(ValueError, match="placement 'x'"):
        image_direction_from_evector((1, 0, 0), (0, 0, 1), "x")
