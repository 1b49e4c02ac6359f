"""``calibrate ring``: the filter ring's zero recovered from rendered reference brackets."""

from __future__ import annotations

import numpy as np
import pytest

from polarsky.errors import InputError
from polarsky.tasks.calibrate_ring import run_calibrate_ring
from tests.synth import render_frames, write_tiffs

RING = [0.0, 45.0, 90.0, 135.0]
NOISE = 0.003


def reference_bracket(folder, *, offset_deg, source_aolp_deg=0.0, dolp=0.6, noise=NOISE, seed=3, h=40, w=60):
    """A uniform source of known AoLP shot with ring readings RING; the ring's true zero is off by offset_deg."""
    s0 = np.full((h, w), 0.5)
    a = np.radians(source_aolp_deg)
    s = np.stack([s0, s0 * dolp * np.cos(2 * a), s0 * dolp * np.sin(2 * a)])[:, None]
    frames = render_frames(s, [r + offset_deg for r in RING], noise=noise, seed=seed)
    return write_tiffs(folder, frames, RING, stem="ref")


@pytest.mark.parametrize("offset, source", [(7.3, 0.0), (-23.0, 0.0), (41.5, 30.0)])
def test_offset_recovered_from_a_rendered_bracket(tmp_path, offset, source):
    # Known source AoLP (a level reflection: horizontal, Hecht 2017 sec. 8.6; or a screen's axis);
    # the recovered offset lies within 4 sigma of the truth, and sigma matches the high-SNR AoLP
    # scatter sigma_psi = sigma_S1 / (2 L) (Serkowski 1962, from memory) with var(S1) = 8 sigma_I^2 / N
    # for N equally spaced analyzers (least squares, project references section 6).
    paths = reference_bracket(tmp_path / "in", offset_deg=offset, source_aolp_deg=source)
    r = run_calibrate_ring(paths, tmp_path / "out", region="0,0,60,40", source_aolp_deg=source)
    err = (r["ring_offset_deg"] - offset + 90) % 180 - 90
    n_px = 2400
    sigma_expected = np.degrees(np.sqrt(n_px * 8 * NOISE ** 2 / 4) / (2 * n_px * 0.5 * 0.6))
    assert r["ring_offset_sigma_deg"] == pytest.approx(sigma_expected, rel=0.25)
    assert abs(err) < 4 * r["ring_offset_sigma_deg"] + 1e-3
    assert sorted(p.name for p in (tmp_path / "out").iterdir() if p.name[0] != ".") == ["calibration.json", "calibration.nc"]
    assert r["outputs"] == ["calibration.json", "calibration.nc"]


def test_the_calibration_applies_through_the_bracket_path(tmp_path):
    # The stored offset is the calibration file's angle_offset_deg: the estimate of the reference with
    # --calibration returns the source's true AoLP (0, a level reflection).
    from polarsky.read.calibration_file import read_calibration
    from polarsky.tasks.stokes import run_stokes

    paths = reference_bracket(tmp_path / "in", offset_deg=12.0)
    run_calibrate_ring(paths, tmp_path / "ring", region="0,0,60,40")
    cal = read_calibration(tmp_path / "ring")
    assert cal.kind == "ring" and float(cal.angle_offset_deg[0]) == pytest.approx(12.0, abs=0.05)
    summary = run_stokes(paths, tmp_path / "out", calibration=str(tmp_path / "ring"), pictures=False)
    assert summary["calibration"]["kind"] == "ring"
    import netCDF4

    with netCDF4.Dataset(tmp_path / "out" / "stokes.nc") as f:
        s1, s2 = (float(np.sum(f.variables[k][...])) for k in ("S1", "S2"))
    assert (np.degrees(0.5 * np.arctan2(s2, s1)) + 90) % 180 - 90 == pytest.approx(0.0, abs=0.05)


def test_a_weak_reference_is_refused_and_nothing_written(tmp_path):
    paths = reference_bracket(tmp_path / "in", offset_deg=5.0, dolp=0.03)
    with pytest.raises(InputError, match="too weak to fix the ring's zero"):
        run_calibrate_ring(paths, tmp_path / "out", region="0,0,60,40")
    assert not (tmp_path / "out").exists()


@pytest.mark.parametrize("options, match", [
    ({"calibration": "CAL"}, "drop --calibration"),
    ({"angle_offset": 3.0}, "drop --angle-offset"),
    ({"mosaic": "90,45;135,0"}, "drop --mosaic"),
    ({"region": None}, "--region is required"),
])
def test_settings_that_would_move_the_scale_are_refused(tmp_path, options, match):
    from polarsky.estimate.calibration import Calibration
    from polarsky.write.calibration_file import write_calibration

    paths = reference_bracket(tmp_path / "in", offset_deg=5.0)
    write_calibration(tmp_path / "calibration.nc", Calibration(kind="ring", angle_offset_deg=np.array([1.0])))
    options = {k: (str(tmp_path) if v == "CAL" else v) for k, v in options.items()}
    with pytest.raises(InputError, match=match):
        run_calibrate_ring(paths, tmp_path / "out", **{"region": "0,0,60,40", **options})
