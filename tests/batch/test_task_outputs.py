"""A batch bracket writes what the commands write for the same frames and options.

The batch reads a bracket once and feeds one estimate pass to the Stokes, advice and sky
steps together; these tests hold its files equal to those of ``polarsky stokes``,
``polarsky advise`` and ``polarsky sky`` run one after the other on the same frames
(the commands' own task functions are the reference: same values, same JSON apart from the
run's timings), and its report thumbnails equal to those made from the written files.
The per-bracket task runs in-process (the cluster path is covered by test_runner.py).
"""

from __future__ import annotations

import json
import warnings

import numpy as np
import pytest

from polarsky.batch import runner
from polarsky.batch.report import make_thumbnails
from polarsky.batch.task import process_bracket
from polarsky.errors import PolarskyWarning
from polarsky.options.settings import Settings
from polarsky.synthetic.tree import write_bracket

REGION = [10, 8, 50, 30]
PROTECT = [0, 34, 24, 48]


def _process(root, out, settings, *, sky=False):
    runner.check_batch_settings(settings, sky=sky)
    out.mkdir(parents=True, exist_ok=True)
    return [process_bracket({"bracket": b, "out_dir": str(out), "settings": settings, "sky": sky, "run_id": "t"})
            for b in runner.list_brackets(root, settings=settings)]


def _json(path):
    return json.loads(path.read_text())


def _without_timing(summary: dict) -> dict:
    return {k: v for k, v in summary.items() if k != "timing_s"}


def _nc_values(path) -> dict:
    import h5py

    with h5py.File(path, "r") as f:
        return {k: f[k][...] for k in f if k not in ("channel", "x", "y")}


@pytest.fixture(scope="module")
def bracket_run(tmp_path_factory):
    """One bracket (one saturated pixel, so a warning is raised) through the batch and the commands."""
    from polarsky.tasks.advise import run_advise
    from polarsky.tasks.stokes import run_stokes

    base = tmp_path_factory.mktemp("single-pass")
    root = base / "in"
    frames = write_bracket(root, "quay", height=48, width=64, seed=2)
    import tifffile

    first = tifffile.imread(frames[0])
    first[5, 7] = 65535  # saturated: masked, with a warning in summary.json, advice.json and the row
    tifffile.imwrite(frames[0], first)
    settings = Settings.from_options({"region": REGION, "protect": PROTECT, "pictures": True})
    (row,) = _process(root, base / "out", settings)
    assert row["status"] == "done", row["error"]
    direct = base / "direct"
    paths = [str(f) for f in frames]
    opts = {"angles": "0,45,90,135", "region": REGION, "protect": PROTECT}
    with pytest.warns(PolarskyWarning, match="saturated"):
        run_stokes(paths, direct / "stokes", **opts)
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # the advice step raises no warning of its own here
        run_advise(paths, direct / "advise", **opts)
    return base / "out" / row["name"], direct, row


def test_stokes_nc_equals_the_stokes_command(bracket_run):
    folder, direct, _ = bracket_run
    a, b = _nc_values(folder / "stokes.nc"), _nc_values(direct / "stokes" / "stokes.nc")
    assert sorted(a) == sorted(b)
    for name in a:
        np.testing.assert_array_equal(a[name], b[name], err_msg=name)


def test_summary_json_equals_the_stokes_command(bracket_run):
    folder, direct, _ = bracket_run
    batch, command = _json(folder / "summary.json"), _json(direct / "stokes" / "summary.json")
    assert any("saturated" in w for w in command["warnings"])
    assert _without_timing(batch) == _without_timing(command)


def test_advice_json_equals_the_advise_command(bracket_run):
    folder, direct, _ = bracket_run
    batch, command = _json(folder / "advice.json"), _json(direct / "advise" / "advice.json")
    assert batch == command
    for name in command["outputs"]:  # the advice pictures too, pixel for pixel
        assert (folder / name).read_bytes() == (direct / "advise" / name).read_bytes(), name


def test_pictures_equal_the_stokes_command(bracket_run):
    folder, direct, _ = bracket_run
    for name in ("dolp.png", "aolp.png", "polarization.png", "residual.png"):
        assert (folder / name).read_bytes() == (direct / "stokes" / name).read_bytes(), name


def test_summary_row_holds_the_results(bracket_run):
    folder, _, row = bracket_run
    summary, advice = _json(folder / "summary.json"), _json(folder / "advice.json")
    assert row["mean_dolp"] == round(summary["mean_dolp"]["L"], 6)
    assert (row["best_angle_deg"], row["reduction_stops"]) == (advice["best_angle_deg"], advice["reduction_stops"])
    assert row["analyzer_angles_deg"] == "0,45,90,135"
    assert "saturated" in row["warnings"]


def test_thumbnails_equal_those_made_from_the_files(bracket_run, tmp_path):
    """Thumbnails made from the pictures and frame in memory are those the written files give."""
    folder, direct, row = bracket_run
    again = tmp_path / "again"
    again.mkdir()
    for name in ("dolp.png", "aolp.png"):
        (again / name).write_bytes((folder / name).read_bytes())
    frames = sorted((folder.parent.parent / "in").glob("quay_*deg.tif"))
    made = make_thumbnails(again, [str(f) for f in frames], px=240, best_angle_deg=row["best_angle_deg"])
    assert sorted(made) == ["thumb_aolp.png", "thumb_dolp.png", "thumb_frame.png"]
    for name in made:
        assert (again / name).read_bytes() == (folder / name).read_bytes(), name


def test_pictures_off_writes_no_pictures_and_the_same_numbers(bracket_run, tmp_path):
    folder, _, row = bracket_run
    settings = Settings.from_options({"region": REGION, "protect": PROTECT, "pictures": False})
    (off,) = _process(folder.parent.parent / "in", tmp_path / "out", settings)
    names = {p.name for p in (tmp_path / "out" / off["name"]).iterdir()}
    assert not {"dolp.png", "aolp.png", "thumb_dolp.png", "advice_axis.png"} & names
    assert {"stokes.nc", "summary.json", "advice.json", "thumb_frame.png", "batch.json"} <= names
    for key in ("mean_dolp", "best_angle_deg", "reduction_stops", "analyzer_angles_deg", "warnings"):
        assert off[key] == row[key], key
    a = _nc_values(tmp_path / "out" / off["name"] / "stokes.nc")
    b = _nc_values(folder / "stokes.nc")
    for name in a:
        np.testing.assert_array_equal(a[name], b[name], err_msg=name)


def test_sky_json_equals_the_sky_command(tmp_path):
    from polarsky.batch.config import load_settings, sky_requested
    from polarsky.synthetic.sky import render_sky_bracket, write_tiff_bracket
    from polarsky.tasks.sky import run_sky
    from tests.sky_scene import ANGLES, WHEN, geom

    root = tmp_path / "in"
    frames = write_tiff_bracket(root, render_sky_bracket(geom(), ANGLES, noise_sigma=0.002), ANGLES, stem="east")
    toml = tmp_path / "batch.toml"
    toml.write_text(f'[geometry]\nwhen = "{WHEN}"\nlat = 47.0\nlon = 8.0\nhfov_deg = 70.0\nyaw_deg = 10.0\n'
                    "pitch_deg = 25.0\nroll_deg = 4.0\n[output]\npictures = false\n")
    settings, tables = load_settings(toml)
    (row,) = _process(root, tmp_path / "out", settings, sky=sky_requested(tables))
    assert row["status"] == "done", row["error"]
    command = run_sky([str(f) for f in frames], tmp_path / "direct", settings.replace({"angles": list(ANGLES)}))
    batch = _json(tmp_path / "out" / row["name"] / "sky.json")
    assert batch == json.loads(json.dumps(command))
    a = _nc_values(tmp_path / "out" / row["name"] / "sky.nc")
    b = _nc_values(tmp_path / "direct" / "sky.nc")
    for name in a:
        np.testing.assert_array_equal(a[name], b[name], err_msg=name)


def test_mosaic_frame_thumbnail_from_memory_looks_like_the_file(tmp_path):
    """A mosaic's first-frame thumbnail comes from its linear values in memory; it shows what
    decoding the file shows (the black level and scale cancel in the display stretch)."""
    from PIL import Image

    from polarsky.synthetic.mosaic import mosaic_sample, scene_edges, write_mosaic_png

    root = tmp_path / "in"
    root.mkdir()
    raw = mosaic_sample(scene_edges(96, 128), "90,45;135,0", dtype=np.float64)
    frame = write_mosaic_png(root / "cam_0000.png", raw, full=4095, black=64)
    settings = Settings.from_options({"mosaic": "90,45;135,0", "bit_depth": 12, "black_level": 64,
                                      "pictures": False})
    (row,) = _process(root, tmp_path / "out", settings)
    assert row["status"] == "done", row["error"]
    ref = tmp_path / "ref"
    ref.mkdir()
    make_thumbnails(ref, [str(frame)], px=240)

    def pixels(p):
        with Image.open(p) as im:
            return np.asarray(im.convert("L"), dtype=int)

    a, b = pixels(tmp_path / "out" / row["name"] / "thumb_frame.png"), pixels(ref / "thumb_frame.png")
    assert a.shape == b.shape
    assert np.abs(a - b).max() <= 2  # rounding of the display stretch only



def test_advice_equals_the_command_when_pixels_are_masked_for_a_dolp_above_one(tmp_path):
    """The Stokes step masks pixels whose DoLP is above 1 (no light is more than fully
    polarized); the advice's own pass computes no DoLP and keeps them in the region sums. The
    batch's shared pass gives the advice the blocks before that check, so its advice.json is
    the command's."""
    import tifffile

    from polarsky.tasks.advise import run_advise
    from polarsky.tasks.stokes import run_stokes

    root = tmp_path / "in"
    frames = write_bracket(root, "pond", height=48, width=64, seed=4)
    # a 3x3 patch inside the region whose frames say I(0) = I(45) = 0.9, I(90) = I(135) = 0.01:
    # S1 = S2 = 0.89 with S0 = 0.91, a DoLP of 1.38 that the frames fit exactly
    for f, level in zip(frames, (0.9, 0.9, 0.01, 0.01)):  # files at 0, 45, 90, 135 deg
        img = tifffile.imread(f)
        img[18:21, 20:23] = round(level * 65535)
        tifffile.imwrite(f, img)
    settings = Settings.from_options({"region": REGION, "pictures": True})
    (row,) = _process(root, tmp_path / "out", settings)
    assert row["status"] == "done", row["error"]
    folder = tmp_path / "out" / row["name"]
    paths = [str(f) for f in frames]
    with pytest.warns(PolarskyWarning, match="DoLP above 1"):
        run_stokes(paths, tmp_path / "stokes", angles="0,45,90,135")
    command = run_advise(paths, tmp_path / "advise", angles="0,45,90,135", region=REGION)
    for name in command["outputs"]:  # the advice pictures show the patch as the command's do
        assert (folder / name).read_bytes() == (tmp_path / "advise" / name).read_bytes(), name
    summary = _json(folder / "summary.json")
    assert any("DoLP above 1" in w for w in summary["warnings"])
    assert _without_timing(summary) == _without_timing(_json(tmp_path / "stokes" / "summary.json"))
    batch = _json(folder / "advice.json")
    assert batch == _json(tmp_path / "advise" / "advice.json") == json.loads(json.dumps(command))


def test_the_kernel_choice_depends_on_the_input_alone(tmp_path):
    """A bracket takes the same path (and so gives the same numbers) in a fresh process and in
    a worker that has loaded the compiled kernels for an earlier, larger input."""
    import importlib

    from polarsky.estimate.runner import use_compiled, use_compiled_mosaic
    from polarsky.tasks._common import open_source

    frames = write_bracket(tmp_path / "small", "a", height=48, width=64)
    before = open_source(frames, Settings.from_options({})).source.compiled
    importlib.import_module("polarsky.core.kernels.dispatch")
    importlib.import_module("polarsky.mosaic._kernels")
    assert open_source(frames, Settings.from_options({})).source.compiled is before is False
    assert use_compiled(1_000_000) is False and use_compiled_mosaic(1_000_000) is False
