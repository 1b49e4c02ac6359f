"""The batch TOML settings (tables = settings groups, keys = option names) and command-line overrides."""

from __future__ import annotations

from pathlib import Path

import pytest

from polarsky.batch.config import BATCH_GROUPS, load_settings, sky_requested
from polarsky.errors import InputError
from polarsky.options.settings import option_names


def _write(tmp_path, text):
    p = tmp_path / "batch.toml"
    p.write_text(text)
    return p


def test_defaults_without_a_file():
    s, tables = load_settings()
    assert s.discovery.time_gap_s == 10.0
    assert s.read.transfer == "auto" and s.read.angles is None
    assert s.advise.region is None and s.output.pictures is True
    assert tables == set() and not sky_requested(tables)


def test_full_file_is_read_and_paths_are_relative_to_it(tmp_path):
    (tmp_path / "cal").mkdir()
    (tmp_path / "mask.png").write_bytes(b"x")
    (tmp_path / "cal" / "calibration.nc").write_bytes(b"")
    p = _write(tmp_path, """
[discovery]
time_gap_s = 4
[read]
angles = [0, 60, 120]
transfer = "linear"
max_pixels = 1000000
[estimate]
extinction = 500.0
angle_offset = 1.5
align = true
calibration = "cal"
[output]
pictures = false
[advise]
region = [1, 2, 30, 20]
protect = "mask.png"
[report]
embed_images = false
thumbnail_px = 120
""")
    s, tables = load_settings(p)
    assert s.discovery.time_gap_s == 4.0
    assert s.read.angles == (0.0, 60.0, 120.0) and s.read.transfer == "linear" and s.read.max_pixels == 1_000_000
    assert (s.estimate.extinction, s.estimate.angle_offset, s.estimate.align) == (500.0, 1.5, True)
    assert s.estimate.calibration == tmp_path / "cal" / "calibration.nc"
    assert s.output.pictures is False
    assert s.advise.region.box == (1, 2, 30, 20)
    assert s.advise.protect.path == tmp_path / "mask.png"
    assert (s.report.embed_images, s.report.thumbnail_px) == (False, 120)
    assert tables == {"discovery", "read", "estimate", "output", "advise", "report"} and not sky_requested(tables)


def test_angles_in_the_angles_syntax(tmp_path):
    s, _ = load_settings(_write(tmp_path, '[read]\nangles = "0:180:45"\n'))
    assert s.read.angles == (0.0, 45.0, 90.0, 135.0)


def test_command_line_overrides_the_file(tmp_path):
    p = _write(tmp_path, '[read]\ntransfer = "linear"\n[discovery]\ntime_gap_s = 4\n')
    s, _ = load_settings(p, overrides={"transfer": "srgb", "time_gap_s": None, "region": "0,0,8,8"})
    assert s.read.transfer == "srgb"
    assert s.discovery.time_gap_s == 4.0  # None = option not given
    assert s.advise.region.box == (0, 0, 8, 8)


@pytest.mark.parametrize("table", ["sky", "geometry"])
def test_a_sky_or_geometry_table_asks_for_the_sky_comparison(tmp_path, table):
    key = "solve = 'yaw'" if table == "sky" else "lat = 46.0"
    _, tables = load_settings(_write(tmp_path, f"[{table}]\n{key}\n"))
    assert sky_requested(tables)


def test_unknown_keys_and_tables_are_named(tmp_path):
    with pytest.raises(InputError, match=r"batch.toml \[read\]: unknown key 'transfr'; \[read\] holds angles"):
        load_settings(_write(tmp_path, "[read]\ntransfr = 'linear'\n"))
    with pytest.raises(InputError, match=r"\[stokes\] is not a batch settings table; the tables are \[read\]"):
        load_settings(_write(tmp_path, "[stokes]\ntransfer = 'linear'\n"))
    with pytest.raises(InputError, match=r"\[workers\] is not a batch settings table"):
        load_settings(_write(tmp_path, "workers = 2\n"))
    with pytest.raises(InputError, match=r"\[calibrate\] is not a batch settings table"):
        load_settings(_write(tmp_path, "[calibrate]\nbracket_size = 4\n"))


def test_not_toml_and_missing_file(tmp_path):
    with pytest.raises(InputError, match="is not valid TOML"):
        load_settings(_write(tmp_path, "[read\n"))
    with pytest.raises(InputError, match="does not exist"):
        load_settings(tmp_path / "none.toml")


@pytest.mark.parametrize("table,key,value,match", [
    ("read", "transfer", "'gamma'", "is not one of auto, linear, srgb"),
    ("read", "angles", "'0,x,90'", "not a plain number"),
    ("read", "max_pixels", "-5", "whole number of at least 1"),
    ("estimate", "extinction", "0.5", "extinction ratio Tmax/Tmin"),
    ("estimate", "align", "'maybe'", "must be true or false"),
    ("discovery", "time_gap_s", "0", "positive"),
    ("advise", "region", "'missing.png'", "neither a box"),
    ("mosaic", "demosaic", "'cubic'", "not a known demosaic method"),
    ("geometry", "pitch_deg", "120", "pitch_deg"),
    ("sky", "solve", "'tilt'", "tilt not known"),
    ("cluster", "scheduler", "'localhost'", "tcp://host:8786"),
    ("cluster", "workers", "0", "whole number of at least 1"),
    ("report", "thumbnail_px", "2.5", "whole number"),
    ("report", "embed_images", "'sometimes'", "must be true or false"),
])
def test_bad_values_name_file_table_and_key(tmp_path, table, key, value, match):
    p = _write(tmp_path, f"[{table}]\n{key} = {value}\n")
    with pytest.raises(InputError, match=match) as info:
        load_settings(p)
    assert f"{p} [{table}] {key}" in str(info.value) or f"[{table}]" in str(info.value)


@pytest.mark.parametrize("text, match", [
    ("[read]\nmanifest = 'm.csv'\n", r"\[read\]: manifest cannot be set for a whole batch; each bracket folder holds "
                                     r"its own manifest.csv"),
    ("[geometry]\nlens = 'fisheye-equidistant'\n", r"\[geometry\]: lens fisheye-equidistant needs fov_deg"),
    ("[geometry]\nhfov_deg = 200\n", r"\[geometry\]: hfov_deg 200 must be below 180"),
])
def test_settings_that_would_fail_every_bracket_are_refused_before_the_first(tmp_path, text, match):
    p = _write(tmp_path, text)
    with pytest.raises(InputError, match=match) as info:
        load_settings(p)
    assert str(info.value).startswith(str(p))


def test_protect_needs_region(tmp_path):
    with pytest.raises(InputError, match="--protect needs --region"):
        load_settings(_write(tmp_path, "[advise]\nprotect = [0, 0, 4, 4]\n"))


def test_every_table_is_documented_with_its_keys_in_the_module():
    from polarsky.batch import config

    for table in BATCH_GROUPS:
        assert f"[{table}]" in config.__doc__, table
        assert option_names(table)
    assert Path(config.__file__).is_file()
