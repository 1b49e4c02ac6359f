"""``polarsky stokes`` as a task: brackets end to end on synthetic frames with known truth."""

from __future__ import annotations

import json

import numpy as np
import pytest

from polarsky.errors import PolarskyWarning
from polarsky.read.stokes_file import open_stokes
from polarsky.tasks.stokes import run_stokes, stokes_from_files
from polarsky.write.quantize import PRECISION, Bits
from polarsky.write.summary import SUMMARY_KEYS
from tests.synth import render_frames, smooth_scene, write_pngs, write_tiffs


def test_recovers_truth_any_angle_set(tmp_path):
    s = smooth_scene(24, 32)
    angles = [5, 50, 97, 142, 170]
    paths = write_tiffs(tmp_path, render_frames(s, angles), angles)
    ds = stokes_from_files(paths)
    truth_p = np.hypot(s[1], s[2]) / s[0]
    truth_a = np.degrees(0.5 * np.arctan2(s[2], s[1])) % 180
    np.testing.assert_allclose(ds["dolp"].values, truth_p, atol=2e-4)
    d = (ds["aolp"].values - truth_a + 90) % 180 - 90
    assert np.abs(d).max() < 0.05
    assert set(ds.data_vars) >= {"S0", "S1", "S2", "dolp", "dolp_unbiased", "aolp", "valid", "sigma_dolp", "sigma_aolp", "residual"}
    for v in ds.data_vars:
        assert "units" in ds[v].attrs and "long_name" in ds[v].attrs
    assert ds["S0"].dtype == np.float32
    assert json.loads(ds.attrs["analyzer_angles_deg"]) == angles
    assert ds.attrs["polarizer"] == "front"


def test_extinction_and_offset_options(tmp_path):
    s = smooth_scene(16, 16)
    d = (100 - 1) / (100 + 1)
    # filter ring reads 0/45/90/135 but its true zero is at +3 deg
    frames = render_frames(s, [3, 48, 93, 138], diattenuation=d)
    paths = write_tiffs(tmp_path, frames, [0, 45, 90, 135])
    ds = stokes_from_files(paths, extinction=100, angle_offset=3.0)
    truth_p = np.hypot(s[1], s[2]) / s[0]
    np.testing.assert_allclose(ds["dolp"].values, truth_p, atol=3e-4)


def test_alignment_recovers_subpixel_shifts(tmp_path):
    import cv2

    rng = np.random.default_rng(5)
    h, w = 96, 128
    base = cv2.GaussianBlur(rng.random((h, w)).astype(np.float32), (0, 0), 2.0)
    base = 0.2 + 0.6 * (base - base.min()) / np.ptp(base)
    s = np.stack([base, 0.3 * base, -0.1 * base])[:, None].astype(np.float64)
    angles = [0, 45, 90, 135]
    shifts = [(0, 0), (0.6, -0.4), (-1.2, 0.7), (0.3, 1.1)]
    frames = render_frames(s, angles)
    moved = []
    for f, (dx, dy) in zip(frames, shifts):
        m = np.float32([[1, 0, -dx], [0, 1, -dy]])
        moved.append(cv2.warpAffine(f[0].astype(np.float32), m, (w, h), flags=cv2.INTER_CUBIC | cv2.WARP_INVERSE_MAP,
                                    borderMode=cv2.BORDER_REFLECT)[None])
    paths = write_tiffs(tmp_path, np.stack(moved), angles)
    summary = run_stokes(paths, tmp_path / "out", align=True)
    np.testing.assert_allclose(np.array(summary["shifts_px"]), np.array(shifts), atol=0.1)
    ds = open_stokes(tmp_path / "out" / "stokes.nc")
    inner = ds["dolp"].values[0, 8:-8, 8:-8]
    assert np.nanmedian(np.abs(inner - np.hypot(0.3, 0.1))) < 0.01


def test_run_stokes_outputs_and_netcdf_round_trip(png_bracket, tmp_path):
    paths, s = png_bracket
    out = tmp_path / "out"
    summary = run_stokes(paths, out)
    names = sorted(p.name for p in out.iterdir() if not p.name.startswith("."))
    assert names == ["aolp.png", "dolp.png", "polarization.png", "residual.png", "stokes.nc", "summary.json"]
    assert summary["outputs"] == names
    on_disk = open_stokes(out / "stokes.nc")
    in_mem = stokes_from_files(paths)
    for v in ("S0", "S1", "S2", "dolp", "aolp", "sigma_aolp", "valid"):
        if v == "valid":
            np.testing.assert_array_equal(on_disk[v].values, in_mem[v].values)
        else:  # stored to the documented precision (polarsky.write.quantize)
            rule = PRECISION[v]
            rtol, atol = ((2.0 ** -(rule.bits + 1), 0) if isinstance(rule, Bits) else (0, rule.step() / 2))
            np.testing.assert_allclose(on_disk[v].values, in_mem[v].values, rtol=rtol, atol=atol, equal_nan=True)
        assert on_disk[v].attrs["units"] == in_mem[v].attrs["units"]
    assert list(on_disk["channel"].values) == ["L"]
    js = json.loads((out / "summary.json").read_text())
    assert list(js) == list(SUMMARY_KEYS)
    assert js["frames"] == 4 and js["mean_dolp"]["L"] == pytest.approx(summary["mean_dolp"]["L"])
    assert js["width_px"] == 64 and js["height_px"] == 48 and js["transfer"] == ["linear"] * 4
    assert js["median_relative_residual"] < 1e-3 and js["calibration"] is None and js["mosaic_color"] is None
    # the only hidden file is the marker of a folder written by polarsky (no staging leftovers)
    assert [p.name for p in out.iterdir() if p.name.startswith(".")] == [".polarsky-run.json"]
    assert not [p for p in out.parent.iterdir() if p.name.startswith(".")]


def test_uncertainty_from_residual_matches_scatter(tmp_path):
    # 8 angles, Gaussian noise: the residual-based sigma_aolp agrees with the actual AoLP scatter.
    s = np.zeros((3, 1, 64, 64))
    s[0], s[1], s[2] = 0.5, 0.1, 0.05
    angles = list(np.arange(8) * 22.5)
    frames = render_frames(s, angles, noise=0.002, seed=9)
    paths = write_tiffs(tmp_path, frames, angles)
    ds = stokes_from_files(paths)
    a = ds["aolp"].values[0]
    truth = np.degrees(0.5 * np.arctan2(0.05, 0.1))
    scatter = np.std((a - truth + 90) % 180 - 90)
    assert np.median(ds["sigma_aolp"].values) == pytest.approx(scatter, rel=0.15)
    assert ds.attrs["uncertainty_source"] == "residual"


def test_debiased_dolp_removes_noise_bias(tmp_path):
    # weak polarization at about 2 sigma: the raw DoLP is biased upward, the MAS estimate is not
    # (Plaszczynski et al. 2014, MNRAS 439, 4048: unbiased once p0/sigma > 2).
    s = np.zeros((3, 1, 96, 96))
    s[0], s[1] = 0.5, 0.5 * 0.01
    angles = list(np.arange(8) * 22.5)
    ds = stokes_from_files(write_tiffs(tmp_path, render_frames(s, angles, noise=0.002, seed=4), angles),
                           noise="model", gain_e_per_dn=1e9, read_noise_dn=0.002 * 65535)
    raw = float(np.mean(ds["dolp"].values))
    unb = float(np.mean(ds["dolp_unbiased"].values))
    assert raw > 0.0104  # Rice mean at p0 = 2.5 sigma is about 2.7 sigma
    assert abs(unb - 0.01) < 0.4 * abs(raw - 0.01)


def test_residual_warns_when_frames_disagree(tmp_path):
    # a "passing cloud": one frame 30% brighter than the polarizer model allows
    s = smooth_scene(16, 16)
    angles = [0, 45, 90, 135]
    frames = render_frames(s, angles)
    frames[2] *= 1.3
    paths = write_tiffs(tmp_path, frames, angles)
    with pytest.warns(PolarskyWarning, match="analyzer intensities disagree with the filter model.*try --align"):
        summary = run_stokes(paths, tmp_path / "out")
    assert summary["median_relative_residual"] > 0.03
    assert any("disagree" in w for w in summary["warnings"])
    assert (tmp_path / "out" / "residual.png").is_file()


def test_saturated_pixels_are_masked_and_counted(tmp_path):
    s = smooth_scene(10, 10)
    frames = render_frames(s, [0, 45, 90, 135])
    frames[1, 0, 2:4, 2:5] = 1.0
    paths = write_pngs(tmp_path, frames, [0, 45, 90, 135])
    with pytest.warns(PolarskyWarning, match=r"6 pixel values saturated .* scene_045deg.png were masked"):
        ds = stokes_from_files(paths)
    assert not ds["valid"].values[0, 2:4, 2:5].any()
    assert np.isnan(ds["dolp"].values[0, 2, 2])
    assert ds["valid"].values.sum() == 100 - 6
    assert json.loads(ds.attrs["saturated_px"]) == [0, 6, 0, 0]


def test_failure_midway_leaves_no_partial_files(png_bracket, tmp_path, monkeypatch):
    # An error while pictures are written must not leave stokes.nc or any staging folder behind.
    from polarsky.write.pictures import maps

    def boom(*a, **k):
        raise RuntimeError("disk full")

    paths, _ = png_bracket
    monkeypatch.setattr(maps, "stokes_pictures", boom)
    out = tmp_path / "out"
    with pytest.raises(RuntimeError, match="disk full"):
        run_stokes(paths, out)
    assert not out.exists()
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(".")]


def test_a_failed_run_keeps_the_earlier_result(png_bracket, tmp_path, monkeypatch):
    from polarsky.write.pictures import maps

    paths, _ = png_bracket
    out = tmp_path / "out"
    run_stokes(paths, out, pictures=False)
    before = {p.name: p.read_bytes() for p in out.iterdir()}
    monkeypatch.setattr(maps, "stokes_pictures", lambda *a, **k: (_ for _ in ()).throw(RuntimeError("disk full")))
    with pytest.raises(RuntimeError):
        run_stokes(paths, out)
    assert {p.name: p.read_bytes() for p in out.iterdir()} == before
