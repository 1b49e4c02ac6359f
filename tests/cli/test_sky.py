"""``polarsky sky`` and ``polarsky calibrate sky`` on the command line."""

import json
import subprocess
import sys

import pytest

from polarsky.cli.main import main
from polarsky.geometry import make_lens
from polarsky.read.calibration_file import read_calibration
from polarsky.sky.skymap import SkyGeometry
from polarsky.options.syntax import parse_when
from polarsky.sky.sun import sun_position
from polarsky.synthetic.sky import render_sky_bracket, write_tiff_bracket
WHEN = "2024-06-21T17:30:00+02:00"
GEO = ["--when", WHEN, "--lat", "47", "--lon", "8", "--hfov-deg", "70", "--yaw-deg", "10", "--pitch-deg", "25",
       "--roll-deg", "4"]


@pytest.fixture(scope="module")
def frames(tmp_path_factory):
    sun = sun_position(parse_when(WHEN), 47.0, 8.0)
    g = SkyGeometry(make_lens("pinhole", 64, 48, hfov_deg=70), 10, 25, 4, sun["azimuth_deg"], sun["elevation_deg"])
    i = render_sky_bracket(g, (0, 45, 90, 135), noise_sigma=0.002, analyzer_offset_deg=2.0)
    return [str(p) for p in write_tiff_bracket(tmp_path_factory.mktemp("cli"), i, (0, 45, 90, 135))]


@pytest.fixture(scope="module")
def stokes_nc(frames, tmp_path_factory):
    """The bracket's stokes.nc, made in-process (the subprocesses then skip the estimate)."""
    out = tmp_path_factory.mktemp("st")
    assert main(["stokes", *frames, "--out", str(out)]) == 0
    return str(out / "stokes.nc")


def test_sky_json_prints_one_object(frames, tmp_path, capsys):
    rc = main(["sky", *frames, *GEO, "--out", str(tmp_path / "o"), "--json", "--no-pictures"])
    out = capsys.readouterr().out
    assert rc == 0
    obj = json.loads(out)
    assert out.strip().count("\n") == 0
    for k in ("sun_azimuth_deg", "sun_elevation_deg", "dolp_max", "rms_aolp_residual_deg", "rms_dolp_residual", "sky_pixels",
              "yaw_deg", "pitch_deg", "roll_deg", "polarizer", "dolp_max_sigma", "caution"):
        assert k in obj
    assert obj["polarizer"] == "front"


def test_sky_human_output_has_caution(frames, tmp_path, capsys):
    rc = main(["sky", *frames, *GEO, "--out", str(tmp_path / "h"), "--no-pictures", "--solve", "yaw"])
    out = capsys.readouterr().out
    assert rc == 0
    assert "sun: azimuth" in out and "solved: yaw" in out and "Safety:" in out


def test_calibrate_sky_writes_cal_nc(stokes_nc, tmp_path, capsys):
    # (applying the file through the bracket path is tested in test_sky_fit.py)
    rc = main(["calibrate", "sky", stokes_nc, *GEO, "--out", str(tmp_path / "cal"), "--json"])
    obj = json.loads(capsys.readouterr().out)
    assert rc == 0 and (tmp_path / "cal" / "calibration.json").is_file()
    assert obj["angle_offset_deg"][0] == pytest.approx(2.0, abs=0.15)
    assert obj["outputs"] == ["calibration.json", "calibration.nc"]
    cal = read_calibration(tmp_path / "cal")
    assert cal.kind == "sky" and cal.attrs["method"].startswith("sky:")


@pytest.mark.parametrize("extra,match", [
    (["--when", "2024-06-21T17:30:00"], "no UTC offset"),
    (["--solve", "yaw,tilt"], "tilt not known"),
    (["--distortion", "0.1,0.2"], "4, 5 or 8"),
    (["--sky-mask", "/nonexistent/m.png"], "neither a box .* nor an existing mask image"),
    (["--pitch-deg", "120"], "must lie in \\[-90, 90\\]"),
    (["--circle-center-px", "1,2,3"], "must hold 2 numbers"),
])
def test_sky_bad_input_exit_2(frames, tmp_path, capsys, extra, match):
    rc = main(["sky", *frames, *GEO, *extra, "--out", str(tmp_path / "bad"), "--no-pictures"])
    err = capsys.readouterr().err
    assert rc == 2
    assert err.startswith("error: ") and err.count("\n") == 1
    import re

    assert re.search(match, err)
    assert not (tmp_path / "bad" / "sky.json").exists()


def test_sky_without_place_is_an_error(frames, tmp_path, capsys):
    rc = main(["sky", *frames, "--when", WHEN, "--hfov-deg", "70", "--out", str(tmp_path / "np")])
    assert rc == 2 and "place is unknown" in capsys.readouterr().err


def test_calibrate_bad_bracket_size(frames, tmp_path, capsys):
    rc = main(["calibrate", "sky", *frames, *GEO, "--bracket-size", "3", "--out", str(tmp_path / "c")])
    assert rc == 2 and "do not split" in capsys.readouterr().err


def test_calibrate_tie_is_reported(frames, tmp_path, capsys):
    rc = main(["calibrate", "sky", *frames, *GEO, "--solve", "roll", "--out", str(tmp_path / "c")])
    err = capsys.readouterr().err
    assert rc == 2 and "cannot be told apart" in err and not (tmp_path / "c").exists()


def test_sky_subprocess(stokes_nc, tmp_path):
    cmd = [sys.executable, "-m", "polarsky", "sky", stokes_nc, *GEO, "--out", str(tmp_path / "sp"), "--json",
           "--no-pictures"]
    p = subprocess.run(cmd, cwd=tmp_path, capture_output=True, text=True, timeout=120)
    assert p.returncode == 0, p.stderr
    assert json.loads(p.stdout)["sky_pixels"] > 0


def test_calibrate_sky_subprocess(stokes_nc, tmp_path):
    cmd = [sys.executable, "-m", "polarsky", "calibrate", "sky", stokes_nc, *GEO, "--out", str(tmp_path / "c")]
    p = subprocess.run(cmd, cwd=tmp_path, capture_output=True, text=True, timeout=120)
    assert p.returncode == 0, p.stderr
    assert "analyzer angle offset" in p.stdout and (tmp_path / "c" / "calibration.nc").is_file()


@pytest.fixture(scope="module")
def mosaic_frame(tmp_path_factory):
    """One invented raw frame of a mono polarization-mosaic camera, cell 90,45;135,0."""
    import numpy as np
    import tifffile

    sun = sun_position(parse_when(WHEN), 47.0, 8.0)
    g = SkyGeometry(make_lens("pinhole", 64, 48, hfov_deg=70), 10, 25, 4, sun["azimuth_deg"], sun["elevation_deg"],
                    "sensor")
    i = render_sky_bracket(g, (90, 45, 135, 0), noise_sigma=0.001, analyzer_offset_deg=1.5)[:, 0]
    raw = np.empty((48, 64))
    raw[0::2, 0::2], raw[0::2, 1::2] = i[0][0::2, 0::2], i[1][0::2, 1::2]
    raw[1::2, 0::2], raw[1::2, 1::2] = i[2][1::2, 0::2], i[3][1::2, 1::2]
    p = tmp_path_factory.mktemp("mosaic") / "raw.tif"
    tifffile.imwrite(p, np.clip(raw * 65535, 1, 65000).astype(np.uint16))
    return str(p)


def test_mosaic_frame_sky_and_calibration(mosaic_frame, tmp_path, capsys):
    mos = ["--mosaic", "90,45;135,0"]
    rc = main(["sky", mosaic_frame, *mos, *GEO, "--out", str(tmp_path / "s"), "--json", "--no-pictures"])
    res = json.loads(capsys.readouterr().out)
    assert rc == 0 and res["polarizer"] == "sensor"  # micro-polarizers sit on the sensor
    assert res["median_aolp_residual_deg"] == pytest.approx(-1.5, abs=0.3)
    rc = main(["calibrate", "sky", mosaic_frame, *mos, *GEO, "--out", str(tmp_path / "m"), "--json"])
    cal = json.loads(capsys.readouterr().out)
    assert rc == 0 and cal["angle_offset_deg"][0] == pytest.approx(1.5, abs=0.15)
    rc = main(["sky", mosaic_frame, *mos, "--calibration", str(tmp_path / "m"), *GEO, "--out", str(tmp_path / "s2"),
               "--json", "--no-pictures"])
    after = json.loads(capsys.readouterr().out)
    assert rc == 0 and abs(after["median_aolp_residual_deg"]) < 0.3


def test_mosaic_rejects_bracket_angles(mosaic_frame, tmp_path, capsys):
    rc = main(["sky", mosaic_frame, "--mosaic", "90,45;135,0", "--angles", "0,45,90,135", *GEO,
               "--out", str(tmp_path / "x")])
    assert rc == 2 and "cannot be used with --mosaic" in capsys.readouterr().err


def _raw_mosaic(path, lens, pose, offsets, placement="sensor"):
    import numpy as np
    import tifffile

    sun = sun_position(parse_when(WHEN), 47.0, 8.0)
    g = SkyGeometry(lens, *pose, sun["azimuth_deg"], sun["elevation_deg"], placement)
    i = np.stack([render_sky_bracket(g, (a,), noise_sigma=0.001, analyzer_offset_deg=o, seed=k)[0, 0]
                  for k, (a, o) in enumerate(zip((90, 45, 135, 0), offsets))])
    raw = np.empty(i.shape[1:])
    raw[0::2, 0::2], raw[0::2, 1::2] = i[0][0::2, 0::2], i[1][0::2, 1::2]
    raw[1::2, 0::2], raw[1::2, 1::2] = i[2][1::2, 0::2], i[3][1::2, 1::2]
    tifffile.imwrite(path, np.clip(raw * 65535, 1, 65000).astype(np.uint16))
    return str(path)


def test_per_position_offsets_wide_field(tmp_path, capsys):
    frame = _raw_mosaic(tmp_path / "w.tif", make_lens("fisheye-equidistant", 96, 96, fov_deg=180), (30, 80, 0),
                        (1.0, 2.0, -1.0, 0.5))
    fish = ["--lens", "fisheye-equidistant", "--fov-deg", "180", "--when", WHEN, "--lat", "47", "--lon", "8",
            "--yaw-deg", "30", "--pitch-deg", "80"]
    rc = main(["calibrate", "sky", frame, "--mosaic", "90,45;135,0", "--per-position", *fish,
               "--out", str(tmp_path / "p"), "--json"])
    res = json.loads(capsys.readouterr().out)
    assert rc == 0 and res["per_position"] is True
    got = [row[0] for row in res["angle_offset_deg"]]
    assert got == pytest.approx([1.0, 2.0, -1.0, 0.5], abs=0.2)
    cal = read_calibration(tmp_path / "p")
    assert cal.angle_offset_deg.shape == (4, 1) and cal.channel_params(0, 1)[0] == pytest.approx(got[1])
    rc = main(["sky", frame, "--mosaic", "90,45;135,0", "--calibration", str(tmp_path / "p"), *fish,
               "--out", str(tmp_path / "s"), "--json", "--no-pictures"])
    assert rc == 0 and abs(json.loads(capsys.readouterr().out)["median_aolp_residual_deg"]) < 0.1


def test_per_position_offsets_narrow_field_are_refused(tmp_path, capsys):
    frame = _raw_mosaic(tmp_path / "n.tif", make_lens("pinhole", 64, 48, hfov_deg=70), (10, 25, 4),
                        (1.0, 2.0, -1.0, 0.5))
    rc = main(["calibrate", "sky", frame, "--mosaic", "90,45;135,0", "--per-position", *GEO,
               "--out", str(tmp_path / "p")])
    err = capsys.readouterr().err
    assert rc == 2 and "cannot be told apart from their gains" in err and not (tmp_path / "p").exists()


def test_per_position_needs_mosaic(frames, tmp_path, capsys):
    rc = main(["calibrate", "sky", *frames, "--per-position", *GEO, "--out", str(tmp_path / "p")])
    assert rc == 2 and "--per-position applies to polarization-mosaic frames" in capsys.readouterr().err
