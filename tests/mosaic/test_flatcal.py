"""Per-pixel bench calibration (Powell & Gruev 2013 calibration-matrix approach)."""

import json

import numpy as np
import pytest

from polarsky.errors import InputError
from polarsky.estimate.calibration import Calibration
from polarsky.mosaic.flatcal import fit_flat, flat_calibration, flat_summary
from polarsky.mosaic.layout import parse_mosaic
from polarsky.read.calibration_file import read_calibration
from polarsky.synthetic.mosaic import bench_frames, mosaic_sample, scene_gradient
from polarsky.tasks.stokes import stokes_from_mosaic_values
from polarsky.write.calibration_file import write_calibration
H, W = 48, 64
LAY = parse_mosaic("90,45;135,0")
ANGLES = np.arange(0.0, 180.0, 10.0)  # 18 reference-polarizer angles over 180 deg


def _sensor(seed=0):
    """Invented sensor: 2 deg RMS orientation errors, ER 50..300, gains +-10 %."""
    rng = np.random.default_rng(seed)
    nominal = np.tile(LAY.grid, (H // 2, W // 2))
    angle = nominal + rng.normal(0, 2.0, (H, W))
    er = rng.uniform(50, 300, (H, W))
    dia = (er - 1) / (er + 1)  # D = (ER-1)/(ER+1), REFERENCES.md 5.3
    gain = rng.uniform(0.9, 1.1, (H, W))
    return angle, er, dia, gain


def _fit(noise=0.001, seed=0):
    angle, er, dia, gain = _sensor(seed)
    frames = bench_frames((H, W), LAY, ANGLES, angle_deg=angle, diattenuation=dia, gain=gain, level=0.6,
                          noise=noise, seed=seed + 1)
    return fit_flat(frames, ANGLES, LAY), (angle, er, dia, gain)


def test_recovers_orientation_errors_and_diattenuation_with_noise():
    fit, (angle, er, dia, gain) = _fit(noise=0.001)
    err = (fit.angle_deg - angle + 90) % 180 - 90
    # noise 0.001 on a signal of 0.3: sigma_phi ~ sqrt(2/N) sigma / (2 A) rad ~ 0.03 deg
    assert np.sqrt(np.mean(err**2)) < 0.08
    np.testing.assert_allclose(np.sqrt(np.mean(err**2)), np.median(fit.sigma_angle_deg), rtol=0.3)
    assert np.abs(fit.diattenuation - dia).max() < 0.02
    np.testing.assert_allclose(fit.gain, gain / np.median(gain), atol=0.01)
    summary = flat_summary(fit)
    assert len(summary["positions"]) == 4
    for p in summary["positions"]:
        # the injected orientation scatter (2 deg RMS) is what the summary reports
        assert 1.6 < p["angle_error_rms_deg"] < 2.4
        lo, med, hi = p["extinction_ratio_p05_p50_p95"]
        assert 50 < lo < med < hi
    assert summary["dead_pixels"] == summary["hot_pixels"] == 0


def test_noise_free_recovery_is_exact():
    fit, (angle, er, dia, gain) = _fit(noise=0.0)
    np.testing.assert_allclose(fit.angle_deg, angle % 180, atol=1e-6)
    np.testing.assert_allclose(fit.diattenuation, dia, atol=1e-7)
    # extinction ratio back from D (Hagen et al. 2019 prefer D: ER is unstable near D -> 1)
    np.testing.assert_allclose((1 + fit.diattenuation) / (1 - fit.diattenuation), er, rtol=1e-3)


def test_dead_and_hot_pixels():
    angle, er, dia, gain = _sensor(1)
    gain[5, 7] = 0.01            # dead
    dark = np.full((H, W), 0.01)
    dark[20, 30] = 0.2           # hot
    frames = bench_frames((H, W), LAY, ANGLES, angle_deg=angle, diattenuation=dia, gain=gain, dark=dark)
    fit = fit_flat(frames, ANGLES, LAY, dark=dark)
    assert fit.defect[5, 7] == 1 and fit.defect[20, 30] == 2
    s = flat_summary(fit)
    assert s["dead_pixels"] == 1 and s["hot_pixels"] == 1


def _scene_noise(raw, sigma, seed):
    return (raw + np.random.default_rng(seed).normal(0, sigma, raw.shape)).astype(np.float32)


def test_calibrated_aolp_errors_fall_to_noise_level(tmp_path):
    fit, (angle, er, dia, gain) = _fit(noise=0.0005)
    cal = write_calibration(tmp_path / "fitted.nc", flat_calibration(fit))
    truth_cal = write_calibration(tmp_path / "truth.nc", Calibration(
        kind="flat", pixel={"pixel_gain": gain[None] / np.median(gain), "pixel_diattenuation": dia[None],
                            "pixel_angle_deg": angle[None]}, attrs={"mosaic": LAY.text, "sensor_shape": [H, W]}))
    scene = scene_gradient(H, W)
    raw = mosaic_sample(scene, LAY, angle_deg=angle, diattenuation=dia, gain=gain / np.median(gain), dtype=np.float64)
    noisy = _scene_noise(raw, 0.001, 7)
    for method in ("superpixel", "bilinear", "newton"):
        t = scene if method != "superpixel" else scene.reshape(3, H // 2, 2, W // 2, 2).mean(axis=(2, 4))
        t_aolp = np.degrees(0.5 * np.arctan2(t[2], t[1])) % 180

        def rms(ds):
            e = (ds.aolp.values[0] - t_aolp + 90) % 180 - 90
            b = 2 if method != "superpixel" else 1
            return float(np.sqrt(np.mean(e[b:-b, b:-b] ** 2)))

        plain = rms(stokes_from_mosaic_values(noisy, mosaic=LAY.text, demosaic=method))
        fitted = rms(stokes_from_mosaic_values(noisy, mosaic=LAY.text, demosaic=method, calibration=cal))
        ideal = rms(stokes_from_mosaic_values(noisy, mosaic=LAY.text, demosaic=method, calibration=truth_cal))
        assert plain > 3 * ideal, (method, plain, ideal)
        assert fitted < 1.25 * ideal, (method, fitted, ideal)


@pytest.mark.parametrize("method", ["superpixel", "bilinear", "newton"])
def test_calibrated_exact_without_noise(method, tmp_path):
    fit, (angle, er, dia, gain) = _fit(noise=0.0)
    cal = write_calibration(tmp_path / "calibration.nc", flat_calibration(fit))
    s = np.stack([np.full((H, W), 0.5), np.full((H, W), 0.12), np.full((H, W), -0.2)])
    raw = mosaic_sample(s, LAY, angle_deg=angle, diattenuation=dia, gain=gain / np.median(gain), dtype=np.float64)
    ds = stokes_from_mosaic_values(raw, mosaic=LAY.text, demosaic=method, calibration=cal)
    # REFERENCES.md 8.2 test implication: calibrated reconstruction returns DoLP/AoLP to
    # < 1e-3 / < 0.1 deg on noise-free data, and the uncalibrated one does not
    dolp_true = np.hypot(0.12, 0.2) / 0.5
    aolp_true = np.degrees(0.5 * np.arctan2(-0.2, 0.12)) % 180
    assert np.abs(ds.dolp.values - dolp_true).max() < 1e-3
    assert np.abs(ds.aolp.values - aolp_true).max() < 0.1
    plain = stokes_from_mosaic_values(raw, mosaic=LAY.text, demosaic=method)
    assert np.abs(plain.aolp.values - aolp_true).max() > 0.5
    applied = json.loads(ds.attrs["calibration"])
    assert applied["per_pixel"] is True and applied["kind"] == "flat"


def test_defective_pixels_are_repaired(tmp_path):
    fit, (angle, er, dia, gain) = _fit(noise=0.0)
    flat = flat_calibration(fit)
    flat.pixel["pixel_defect"][0, 10, 10] = 1
    cal = write_calibration(tmp_path / "calibration.nc", flat)
    s = np.stack([np.full((H, W), 0.5), np.full((H, W), 0.1), np.full((H, W), 0.1)])
    raw = mosaic_sample(s, LAY, angle_deg=angle, diattenuation=dia, gain=gain / np.median(gain), dtype=np.float64)
    raw[10, 10] = 0.0  # the dead pixel
    ds = stokes_from_mosaic_values(raw, mosaic=LAY.text, demosaic="bilinear", calibration=cal)
    assert np.abs(ds.dolp.values[0, 8:13, 8:13] - np.hypot(0.1, 0.1) / 0.5).max() < 0.02


def test_calibration_for_another_sensor_or_layout(tmp_path):
    fit, _ = _fit(noise=0.0)
    cal = write_calibration(tmp_path / "calibration.nc", flat_calibration(fit))
    assert read_calibration(tmp_path).kind == "flat"  # the folder names the file too
    raw = np.full((H + 2, W), 0.3, np.float32)
    with pytest.raises(InputError, match=r"made for a 64x48 sensor but the frames are 64x50"):
        stokes_from_mosaic_values(raw, mosaic=LAY.text, calibration=cal)
    with pytest.raises(InputError, match=r"made for mosaic 90,45;135,0 but --mosaic is 0,45;135,90"):
        stokes_from_mosaic_values(np.full((H, W), 0.3, np.float32), mosaic="0,45;135,90", calibration=cal)
    with pytest.raises(InputError, match="colour pattern none"):
        stokes_from_mosaic_values(np.full((H, W), 0.3, np.float32), mosaic=LAY.text, mosaic_color="RGGB",
                                  calibration=cal)


def test_a_calibration_written_under_the_earlier_attribute_name_reads_as_today(tmp_path):
    """Files of an earlier version named the Bayer order ``mosaic_colour``; the reader gives
    today's name, so a colour calibration is still matched against --mosaic-color."""
    import h5py

    fit, _ = _fit(noise=0.0)
    path = write_calibration(tmp_path / "calibration.nc", flat_calibration(fit))
    with h5py.File(path, "r+") as f:
        f.attrs["mosaic_colour"] = "RGGB"
    cal = read_calibration(path)
    assert cal.attrs["mosaic_color"] == "RGGB" and "mosaic_colour" not in cal.attrs


@pytest.mark.parametrize("angles, match", [
    ([0, 90, 180, 270], "reference-polarizer angles .* hold only 2 distinct"),
    ([0, 60], "2 calibration frames but 2 angles|only 2 distinct"),
])
def test_too_few_calibration_angles(angles, match):
    frames = [np.full((H, W), 0.3)] * len(angles)
    with pytest.raises(InputError, match=match):
        fit_flat(frames, angles, LAY)


def test_angle_count_mismatch():
    with pytest.raises(InputError, match="3 calibration frames but 4 angles"):
        fit_flat([np.full((H, W), 0.3)] * 3, [0, 45, 90, 135], LAY)
