"""stokes.nc: compressed by default, each map stored to its documented precision, readable by the
netCDF-C library without plugins; --precision full keeps float32; --keep chooses the maps.

Precision targets (the documented ones, polarsky/write/quantize.py): S0..S2 within 1e-4 of full
scale, DoLP within 1e-4, AoLP within 0.01 deg, uncertainties and residual within 0.2 %.  The
BitRound method is Klöwer et al. (2021), Nature Computational Science 1, 713.
"""

from __future__ import annotations

import numpy as np
import pytest

from polarsky.read.stokes_file import open_stokes
from polarsky.tasks.stokes import run_stokes, stokes_from_files
from polarsky.write.quantize import bitround, relative_error, round_to_step
from tests.synth import render_frames, smooth_scene, write_pngs


@pytest.fixture(scope="module")
def bracket(tmp_path_factory):
    folder = tmp_path_factory.mktemp("nc")
    angles = [0, 45, 90, 135]
    frames = render_frames(smooth_scene(40, 56, channels=3), angles, noise=0.004)
    return write_pngs(folder, frames, angles, bits=16)


def test_maps_are_stored_to_their_documented_precision(bracket, tmp_path):
    run_stokes(bracket, tmp_path / "o", pictures=False)
    disk, mem = open_stokes(tmp_path / "o" / "stokes.nc"), stokes_from_files(bracket)
    for name, tol in (("S0", 1e-4), ("S1", 1e-4), ("S2", 1e-4), ("dolp", 1e-4), ("dolp_unbiased", 1e-4),
                      ("aolp", 0.01)):
        diff = np.abs(disk[name].values - mem[name].values)
        assert np.nanmax(diff) <= tol, name
        assert (np.isnan(disk[name].values) == np.isnan(mem[name].values)).all()
    for name in ("sigma_dolp", "sigma_aolp", "residual"):  # 0.2 % (8 mantissa bits)
        np.testing.assert_allclose(disk[name].values, mem[name].values, rtol=2e-3, equal_nan=True)
    np.testing.assert_array_equal(disk["valid"].values, mem["valid"].values)
    assert disk["sigma_aolp"].attrs["_QuantizeBitRoundNumberOfSignificantBits"] == 8
    assert "0.0078" in disk["aolp"].attrs["precision"]


def test_exposure_normalized_values_keep_1e_4_of_their_full_scale(tmp_path):
    # frames exposed 1, 2, 4 and 8 times longer: the last one's full scale is 1/8 in S units
    angles = [0, 45, 90, 135]
    frames = render_frames(smooth_scene(24, 32, channels=1), angles, noise=0.002)
    scale = np.array([1, 2, 4, 8], float)
    frames = [np.clip(f * k / 8, 0, 1) for f, k in zip(frames, scale)]
    paths = write_pngs(tmp_path, frames, angles, bits=16)
    manifest = tmp_path / "frames.csv"
    manifest.write_text("file,angle_deg,exposure_s\n" + "".join(
        f"{p.name},{a},{k / 100}\n" for p, a, k in zip(paths, angles, scale)))
    run_stokes(paths, tmp_path / "o", pictures=False, manifest=manifest)
    disk = open_stokes(tmp_path / "o" / "stokes.nc")
    mem = stokes_from_files(paths, manifest=manifest)
    for name in ("S0", "S1", "S2"):
        assert np.nanmax(np.abs(disk[name].values - mem[name].values)) <= 1e-4 / 8, name


def test_precision_full_keeps_float32_and_keep_chooses_the_maps(bracket, tmp_path):
    run_stokes(bracket, tmp_path / "f", pictures=False, precision="full", keep="S0,S1,S2,valid")
    disk, mem = open_stokes(tmp_path / "f" / "stokes.nc"), stokes_from_files(bracket)
    assert sorted(disk.data_vars) == ["S0", "S1", "S2", "valid"]
    for name in ("S0", "S1", "S2", "valid"):
        np.testing.assert_array_equal(disk[name].values, mem[name].values)


def test_netcdf_c_library_reads_the_file_without_plugins(bracket, tmp_path):
    netCDF4 = pytest.importorskip("netCDF4")  # the reference NetCDF library (Unidata)
    run_stokes(bracket, tmp_path / "n", pictures=False)
    with netCDF4.Dataset(tmp_path / "n" / "stokes.nc") as f:
        v = f.variables["dolp"]
        assert v.dimensions == ("channel", "y", "x")
        flt = v.filters()
        assert flt["zlib"] and flt["shuffle"] and not (flt["zstd"] or flt["blosc"] or flt["bzip2"])
        assert list(f.variables["channel"][:]) == ["R", "G", "B"]
        np.testing.assert_allclose(v[:], open_stokes(tmp_path / "n" / "stokes.nc")["dolp"].values)


@pytest.mark.filterwarnings("ignore::polarsky.errors.PolarskyWarning")  # the demo's glints saturate
def test_demo_stokes_file_is_at_most_0_4_of_float32_maps(tmp_path):
    from polarsky.synthetic.harbour import render_scene, write_bracket

    bracket = write_bracket(render_scene(), tmp_path / "frames")  # the demo's inspection bracket
    run_stokes(bracket, tmp_path / "c", pictures=False, align=True)
    ds = open_stokes(tmp_path / "c" / "stokes.nc")
    raw = sum(ds[v].size * (1 if v == "valid" else 4) for v in ds.data_vars)
    assert (tmp_path / "c" / "stokes.nc").stat().st_size <= 0.4 * raw


@pytest.mark.parametrize("exponent", [-13, -6])
def test_step_rounding_error_bound(exponent):
    rng = np.random.default_rng(-exponent)
    a = (rng.standard_normal(100_000) * 10 ** rng.uniform(-5, 3, 100_000)).astype(np.float32)
    step = 2.0 ** exponent
    r = round_to_step(a.copy(), step)
    assert np.all(np.abs(r.astype(np.float64) - a) <= step / 2)
    assert np.all(np.mod(r.astype(np.float64), step) == 0)  # exact multiples of the step


@pytest.mark.parametrize("bits", [8, 13, 14])
def test_bitround_error_bound(bits):
    rng = np.random.default_rng(bits)
    a = (rng.standard_normal(100_000) * 10 ** rng.uniform(-5, 3, 100_000)).astype(np.float32)
    r = bitround(a.copy(), bits)
    assert np.all(np.abs(r - a) <= np.abs(a) * relative_error(bits))
    assert np.all((r.view(np.uint32) & np.uint32((1 << (23 - bits)) - 1)) == 0)  # dropped bits are zero
