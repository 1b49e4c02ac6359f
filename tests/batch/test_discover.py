"""Finding brackets: manifest folders, angle tokens in names, EXIF capture time."""

from __future__ import annotations

import datetime as dt
from pathlib import Path

import numpy as np
import pytest
import tifffile

from polarsky.batch.discover import discover_brackets, safe_name
from polarsky.synthetic.tree import write_bracket
from polarsky.errors import InputError


def _timed_tiff(path: Path, when: dt.datetime):
    tifffile.imwrite(path, np.full((8, 8), 1000, np.uint16), datetime=when.strftime("%Y:%m:%d %H:%M:%S"))


def test_name_rule_groups_by_stem_and_reads_angles(tmp_path):
    write_bracket(tmp_path / "day1", "pier", angles_deg=(0, 45, 90, 135))
    write_bracket(tmp_path / "day1", "dock", angles_deg=(0, 60, 120), fmt="png")
    found = discover_brackets(tmp_path)
    assert [b.name for b in found] == ["day1__dock", "day1__pier"]
    pier = found[1]
    assert pier.rule == "name"
    assert pier.angles_deg == (0.0, 45.0, 90.0, 135.0)
    assert [f.name for f in pier.frames] == ["pier_000deg.tif", "pier_045deg.tif", "pier_090deg.tif",
                                             "pier_135deg.tif"]
    assert "angle token" in pier.reason and pier.problem is None


def test_name_rule_decimal_angles_and_suffix_after_token(tmp_path):
    for a in ("0", "22.5", "67.5", "112.5"):
        tifffile.imwrite(tmp_path / f"glass_{a}deg_b.tif", np.ones((4, 4), np.uint16))
    (b,) = discover_brackets(tmp_path)
    assert b.name == f"{tmp_path.name}__glass_b"
    assert b.angles_deg == (0.0, 22.5, 67.5, 112.5)


def test_manifest_folder_is_one_bracket_and_not_searched_deeper(tmp_path):
    write_bracket(tmp_path / "site" / "m1", "x", manifest=True)
    write_bracket(tmp_path / "site" / "m1" / "inner", "y")  # ignored: inside a manifest bracket
    (b,) = discover_brackets(tmp_path)
    assert b.rule == "manifest" and b.name == "site__m1"
    assert b.manifest.name == "manifest.csv" and len(b.frames) == 4
    assert b.angles_deg == (0.0, 45.0, 90.0, 135.0)
    assert "manifest.csv" in b.reason


def test_manifest_with_missing_frame_is_a_problem(tmp_path):
    paths = write_bracket(tmp_path / "m", "x", manifest=True)
    paths[2].unlink()
    (b,) = discover_brackets(tmp_path)
    assert b.problem is not None and f"names {paths[2].name!r}, which does not exist" in b.problem


def test_repeated_angle_is_read_as_the_single_bracket_reader_reads_it_and_too_few_frames_fail(tmp_path):
    from polarsky.read.bracket import bracket_files

    write_bracket(tmp_path, "a", angles_deg=(0, 45, 90))
    tifffile.imwrite(tmp_path / "a_45deg.tif", np.ones((4, 4), np.uint16))  # 45 again (045 and 45)
    write_bracket(tmp_path, "b", angles_deg=(0, 90))
    found = {b.name.split("__")[-1]: b for b in discover_brackets(tmp_path)}
    # the same files give the same angles as 'polarsky stokes' reads from them (3 distinct: usable)
    assert found["a"].problem is None and found["a"].angles_deg == (0.0, 45.0, 45.0, 90.0)
    files, angles, _, source = bracket_files(found["a"].frames)
    assert tuple(angles) == found["a"].angles_deg and source == "file names"
    assert "at least 3" in found["b"].problem


def test_signed_angle_tokens_read_as_every_command_reads_them(tmp_path):
    for a in ("-45", "0", "45", "90"):
        tifffile.imwrite(tmp_path / f"pier_{a}deg.png".replace(".png", ".tif"), np.ones((4, 4), np.uint16))
    (b,) = discover_brackets(tmp_path)
    assert b.problem is None and b.angles_deg == (-45.0, 0.0, 45.0, 90.0)


def test_time_rule_splits_on_gap_and_uses_configured_angles(tmp_path):
    t0 = dt.datetime(2024, 5, 1, 10, 0, 0)
    for k in range(4):
        _timed_tiff(tmp_path / f"IMG_{k:04d}.tif", t0 + dt.timedelta(seconds=2 * k))
    for k in range(4, 8):
        _timed_tiff(tmp_path / f"IMG_{k:04d}.tif", t0 + dt.timedelta(seconds=60 + 2 * k))
    found = discover_brackets(tmp_path, time_gap_s=10, angles_deg=[0, 45, 90, 135])
    assert [b.rule for b in found] == ["time", "time"]
    assert [f.name for f in found[0].frames] == [f"IMG_{k:04d}.tif" for k in range(4)]
    assert found[0].angles_deg == (0.0, 45.0, 90.0, 135.0) and found[0].problem is None
    assert "gap > 10 s" in found[0].reason
    # without angles: found, but failing with a reason that says how to fix it
    no_angles = discover_brackets(tmp_path, time_gap_s=10)
    assert all("[read] angles" in b.problem and "--angles" in b.problem for b in no_angles)


def test_time_rule_splits_a_run_of_whole_brackets(tmp_path):
    t0 = dt.datetime(2024, 5, 1, 10, 0, 0)
    for k in range(6):
        _timed_tiff(tmp_path / f"f{k}.tif", t0 + dt.timedelta(seconds=k))
    found = discover_brackets(tmp_path, time_gap_s=10, angles_deg=[0, 60, 120])
    assert [len(b.frames) for b in found] == [3, 3]


def test_time_rule_wrong_frame_count_is_a_problem(tmp_path):
    t0 = dt.datetime(2024, 5, 1, 10, 0, 0)
    for k in range(5):
        _timed_tiff(tmp_path / f"f{k}.tif", t0 + dt.timedelta(seconds=k))
    (b,) = discover_brackets(tmp_path, time_gap_s=10, angles_deg=[0, 45, 90, 135])
    assert "5 frames captured together but 4 angles" in b.problem


def test_files_without_token_or_time_become_a_failed_group(tmp_path):
    tifffile.imwrite(tmp_path / "random.tif", np.ones((4, 4), np.uint16))
    (tmp_path / "notes.txt").write_text("not an image")
    (b,) = discover_brackets(tmp_path)
    assert b.rule == "none" and "random.tif" in b.problem


def test_output_folder_and_hidden_folders_are_not_searched(tmp_path):
    write_bracket(tmp_path / "in", "a")
    write_bracket(tmp_path / "out" / "old", "b")
    write_bracket(tmp_path / ".hidden", "c")
    found = discover_brackets(tmp_path, exclude_dirs=[tmp_path / "out"])
    assert [b.name for b in found] == ["in__a"]


def test_names_from_dot_dot_and_odd_characters_stay_inside(tmp_path):
    write_bracket(tmp_path / "..odd dir", "..", angles_deg=(0, 60, 120))
    found = discover_brackets(tmp_path)
    for b in found:
        assert "/" not in b.name and not b.name.startswith(".") and ".." != b.name
        out = (tmp_path / "out" / b.name).resolve()
        assert out.parent == (tmp_path / "out").resolve()


@pytest.mark.parametrize("text", ["..", ".", "../x", "a/../../b", "", "...", "-rf", "summary.csv"])
def test_safe_name_never_names_a_parent_or_hidden_folder(text):
    name = safe_name(text)
    assert name and "/" not in name and not name.startswith(".") and not name.startswith("-")
    assert name not in (".", "..")


def test_names_are_unique_and_reserved_names_avoided(tmp_path):
    write_bracket(tmp_path / "a_b", "c")
    write_bracket(tmp_path / "a b", "c")  # sanitises to the same name as a_b/c
    write_bracket(tmp_path / "summary.csv", "")  # folder named like the summary file
    names = [b.name for b in discover_brackets(tmp_path)]
    assert len(set(n.lower() for n in names)) == len(names)
    assert "summary.csv" not in names


def test_missing_root_is_an_input_error(tmp_path):
    with pytest.raises(InputError, match="is not a folder"):
        discover_brackets(tmp_path / "nope")


def test_a_symlinked_bracket_folder_is_followed_once_and_links_that_lead_nowhere_are_reported(tmp_path):
    root = tmp_path / "in"
    write_bracket(tmp_path / "elsewhere", "far")
    root.mkdir()
    (root / "linked").symlink_to(tmp_path / "elsewhere")
    (root / "back").symlink_to(".")               # a loop through a folder link: each real folder once
    (root / "dangling").symlink_to("gone")
    (root / "loop_a").symlink_to("loop_b")
    (root / "loop_b").symlink_to("loop_a")
    found = {b.name: b for b in discover_brackets(root)}
    assert found["linked__far"].rule == "name" and found["linked__far"].problem is None
    assert found["in__dangling"].problem == "dangling is a symbolic link to 'gone', which does not exist; fix or " \
                                            "remove the link"
    assert "loop_a is a symbolic link that loops" in found["in__loop_a"].problem
    assert "loop_b is a symbolic link that loops" in found["in__loop_b"].problem
    assert len(found) == 4


def test_output_folders_of_the_commands_are_not_searched(tmp_path):
    from polarsky.tasks.stokes import run_stokes

    frames = write_bracket(tmp_path / "in", "a", height=16, width=24)
    run_stokes(frames, tmp_path / "in" / "a_out")  # its PNG maps carry no angle token
    assert [b.name for b in discover_brackets(tmp_path / "in")] == ["in__a"]

