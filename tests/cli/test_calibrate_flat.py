"""``polarsky calibrate flat``: bench frames -> a calibration folder (calibration.nc, calibration.json)."""

from __future__ import annotations

import json
import subprocess
import sys

import numpy as np

from polarsky.cli.main import main
from polarsky.mosaic.flatcal import flat_calibration
from polarsky.read.calibration_file import read_calibration
from polarsky.synthetic.mosaic import bench_frames, mosaic_sample, scene_gradient, write_mosaic_png
from polarsky.tasks.stokes import stokes_from_files
from polarsky.write.calibration_file import write_calibration
from tests.mosaic.test_flatcal import LAY, H, W, _fit, _sensor


def _bench_files(tmp_path, n_angles=12):
    angle, er, dia, gain = _sensor(3)
    angles = np.arange(n_angles) * 180.0 / n_angles
    frames = bench_frames((H, W), LAY, angles, angle_deg=angle, diattenuation=dia, gain=gain, level=0.6, noise=0.0005)
    bench = tmp_path / "bench"
    bench.mkdir()
    paths = [str(write_mosaic_png(bench / f"bench_{a:05.1f}.png", f)) for a, f in zip(angles, frames)]
    dark = str(write_mosaic_png(bench / "dark.png", np.full((H, W), 0.002)))
    return paths, angles, dark, angle


def test_cli_calibrate_flat_in_process(tmp_path, capsys):
    paths, angles, dark, angle = _bench_files(tmp_path)
    out = tmp_path / "cal"
    rc = main(["calibrate", "flat", *paths, "--angles", ",".join(f"{a:g}" for a in angles), "--out", str(out),
               "--mosaic", LAY.text, "--dark", dark, "--json"])
    assert rc == 0
    summary = json.loads(capsys.readouterr().out)
    assert summary["n_frames"] == 12 and summary["n_dark_frames"] == 1
    assert summary["calibration_file"] == str(out / "calibration.nc")
    assert summary["outputs"] == ["calibration.json", "calibration.nc"]
    assert sorted(p.name for p in out.iterdir() if not p.name.startswith(".")) == summary["outputs"]
    assert json.loads((out / "calibration.json").read_text())["positions"] == summary["positions"]
    cal = read_calibration(out)  # the folder names the file
    assert cal.kind == "flat" and cal.attrs["mosaic"] == LAY.text and list(cal.attrs["sensor_shape"]) == [H, W]
    assert cal.pixel["pixel_angle_deg"].shape == (1, H, W)
    err = (cal.pixel["pixel_angle_deg"][0] - angle + 90) % 180 - 90
    assert np.sqrt(np.mean(err**2)) < 0.1
    assert "summary" in cal.attrs and "Powell" in cal.attrs["method"]


def test_cli_calibrate_flat_subprocess_and_stokes_with_it(tmp_path):
    paths, angles, dark, angle = _bench_files(tmp_path)
    out = tmp_path / "cal"
    r = subprocess.run([sys.executable, "-m", "polarsky", "calibrate", "flat", *paths, "--angles", "0:180:15",
                        "--out", str(out), "--mosaic", LAY.text], cwd=tmp_path, capture_output=True, text=True)
    assert r.returncode == 0, r.stderr
    assert "dead pixels 0" in r.stdout and "wrote" in r.stdout
    scene = write_mosaic_png(tmp_path / "scene.png", mosaic_sample(scene_gradient(H, W), LAY, angle_deg=angle))
    for given in (out, out / "calibration.nc"):  # --calibration takes the folder or the file
        ds = stokes_from_files([scene], mosaic=LAY.text, calibration=given)
        applied = json.loads(ds.attrs["calibration"])
        assert applied["kind"] == "flat" and applied["per_pixel"] is True


def test_cli_too_few_angles_exit_2(tmp_path, capsys):
    paths, angles, dark, angle = _bench_files(tmp_path, n_angles=2)
    rc = main(["calibrate", "flat", *paths, "--angles", "0,90", "--out", str(tmp_path / "c"), "--mosaic", LAY.text])
    err = capsys.readouterr().err
    assert rc == 2 and err.startswith("error: reference-polarizer angles 0,90 hold only 2 distinct") and err.count("\n") == 1
    assert not (tmp_path / "c").exists()


def test_cli_calibration_for_another_layout_exit_2(tmp_path, capsys):
    fit, _ = _fit(noise=0.0)
    (tmp_path / "cal").mkdir()
    write_calibration(tmp_path / "cal" / "calibration.nc", flat_calibration(fit))
    frame = write_mosaic_png(tmp_path / "f.png", np.full((H, W), 0.3))
    rc = main(["stokes", str(frame), "--mosaic", "45,90;0,135", "--calibration", str(tmp_path / "cal"),
               "--out", str(tmp_path / "o")])
    err = capsys.readouterr().err
    assert rc == 2 and err.count("\n") == 1
    assert "was made for mosaic 90,45;135,0 but --mosaic is 45,90;0,135" in err
    assert not (tmp_path / "o").exists()
