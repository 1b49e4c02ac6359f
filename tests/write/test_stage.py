"""An output folder holds all of one run or none of it (polarsky.write.stage)."""

from __future__ import annotations

import pytest

from polarsky.errors import InputError
from polarsky.tasks.stokes import run_stokes
from polarsky.write.stage import MARKER, FolderLock, OutputStage


def _visible(folder):
    return sorted(p.name for p in folder.iterdir() if not p.name.startswith("."))


def test_the_next_run_replaces_the_folder_whole(png_bracket, tmp_path):
    paths, _ = png_bracket
    out = tmp_path / "out"
    run_stokes(paths, out)
    assert "dolp.png" in _visible(out) and (out / MARKER).is_file()
    summary = run_stokes(paths, out, pictures=False)
    assert _visible(out) == ["stokes.nc", "summary.json"] == summary["outputs"]  # no picture of the first run
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(".")]


def test_a_folder_with_files_polarsky_did_not_write_is_refused(png_bracket, tmp_path):
    paths, _ = png_bracket
    out = tmp_path / "mine"
    out.mkdir()
    (out / "notes.txt").write_text("keep me")
    with pytest.raises(InputError, match="already holds files polarsky did not write \\(notes.txt\\)"):
        run_stokes(paths, out)
    assert _visible(out) == ["notes.txt"]
    empty = tmp_path / "empty"
    empty.mkdir()
    run_stokes(paths, empty, pictures=False)  # an empty folder is fine
    assert "stokes.nc" in _visible(empty)


def test_a_folder_holding_the_inputs_is_refused(png_bracket, tmp_path):
    import shutil

    paths, _ = png_bracket
    folder = paths[0].parent
    before = _visible(folder)
    with pytest.raises(InputError, match=str(folder)):
        run_stokes(paths, folder)
    assert _visible(folder) == before
    # a folder polarsky wrote, whose sub-folder now holds the frames: replacing it would delete them
    out = tmp_path / "out"
    run_stokes(paths, out, pictures=False)
    (out / "frames").mkdir()
    copies = [shutil.copy(p, out / "frames") for p in paths]
    with pytest.raises(InputError, match="holds the input .*choose another output folder"):
        run_stokes(copies, out)
    assert _visible(out / "frames") == [p.name for p in paths]


def test_a_second_run_into_a_folder_being_written_stops(png_bracket, tmp_path):
    paths, _ = png_bracket
    out = tmp_path / "out"
    with FolderLock(out):
        with pytest.raises(InputError, match="another polarsky run is writing to"):
            run_stokes(paths, out)
    assert not out.exists()
    run_stokes(paths, out, pictures=False)  # the lock is gone with the first run


def test_stage_discards_on_error_and_publishes_once(tmp_path):
    out = tmp_path / "o"
    with pytest.raises(RuntimeError):
        with OutputStage(out, command="test") as stage:
            stage.path("a.txt").write_text("a")
            raise RuntimeError("boom")
    assert not out.exists() and not list(tmp_path.iterdir())
    with OutputStage(out, command="test") as stage:
        stage.path("b.txt").write_text("b")
        published = stage.publish()
    assert published == [out / "b.txt"] and _visible(out) == ["b.txt"]


@pytest.mark.parametrize("bad, match", [("", "--out is empty"), ("file", "exists and is not a folder")])
def test_bad_out_values(tmp_path, bad, match):
    (tmp_path / "file").write_text("x")
    with pytest.raises(InputError, match=match):
        OutputStage(str(tmp_path / bad) if bad else "", command="test")
