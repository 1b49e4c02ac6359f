"""The settings table: one name and one syntax for the command line, batch files and the API."""

from __future__ import annotations

import dataclasses
from pathlib import Path

import pytest

from polarsky.errors import InputError
from polarsky.options.settings import GROUPS, Settings, field_of, option_names


def test_every_option_has_a_parser_and_a_help_text():
    names = option_names()
    assert len(names) == len(set(names))  # one name, one group
    for name in names:
        md = field_of(name).metadata
        assert callable(md["parse"]) and md["help"]


def test_values_are_parsed_by_the_table():
    s = Settings.from_options({"angles": "0:180:45", "extinction": "300", "region": [1, 2, 30, 20],
                               "demosaic": "NEWTON", "when": "2024-06-21T17:30:00+02:00"})
    assert s.read.angles == (0.0, 45.0, 90.0, 135.0)
    assert s.estimate.extinction == 300.0
    assert s.advise.region.box == (1, 2, 30, 20)
    assert s.mosaic.demosaic == "newton"
    assert s.given == {"angles", "extinction", "region", "demosaic", "when"}
    assert dataclasses.is_dataclass(s.geometry) and s.geometry.when.utcoffset().total_seconds() == 7200


def test_relative_paths_follow_the_settings_file(tmp_path, monkeypatch):
    (tmp_path / "cal").mkdir()
    (tmp_path / "cal" / "calibration.nc").write_bytes(b"")
    s = Settings.from_options({"calibration": "cal"}, base=tmp_path)
    assert s.estimate.calibration == tmp_path / "cal" / "calibration.nc"  # the folder names its file
    monkeypatch.chdir(tmp_path)
    assert Settings.from_options({"calibration": "cal"}).estimate.calibration == Path("cal") / "calibration.nc"


def test_a_missing_calibration_is_refused_when_given(tmp_path):
    with pytest.raises(InputError, match="calibration .*nope does not exist"):
        Settings.from_options({"calibration": "nope"}, base=tmp_path)


@pytest.mark.parametrize("options, match", [
    ({"angels": "0,45"}, "unknown setting 'angels'"),
    ({"extinction": 0.5}, "--extinction 0.5 is the extinction ratio"),
    ({"transfer": "gamma"}, "--transfer 'gamma' is not one of auto, linear, srgb"),
    ({"protect": "0,0,4,4"}, "--protect needs --region"),
    ({"pitch_deg": 120}, "--pitch-deg"),
    ({"solve": "yaw,tilt"}, "tilt not known"),
])
def test_bad_settings_name_the_option(options, match):
    with pytest.raises(InputError, match=match):
        Settings.from_options(options)


def test_mosaic_options_need_a_cell_and_bracket_options_refuse_one():
    with pytest.raises(InputError, match="--demosaic apply only to mosaic frames"):
        Settings.from_options({"demosaic": "bilinear"}).check_frame_options()
    with pytest.raises(InputError, match="--angles describes a bracket of frames"):
        Settings.from_options({"mosaic": "90,45;135,0", "angles": "0,45,90,135"}).check_frame_options()


def test_groups_are_the_batch_tables():
    from polarsky.batch.config import BATCH_GROUPS

    assert set(BATCH_GROUPS) <= set(GROUPS)
