"""What PATH means: a stokes.nc folder, a batch output folder, a sky result, a folder of frames."""

from __future__ import annotations

import json
import pathlib
import shlex
import warnings

import numpy as np
import pytest

from polarsky.cli.main import main
from polarsky.errors import InputError, PolarskyWarning

from .conftest import write_bracket


def _quiet():
    w = warnings.catch_warnings()
    w.__enter__()
    warnings.simplefilter("ignore", PolarskyWarning)
    return w


def prepare(paths, tmp_path, **kw):
    from polarsky.workbench import prepare_workbench

    return prepare_workbench([str(p) for p in paths], tmp_path / "out", echo=lambda *a, **k: None, **kw)


def test_a_stokes_folder_gives_the_advice_of_its_frames(bracket, tmp_path, capsys):
    from polarsky.workbench.commandline import advise_command

    frames, stokes_dir = bracket
    wb, _ = prepare([stokes_dir], tmp_path)
    try:
        s = wb.session
        e = s.entry(s.current)
        assert e.kind == "stokes" and e.status == "ready"
        panel = s.panel(e.id, "10,40,120,85", "60,5,110,35")
        words = shlex.split(panel["command"])
        assert words[2:6] == [str(f) for f in frames]  # the inputs recorded in stokes.nc
        assert "rebuilt from the attributes of stokes.nc" in panel["command_note"]
        capsys.readouterr()
        w = _quiet()
        try:
            assert main(words[1:]) == 0
        finally:
            w.__exit__(None, None, None)
        assert json.loads(capsys.readouterr().out) == panel["advice"]
        assert advise_command(None, "0,0,1,1") is None
    finally:
        wb.sock.close()
        wb.session.close()


def test_a_stokes_folder_at_standard_precision_says_the_command_can_differ_in_the_last_digit(bracket, tmp_path):
    frames, _ = bracket
    w = _quiet()
    try:
        assert main(["stokes", *map(str, frames), "--out", str(tmp_path / "std"), "--no-pictures"]) == 0
    finally:
        w.__exit__(None, None, None)
    wb, _ = prepare([tmp_path / "std"], tmp_path)
    try:
        s = wb.session
        panel = s.panel(s.current, "10,40,120,85", None)
        assert "documented precision" in panel["command_note"]
        words = shlex.split(panel["command"])
        w = _quiet()
        try:
            from polarsky.tasks.advise import run_advise

            direct = run_advise(frames, region="10,40,120,85")
        finally:
            w.__exit__(None, None, None)
        assert panel["advice"]["best_angle_deg"] == pytest.approx(direct["best_angle_deg"], abs=0.01)
        assert words[2:6] == [str(f) for f in frames]
    finally:
        wb.sock.close()
        wb.session.close()


def test_a_batch_folder_lists_its_brackets_and_failures(tmp_path):
    from polarsky.batch.discover import discover_brackets
    from polarsky.batch.runner import write_summary_csv
    from polarsky.batch.task import process_bracket
    from polarsky.options.settings import Settings

    root = tmp_path / "survey"
    write_bracket(root / "harbour", stem="quay", h=30, w=40)
    write_bracket(root / "harbour", stem="slip", h=30, w=40, seed=3)
    write_bracket(root / "roof", stem="skylight", h=30, w=40)
    for f in (root / "roof").glob("skylight_0[49]*"):
        f.unlink()  # two frames left: the batch reports it as failed
    out = tmp_path / "survey-out"
    out.mkdir()
    settings = Settings.from_options({"pictures": False})
    w = _quiet()
    try:
        rows = [process_bracket({"bracket": b, "out_dir": str(out), "settings": settings, "sky": False, "run_id": "t"})
                for b in discover_brackets(root)]
    finally:
        w.__exit__(None, None, None)
    write_summary_csv(out / "summary.csv", rows)
    assert [r["status"] for r in rows] == ["done", "done", "failed"]
    wb, _ = prepare([out], tmp_path)
    try:
        s = wb.session
        got = {e.name: e for e in s.entries}
        assert set(got) == {r["name"] for r in rows}
        failed = got["roof__skylight"]
        assert failed.status == "unavailable" and "at least 3 frames" in failed.error
        ready = s.entry(s.current)
        assert ready.kind == "batch" and ready.status == "ready" and ready.name == "harbour__quay"
        other = got["harbour__slip"]
        assert other.status == "pending"
        s.load_now(other)
        assert other.status == "ready"
        assert s.advice(other.id, "0,0,40,30")[0]["region_pixels"] == 40 * 30 - 4 * 5  # less the saturated spot
    finally:
        wb.sock.close()
        wb.session.close()


@pytest.fixture(scope="module")
def sky_result(tmp_path_factory):
    from polarsky.synthetic import harbour as demo
    from polarsky.tasks.sky import run_sky

    base = tmp_path_factory.mktemp("sky")
    frames = demo.write_sky_bracket(base / "sky-bracket")
    w = _quiet()
    try:
        run_sky(frames, base / "sky", when=demo.SKY_WHEN, lat=demo.SKY_LAT, lon=demo.SKY_LON,
                altitude_m=demo.SKY_ALT_M, hfov_deg=demo.SKY_CAMERA["hfov_deg"], yaw_deg=demo.SKY_CAMERA["yaw_deg"],
                pitch_deg=demo.SKY_CAMERA["pitch_deg"], roll_deg=demo.SKY_CAMERA["roll_deg"], pictures=False)
    finally:
        w.__exit__(None, None, None)
    return base


def test_a_sky_result_adds_the_comparison_layers(sky_result, tmp_path):
    import netCDF4

    wb, _ = prepare([sky_result / "sky"], tmp_path)
    try:
        e = wb.session.entry(wb.session.current)
        assert e.kind == "sky" and e.status == "ready"
        v = e.view
        ids = [layer["id"] for layer in v.layer_list()]
        assert {"dolp_model", "aolp_model", "dolp_residual", "aolp_residual", "scattering_angle"} <= set(ids)
        with netCDF4.Dataset(sky_result / "sky" / "sky.nc") as ds:
            x, y = 160, 120
            px = v.pixel(x, y)["sky"]
            assert np.float32(px["aolp_model_deg"]) == ds["aolp_model"][y, x]
            assert np.float32(px["scattering_angle_deg"]) == ds["scattering_angle"][y, x]
        for layer in ("aolp_residual", "dolp_model", "scattering_angle"):
            assert v.tile_png(layer, None, 0, 0, 0)[:8] == b"\x89PNG\r\n\x1a\n"
        assert v.meta()["sky"]["caution"].startswith("Safety: never look at the sun")
    finally:
        wb.sock.close()
        wb.session.close()


def _sky_options():
    from polarsky.synthetic import harbour as demo

    return dict(when=demo.SKY_WHEN, lat=demo.SKY_LAT, lon=demo.SKY_LON, altitude_m=demo.SKY_ALT_M,
                hfov_deg=demo.SKY_CAMERA["hfov_deg"], yaw_deg=demo.SKY_CAMERA["yaw_deg"],
                pitch_deg=demo.SKY_CAMERA["pitch_deg"], roll_deg=demo.SKY_CAMERA["roll_deg"])


def test_a_sky_bracket_with_time_place_and_orientation_shows_what_polarsky_sky_writes(sky_result, tmp_path):
    """Frames with the options of 'polarsky sky': the comparison is made as that command makes it
    (the same sky.nc values as the sky_result fixture's run_sky) and written only into --out."""
    import netCDF4

    frames = sorted((sky_result / "sky-bracket").iterdir())
    w = _quiet()
    try:
        wb, _ = prepare(frames, tmp_path, **_sky_options())
    finally:
        w.__exit__(None, None, None)
    try:
        e = wb.session.entry(wb.session.current)
        assert e.status == "ready" and "sky comparison written to" in e.note
        v = e.view
        assert {"dolp_model", "aolp_residual", "scattering_angle"} <= {layer["id"] for layer in v.layer_list()}
        written = tmp_path / "out" / frames[0].stem / "sky"
        assert (written / "sky.json").is_file() and not list(written.glob("*.png"))
        mine = json.loads((written / "sky.json").read_text())
        ref = json.loads((sky_result / "sky" / "sky.json").read_text())
        for key in ("sun_azimuth_deg", "sun_elevation_deg", "dolp_max", "rms_aolp_residual_deg", "sky_pixels"):
            assert mine[key] == ref[key], key
        with netCDF4.Dataset(sky_result / "sky" / "sky.nc") as ds:
            x, y = 160, 120
            px = v.pixel(x, y)["sky"]
            assert np.float32(px["aolp_model_deg"]) == ds["aolp_model"][y, x]
            assert np.float32(px["aolp_residual_deg"]) == ds["aolp_residual"][0, y, x]  # (channel, y, x)
        # nothing written beside the frames
        assert sorted((sky_result / "sky-bracket").iterdir()) == frames
    finally:
        wb.sock.close()
        wb.session.close()


def test_sky_options_with_a_folder_are_one_clear_error(sky_result, tmp_path):
    with pytest.raises(InputError, match="run 'polarsky sky' and open its output folder"):
        prepare([sky_result / "sky-bracket"], tmp_path, **_sky_options())


def test_a_folder_of_results_and_a_folder_of_frames(sky_result, bracket, tmp_path):
    import shutil

    _, stokes_dir = bracket
    tree = tmp_path / "shoot"
    shutil.copytree(stokes_dir, tree / "b-stokes")
    shutil.copytree(sky_result / "sky", tree / "a-sky")
    wb, _ = prepare([tree], tmp_path)
    try:
        assert [(e.label, e.kind) for e in wb.session.entries] == [("b-stokes", "stokes"), ("a-sky", "sky")]
    finally:
        wb.sock.close()
        wb.session.close()
    frames = tmp_path / "frames"
    write_bracket(frames, stem="east", h=30, w=40)
    write_bracket(frames, stem="west", h=30, w=40, seed=5)
    (frames / "west_045deg.png").rename(frames / "west_090deg.png.bak")
    (frames / "stray.png").write_bytes((frames / "east_000deg.png").read_bytes())
    wb, _ = prepare([frames], tmp_path)
    try:
        by = {e.name: e for e in wb.session.entries}
        assert by["frames__east"].status == "ready"
        assert by["frames__west"].status == "pending"
        stray = by["frames__ungrouped"]
        assert stray.status == "unavailable" and "cannot group stray.png" in stray.error
    finally:
        wb.sock.close()
        wb.session.close()


def test_a_bracket_that_cannot_be_processed_is_an_input_error(tmp_path):
    frames = write_bracket(tmp_path / "in", h=30, w=40)
    with pytest.raises(InputError, match="--angles gives 2 angle"):
        prepare(frames, tmp_path, angles="0,45")


def test_mosaic_frames_given_directly_give_what_advise_prints(tmp_path, capsys):
    from polarsky.synthetic.mosaic import mosaic_sample, scene_gradient, write_mosaic_png
    from polarsky.write.jsonio import dumps

    from .conftest import advise_json

    cell = "90,45;135,0"
    frame = write_mosaic_png(tmp_path / "sensor.png", mosaic_sample(scene_gradient(64, 96), cell))
    wb, _ = prepare([frame], tmp_path, mosaic=cell)
    try:
        s = wb.session
        e = s.entry(s.current)
        assert e.status == "ready" and e.view.shape == (64, 96)
        got = dumps(s.advice(e.id, "10,20,60,50")[0]) + "\n"
        assert got == advise_json(capsys, [frame], "10,20,60,50", mosaic=cell)
        words = shlex.split(s.panel(e.id, "10,20,60,50")["command"])
        assert words[words.index("--mosaic") + 1] == cell
    finally:
        wb.sock.close()
        wb.session.close()


def test_a_result_that_recorded_its_staging_folder_finds_its_frames(sky_result, tmp_path):
    """A run that staged its whole output (as 'polarsky demo' does) records inputs inside the
    staging folder; once published they are found in the published folder."""
    import shutil

    shoot = tmp_path / "shoot"
    shutil.copytree(sky_result / "sky", shoot / "sky")
    shutil.copytree(sky_result / "sky-bracket", shoot / "sky-bracket")
    info = json.loads((shoot / "sky" / "sky.json").read_text())
    staged = tmp_path / ".shoot.polarsky-staging-412-0a1b2c3d" / "sky-bracket"
    info["inputs"] = [str(staged / pathlib.Path(p).name) for p in info["inputs"]]
    (shoot / "sky" / "sky.json").write_text(json.dumps(info))
    wb, _ = prepare([shoot / "sky"], tmp_path)
    try:
        e = wb.session.entry(wb.session.current)
        assert e.status == "ready" and e.recipe["frames"][0] == str(shoot / "sky-bracket" / "kestrel_sky_000deg.tif")
    finally:
        wb.sock.close()
        wb.session.close()
