"""Hostile and unlucky input on the command line: every case an error of one line (exit 2),
or a result with the warning that says what happened; never a traceback, a stray library
line or a physically impossible answer with exit status 0.

Each test is named after what it reproduces.  Brackets are invented scenes rendered by our
own code (tests/synth.py, tests/sky_scene.py).
"""

from __future__ import annotations

import json

import numpy as np
import pytest

from polarsky.cli.main import main
from tests.synth import render_frames, smooth_scene, write_pngs


@pytest.fixture
def four(tmp_path):
    s = smooth_scene(24, 32)
    return write_pngs(tmp_path / "in", render_frames(s, [0, 45, 90, 135]), [0, 45, 90, 135])


def _one_error(code, capsys, *matches):
    err = capsys.readouterr().err
    lines = err.strip().splitlines()
    assert code == 2, err
    assert len(lines) == 1 and lines[0].startswith("error: "), err
    for m in matches:
        assert m in lines[0], lines[0]
    assert "internal error" not in err and "Traceback" not in err and "staging" not in err
    return lines[0]


def _stokes(paths, out, *extra):
    return main(["stokes", *map(str, paths), "--out", str(out), "--no-pictures", *extra])


# ---------------------------------------------------------------- physically impossible answers

@pytest.mark.parametrize("command, match", [
    ("stokes", "DoLP above 1, which no light has, in 768 of 768 valid pixels"),
    ("sky", "DoLP above 1, which no light has, in 768 of 768 valid pixels"),
    ("advise", "region 0,0,8,8 has a DoLP of"),
])
def test_an_extinction_ratio_of_1_0001_gives_no_dolp_of_thousands(four, tmp_path, capsys, command, match):
    # D = (ER-1)/(ER+1) = 5e-5 (CONVENTIONS.md): every DoLP would be scaled by 20000
    extra = {"stokes": [], "sky": [*SKY, "--when", "2024-06-21T17:30:00+02:00"], "advise": ["--region", "0,0,8,8"]}
    code = main([command, *map(str, four), *extra[command], "--extinction", "1.0001", "--out", str(tmp_path / "o")])
    _one_error(code, capsys, match, "--extinction 1.0001 (diattenuation 5e-05) is lower than the filter's")
    assert not (tmp_path / "o").exists()


@pytest.mark.filterwarnings("default::polarsky.errors.PolarskyWarning")  # printed as the command line does
def test_a_few_pixels_with_dolp_above_one_are_masked_and_counted(tmp_path, capsys):
    s = smooth_scene(48, 64)
    frames = render_frames(s, [0, 60, 120])
    # something bright passed through 9 pixels of the first frame only: with I = (a, b, b) at 0, 60, 120 deg
    # the 3-frame solve gives DoLP = 2 (a - b) / (a + 2 b) (Malus's law, CONVENTIONS.md), 1.48 here
    frames[0, :, 10:13, 10:13] = 0.95
    frames[1:, :, 10:13, 10:13] = 0.1
    paths = write_pngs(tmp_path / "in", frames, [0, 60, 120])
    assert _stokes(paths, tmp_path / "o", "--json") == 0
    out = capsys.readouterr()
    summary = json.loads(out.out)
    assert "9 pixel values had a DoLP above 1 beyond their uncertainty" in out.err
    assert summary["valid_pixels"] == {"L": 48 * 64 - 9}
    assert any("were masked" in w for w in summary["warnings"])


def test_frames_with_no_valid_pixel_are_refused_not_mapped(tmp_path, capsys):
    s = smooth_scene(24, 32)
    frames = render_frames(s, [0, 45, 90, 135])
    for k in range(4):
        frames[k, :, :, 8 * k:8 * (k + 1)] = 1.0  # each frame clipped in another quarter
    paths = write_pngs(tmp_path / "in", frames, [0, 45, 90, 135])
    _one_error(_stokes(paths, tmp_path / "o"), capsys, "none of the 768 pixels is valid")
    assert not (tmp_path / "o").exists()


def test_one_file_listed_at_every_angle_is_refused(four, tmp_path, capsys):
    _one_error(_stokes([four[0]] * 3, tmp_path / "o", "--angles", "0,60,120"), capsys,
               f"frame {four[0]} is listed twice, at 0 and 60 deg")
    man = tmp_path / "in" / "manifest.csv"
    man.write_text(f"file,angle_deg\n{four[1].name},0\n{four[1].name},45\n{four[2].name},90\n")
    _one_error(main(["stokes", "--manifest", str(man), "--out", str(tmp_path / "o")]), capsys, "is listed twice")


@pytest.mark.parametrize("value, match", [
    ("nan", "--read-noise-dn must be a finite number, got nan"),
    ("-1", "--read-noise-dn must be at least 0, got -1"),        # a number shown as a number
    ("inf", "--read-noise-dn must be a finite number, got inf"),
])
def test_read_noise_that_is_no_noise_is_refused(four, tmp_path, capsys, value, match):
    _one_error(_stokes(four, tmp_path / "o", "--read-noise-dn", value), capsys, match)


@pytest.fixture(scope="module")
def sky_frames(tmp_path_factory):
    from tests import sky_scene

    return sky_scene.bracket(tmp_path_factory.mktemp("sky"), sky_scene.geom())


SKY = ["--lat", "47", "--lon", "8", "--hfov-deg", "70", "--yaw-deg", "10", "--pitch-deg", "25", "--roll-deg", "4"]


@pytest.mark.parametrize("command", [["sky"], ["calibrate", "sky"]])
def test_a_sky_at_night_is_refused(sky_frames, tmp_path, capsys, command):
    code = main([*command, *sky_frames, *SKY, "--when", "2024-06-21T01:30:00+02:00", "--out", str(tmp_path / "o")])
    _one_error(code, capsys, "deg below the horizon at 2024-06-21T01:30:00+02:00")


@pytest.mark.filterwarnings("default::polarsky.errors.PolarskyWarning")
def test_a_sky_run_prints_no_library_chatter(sky_frames, tmp_path, capsys):
    # TIFF frames without EXIF go through the EXIF reader, which logs "no EXIF" when not kept quiet
    code = main(["sky", *sky_frames, *SKY, "--when", "2024-06-21T17:30:00+02:00", "--out", str(tmp_path / "o"),
                 "--no-pictures"])
    err = capsys.readouterr().err
    assert code == 0 and all(line.startswith("warning: ") for line in err.strip().splitlines()), err


def test_a_sky_with_no_sky_pixel_left_is_refused(sky_frames, tmp_path, capsys):
    args = ["sky", *sky_frames, *SKY, "--when", "2024-06-21T17:30:00+02:00", "--out", str(tmp_path / "o")]
    args[args.index("--pitch-deg") + 1] = "-60"
    _one_error(main(args), capsys, "no sky pixel is left for the comparison (3072 px below the horizon)")


@pytest.mark.filterwarnings("default::polarsky.errors.PolarskyWarning")
def test_a_sun_saturated_in_every_channel_leaves_no_stray_warning(tmp_path, capsys):
    # np.nanmean over channels warns "Mean of empty slice" for pixels invalid in every channel
    s = smooth_scene(24, 32, channels=3)
    frames = render_frames(s, [0, 45, 90, 135])
    frames[:, :, :4, :4] = 1.0
    paths = write_pngs(tmp_path / "in", frames, [0, 45, 90, 135])
    code = main(["sky", *map(str, paths), *SKY, "--when", "2024-06-21T17:30:00+02:00", "--out", str(tmp_path / "o"),
                 "--no-pictures"])
    err = capsys.readouterr().err
    assert code == 0, err
    assert "RuntimeWarning" not in err and "Mean of empty slice" not in err
    assert all(line.startswith("warning: ") for line in err.strip().splitlines())


# ---------------------------------------------------------------- names, manifests, option values

def test_decimal_commas_and_unicode_minus_in_names_are_read(tmp_path, capsys):
    s = smooth_scene(24, 32)
    angles = [-45.0, 22.5, 90.0]
    paths = write_pngs(tmp_path / "in", render_frames(s, angles), angles)
    names = [tmp_path / "in" / n for n in ("p_\u221245deg.png", "p_22,5deg.png", "p_90deg.png")]
    for p, q in zip(paths, names):
        p.rename(q)
    assert main(["stokes", *map(str, names), "--out", str(tmp_path / "o"), "--no-pictures", "--json"]) == 0
    assert json.loads(capsys.readouterr().out)["analyzer_angles_deg"] == angles


@pytest.mark.parametrize("option, value, match", [
    ("--extinction", "1", "--extinction 1 is the extinction ratio Tmax/Tmin and must be a finite number above 1"),
    ("--extinction", "inf", "--extinction must be a finite number, got inf"),
    ("--angle-offset", "nan", "--angle-offset must be a finite number, got nan"),
    ("--angle-offset", "inf", "--angle-offset must be a finite number, got inf"),
    ("--angle-offset", "4_5", "no underscores between digits"),
    ("--angles", "0,45,9" + "0" * 400 + ",135", "is too large to be a number here"),
])
def test_option_values_that_are_no_numbers_are_one_line(four, tmp_path, capsys, option, value, match):
    _one_error(_stokes(four, tmp_path / "o", option, value), capsys, match)


@pytest.mark.parametrize("row, match", [
    ("{f},0,0.01,extra", "line 2 has 4 fields but the header has 3"),
    ("{f},0,inf", "exposure_s must be a finite number, got inf"),
    ("{f},4_5,0.01", "no underscores between digits"),
])
def test_manifest_rows_that_cannot_be_read_are_one_line(four, tmp_path, capsys, row, match):
    man = tmp_path / "in" / "manifest.csv"
    rest = "".join(f"{p.name},{a},0.01\n" for p, a in zip(four[1:], (45, 90, 135)))
    man.write_text("file,angle_deg,exposure_s\n" + row.format(f=four[0].name) + "\n" + rest)
    _one_error(main(["stokes", "--manifest", str(man), "--out", str(tmp_path / "o")]), capsys, match)


@pytest.mark.parametrize("angles", ["0:1000000000:0.000001", "-" + "9" * 300 + ":" + "9" * 300 + ":1"])
def test_calibrate_flat_angle_ranges_of_billions_of_steps_are_one_line(four, tmp_path, capsys, angles):
    code = main(["calibrate", "flat", *map(str, four), "--angles", angles, "--mosaic", "90,45;135,0",
                 "--out", str(tmp_path / "o")])
    _one_error(code, capsys, "expands to too many angles, more than 10000; give a larger step")


def test_file_names_that_are_not_utf8_are_read_and_printed(four, tmp_path):
    import os
    import subprocess
    import sys

    folder = tmp_path / os.fsdecode(b"caf\xe9")  # a Latin-1 name on a UTF-8 system
    folder.mkdir()
    names = []
    for p in four:
        q = folder / os.fsdecode(p.name.replace("scene", "sc\xe8ne").encode("latin-1"))
        q.write_bytes(p.read_bytes())
        names.append(q)
    r = subprocess.run([sys.executable, "-m", "polarsky", "stokes", *map(os.fsencode, names), "--out",
                        os.fsencode(folder / "out")], capture_output=True, timeout=120)
    assert r.returncode == 0 and r.stderr == b"", r.stderr
    assert r.stdout.rstrip().endswith(b"to " + os.fsencode(folder / "out"))  # the name as the system gave it
    summary = json.loads((folder / "out" / "summary.json").read_text(encoding="utf-8"))
    assert summary["inputs"] == [str(n) for n in names]


# ---------------------------------------------------------------- messages

def test_a_looping_link_is_said_to_loop_not_to_be_missing(four, tmp_path, capsys):
    (tmp_path / "a.png").symlink_to("b.png")
    (tmp_path / "b.png").symlink_to("a.png")
    code = _stokes([tmp_path / "a.png", *four[1:]], tmp_path / "o", "--angles", "0,45,90,135")
    _one_error(code, capsys, "a.png is a symbolic link that loops")


def test_a_2x2_mosaic_frame_is_too_small_not_misaligned(tmp_path, capsys):
    import cv2

    cv2.imwrite(str(tmp_path / "tiny.png"), np.full((2, 2), 1000, np.uint16))
    code = main(["stokes", str(tmp_path / "tiny.png"), "--mosaic", "90,45;135,0", "--out", str(tmp_path / "o")])
    msg = _one_error(code, capsys, "is 2x2 pixels, too small to decode")
    assert "not a multiple" not in msg


def test_an_empty_sky_mask_is_refused_as_an_empty_region_is(sky_frames, tmp_path, capsys):
    import cv2

    cv2.imwrite(str(tmp_path / "mask.png"), np.zeros((48, 64), np.uint8))
    for option in ("--sky-mask", "--region"):
        command = ["sky", *sky_frames, *SKY, "--when", "2024-06-21T17:30:00+02:00"] if option == "--sky-mask" else \
            ["advise", *sky_frames]
        _one_error(main([*command, option, str(tmp_path / "mask.png"), "--out", str(tmp_path / "o")]), capsys,
                   f"{option} mask {tmp_path / 'mask.png'} has no non-zero pixels")
