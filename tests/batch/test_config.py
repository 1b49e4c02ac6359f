"""The batch TOML settings and their command-line overrides."""

from __future__ import annotations

import pytest

from polarsky.batch.config import DEFAULTS, load_config, merge_settings, parse_box
from polarsky.errors import InputError


def _write(tmp_path, text):
    p = tmp_path / "batch.toml"
    p.write_text(text)
    return p


def test_defaults_without_a_file():
    s = merge_settings()
    assert s["discovery"]["time_gap_s"] == 10.0
    assert s["stokes"]["transfer"] == "auto"
    assert s["advise"]["region"] is None and s["sky"] == {}


def test_full_file_is_read_and_paths_are_relative_to_it(tmp_path):
    (tmp_path / "cal.nc").write_bytes(b"x")
    (tmp_path / "mask.png").write_bytes(b"x")
    p = _write(tmp_path, """
[discovery]
time_gap_s = 4
angles_deg = [0, 60, 120]
[stokes]
transfer = "linear"
extinction = 500.0
angle_offset_deg = 1.5
align = true
calibration = "cal.nc"
max_pixels = 1000000
[advise]
region = [1, 2, 30, 20]
protect = "mask.png"
[report]
embed_images = false
thumbnail_px = 120
""")
    raw, base = load_config(p)
    s = merge_settings(raw, base=base, source=str(p))
    assert s["discovery"]["angles_deg"] == [0.0, 60.0, 120.0]
    assert s["stokes"]["calibration"] == str((tmp_path / "cal.nc").resolve())
    assert s["advise"]["region"] == (1, 2, 30, 20)
    assert s["advise"]["protect"] == str((tmp_path / "mask.png").resolve())
    assert s["report"] == {"embed_images": False, "thumbnail_px": 120}


def test_command_line_overrides_the_file(tmp_path):
    p = _write(tmp_path, '[stokes]\ntransfer = "linear"\n[discovery]\ntime_gap_s = 4\n')
    raw, base = load_config(p)
    s = merge_settings(raw, base=base, overrides={"stokes.transfer": "srgb", "discovery.time_gap_s": None,
                                                  "advise.region": "0,0,8,8"})
    assert s["stokes"]["transfer"] == "srgb"
    assert s["discovery"]["time_gap_s"] == 4.0  # None = option not given
    assert s["advise"]["region"] == (0, 0, 8, 8)


def test_unknown_keys_and_tables_are_named(tmp_path):
    p = _write(tmp_path, "[stokes]\ntransfr = 'linear'\nfoo = 1\n[plots]\nx = 1\n")
    with pytest.raises(InputError, match=r"unknown key\(s\) in config .*stokes\.transfr, stokes\.foo, \[plots\]"):
        load_config(p)


def test_top_level_value_is_unknown(tmp_path):
    with pytest.raises(InputError, match="unknown key.*workers"):
        load_config(_write(tmp_path, "workers = 2\n"))


def test_not_toml_and_missing_file(tmp_path):
    with pytest.raises(InputError, match="is not valid TOML"):
        load_config(_write(tmp_path, "[stokes\n"))
    with pytest.raises(InputError, match="does not exist"):
        load_config(tmp_path / "none.toml")


@pytest.mark.parametrize("table,key,value,match", [
    ("stokes", "transfer", "'gamma'", "must be auto, linear or srgb"),
    ("stokes", "extinction", "0.5", "must be > 1"),
    ("stokes", "align", "1", "must be true or false"),
    ("stokes", "calibration", "'nope.nc'", "calibration file .*nope.nc does not exist"),
    ("stokes", "max_pixels", "-5", "positive"),
    ("discovery", "time_gap_s", "0", "positive"),
    ("discovery", "angles_deg", "[0, 90]", "at least 3 angles"),
    ("discovery", "manifest_name", "'a/b.csv'", "plain file name"),
    ("advise", "region", "[5, 5, 2, 9]", "x1>x0"),
    ("advise", "region", "'missing.png'", "mask .*missing.png does not exist"),
    ("cluster", "scheduler", "'localhost'", "tcp://host:8786"),
    ("cluster", "workers", "0", "positive"),
    ("report", "thumbnail_px", "2.5", "whole number"),
    ("report", "embed_images", "'yes'", "true, false or"),
])
def test_bad_values_name_key_and_file(tmp_path, table, key, value, match):
    p = _write(tmp_path, f"[{table}]\n{key} = {value}\n")
    raw, base = load_config(p)
    with pytest.raises(InputError, match=match) as info:
        merge_settings(raw, base=base, source=str(p))
    assert key in str(info.value) or "mask" in str(info.value)


def test_protect_needs_region():
    with pytest.raises(InputError, match="protect needs a region"):
        merge_settings({"advise": {"protect": [0, 0, 4, 4]}})


def test_parse_box_forms(tmp_path):
    assert parse_box([0, 1, 2, 3], what="region") == (0, 1, 2, 3)
    assert parse_box(" 0, 1 ,2,3", what="region") == (0, 1, 2, 3)
    with pytest.raises(InputError, match="four integers"):
        parse_box("a,b,c,d", what="region")
    with pytest.raises(InputError, match="x0,y0,x1,y1 or a mask"):
        parse_box(3.5, what="region")


def test_every_default_table_is_documented():
    from polarsky.batch import config

    for table, keys in DEFAULTS.items():
        assert f"[{table}]" in config.__doc__
        for key in keys:
            assert key in config.__doc__
