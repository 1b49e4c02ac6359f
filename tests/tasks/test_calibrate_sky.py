"""``polarsky calibrate sky`` as a task: analyzer angle offsets from invented clear-sky brackets.

The brackets are rendered from the model with a known analyzer offset and go through the
project's bracket path; the calibration folder is then applied to the same frames.
"""

import json

import pytest

from polarsky.errors import InputError
from polarsky.geometry import make_lens
from polarsky.read.calibration_file import read_calibration
from polarsky.tasks.calibrate_sky import run_calibrate_sky, split_brackets
from polarsky.tasks.sky import run_sky
from tests.sky_scene import PLACE
from tests.sky_scene import bracket as _bracket
from tests.sky_scene import geom as _geom


def test_calibration_round_trip_through_the_bracket_path(tmp_path):
    files = _bracket(tmp_path, _geom(), analyzer_offset_deg=3.0)
    geo = dict(hfov_deg=70, yaw_deg=10, pitch_deg=25, roll_deg=4, **PLACE)
    before = run_sky(files, tmp_path / "before", pictures=False, **geo)
    assert before["median_aolp_residual_deg"] == pytest.approx(-3.0, abs=0.3)
    res = run_calibrate_sky(files, tmp_path / "cal", **geo)
    assert res["angle_offset_deg"][0] == pytest.approx(3.0, abs=0.1)
    assert 0 < res["angle_offset_sigma_deg"][0] < 0.1
    assert res["calibration_file"] == str(tmp_path / "cal" / "calibration.nc")
    on_disk = json.loads((tmp_path / "cal" / "calibration.json").read_text())
    assert on_disk["angle_offset_deg"] == res["angle_offset_deg"]
    assert on_disk["outputs"] == ["calibration.json", "calibration.nc"]
    cal = read_calibration(tmp_path / "cal")
    assert cal.kind == "sky" and cal.angle_offset_deg.shape == (1,)
    assert cal.diattenuation is None and "angle_offset_deg" in cal.uncertainty
    import netCDF4

    with netCDF4.Dataset(tmp_path / "cal" / "calibration.nc") as f:  # glossary: <q>_sigma[_<unit>]
        assert "angle_offset_sigma_deg" in f.variables and f["angle_offset_sigma_deg"].units == "degree"
    after = run_sky(files, tmp_path / "a", calibration=str(tmp_path / "cal"), pictures=False, **geo)
    assert after["rms_aolp_residual_deg"] < 1.5 < before["rms_aolp_residual_deg"]


def test_calibration_refuses_offset_roll_tie(tmp_path):
    files = _bracket(tmp_path, _geom(), analyzer_offset_deg=3.0)
    with pytest.raises(InputError, match="cannot be told apart .* no calibration file was written"):
        run_calibrate_sky(files, tmp_path / "cal", hfov_deg=70, yaw_deg=10, pitch_deg=25, roll_deg=4,
                          solve="roll", **PLACE)
    assert not (tmp_path / "cal").exists()


def test_calibration_wide_field_separates_roll(tmp_path):
    lens = make_lens("fisheye-equidistant", 64, 64, fov_deg=180)
    files = _bracket(tmp_path, _geom(yaw=30, pitch=70, roll=6, lens=lens), analyzer_offset_deg=-2.0)
    res = run_calibrate_sky(files, tmp_path / "cal", lens="fisheye-equidistant", fov_deg=180, yaw_deg=30,
                            pitch_deg=70, roll_deg=0, solve="roll", **PLACE)
    assert res["angle_offset_deg"][0] == pytest.approx(-2.0, abs=0.3)
    assert res["poses"][0]["roll_deg"] == pytest.approx(6.0, abs=0.3)


def test_calibration_several_brackets_and_diattenuation(tmp_path):
    a = _bracket(tmp_path, _geom(yaw=10), name="a", analyzer_offset_deg=1.5, diattenuation=0.9)
    b = _bracket(tmp_path, _geom(yaw=150, pitch=40, roll=0), name="b", analyzer_offset_deg=1.5, diattenuation=0.9)
    res = run_calibrate_sky(a + b, tmp_path / "cal", bracket_size=4, pose=["10,25,4", "150,40,0"],
                            reference_dolp_max=0.75, hfov_deg=70, **PLACE)
    assert res["brackets"] == 2
    assert res["angle_offset_deg"][0] == pytest.approx(1.5, abs=0.1)
    assert res["diattenuation"][0] == pytest.approx(0.9, abs=0.02)


def test_split_brackets_errors():
    with pytest.raises(InputError, match="do not split into brackets of 4"):
        split_brackets(["a", "b", "c", "d", "e"], 4)
    with pytest.raises(InputError, match="too small"):
        split_brackets(["a", "b"], 2)
    assert split_brackets(["x.nc", "y.nc"], None) == [["x.nc"], ["y.nc"]]


def test_pose_count_must_match(tmp_path):
    with pytest.raises(InputError, match="2 --pose values for 1 bracket"):
        run_calibrate_sky(["a_000deg.tif"], tmp_path / "c", pose=[(0, 0, 0), (1, 1, 1)], **PLACE)


def test_calibration_is_absolute_when_the_estimate_used_an_offset(tmp_path):
    # frames made with a true offset of 3 deg, estimated with --angle-offset 1: the file must
    # still hold 3 (relative to the nominal angles), not the 2 that remain
    files = _bracket(tmp_path, _geom(), analyzer_offset_deg=3.0)
    res = run_calibrate_sky(files, tmp_path / "cal", angle_offset=1.0, hfov_deg=70, yaw_deg=10,
                            pitch_deg=25, roll_deg=4, **PLACE)
    assert res["offset_already_applied_deg"] == [pytest.approx(1.0, abs=1e-6)]
    assert res["angle_offset_deg"][0] == pytest.approx(3.0, abs=0.1)
