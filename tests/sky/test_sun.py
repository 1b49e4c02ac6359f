"""Sun position, time and place: validation against NREL SPA, and input handling."""

import datetime as dt

import numpy as np
import pytest

from polarsky.errors import InputError
from polarsky.options.syntax import parse_when
from polarsky.read.exif import read_metadata as read_exif
from polarsky.sky.sun import resolve_time_place, sun_position


def test_spa_worked_example_reda_andreas_2004():
    # Source: Reda & Andreas (2004), NREL/TP-560-34302, worked example (also the expected output
    # of NREL's spa_tester.c): 2003-10-17 12:30:30 at UTC-7, 39.742476 N, 105.1786 W, 1830.14 m,
    # 820 mbar, 11 C, delta-T 67 s -> topocentric zenith 50.11162 deg, azimuth 194.34024 deg.
    when = parse_when("2003-10-17T12:30:30-07:00")
    sp = sun_position(when, 39.742476, -105.1786, altitude_m=1830.14, pressure_hpa=820.0,
                      temperature_c=11.0, delta_t_s=67.0)
    assert sp["zenith_deg"] == pytest.approx(50.11162, abs=1e-4)
    assert sp["azimuth_deg"] == pytest.approx(194.34024, abs=1e-4)
    # same report: elevation without refraction e0 = 39.872046, refraction 0.016332 deg
    assert sp["elevation_geometric_deg"] == pytest.approx(39.872046, abs=1e-4)
    assert sp["elevation_deg"] - sp["elevation_geometric_deg"] == pytest.approx(0.016332, abs=1e-5)


def test_refraction_follows_pressure_and_temperature():
    # SPA refraction term scales with P/1010 * 283/(273+T) (Reda & Andreas 2004, eq. 42)
    when = parse_when("2003-10-17T12:30:30-07:00")
    a = sun_position(when, 39.742476, -105.1786, altitude_m=1830.14, pressure_hpa=820, temperature_c=11, delta_t_s=67)
    b = sun_position(when, 39.742476, -105.1786, altitude_m=1830.14, pressure_hpa=1010, temperature_c=10, delta_t_s=67)
    ra = a["elevation_deg"] - a["elevation_geometric_deg"]
    rb = b["elevation_deg"] - b["elevation_geometric_deg"]
    assert rb / ra == pytest.approx((1010 / 820) * (284 / 283), rel=1e-3)


def test_same_instant_in_other_offsets_gives_same_sun():
    a = sun_position(parse_when("2024-06-21T12:00:00+02:00"), 47.0, 8.0)
    b = sun_position(parse_when("2024-06-21T10:00:00Z"), 47.0, 8.0)
    assert a["azimuth_deg"] == pytest.approx(b["azimuth_deg"], abs=1e-9)


@pytest.mark.parametrize("text", ["2024-06-21T12:00:00", "2024-06-21 12:00"])
def test_naive_time_is_an_error(text):
    with pytest.raises(InputError, match="no UTC offset"):
        parse_when(text)


def test_unparseable_time_is_an_error():
    with pytest.raises(InputError, match="not an ISO 8601"):
        parse_when("yesterday noon")


def test_bad_latitude():
    with pytest.raises(InputError, match="--lat 95"):
        sun_position(parse_when("2024-06-21T12:00:00Z"), 95.0, 0.0)


def _jpeg_with_exif(path, *, offset="+02:00", gps=True):
    from PIL import Image
    from PIL.TiffImagePlugin import IFDRational

    im = Image.fromarray(np.zeros((8, 8, 3), np.uint8))
    ex = Image.Exif()
    e = ex.get_ifd(0x8769)
    e[0x9003] = "2024:06:21 17:30:00"
    if offset:
        e[0x9011] = offset
    e[0x920A] = IFDRational(24, 1)
    if gps:
        g = ex.get_ifd(0x8825)
        g[1], g[2], g[3], g[4] = "S", (33.0, 52.0, 30.0), "W", (70.0, 15.0, 0.0)
        g[5], g[6] = b"\x00", 512.5
    im.save(path, exif=ex)
    return path


def test_exif_time_place_and_focal(tmp_path):
    ex = read_exif(_jpeg_with_exif(tmp_path / "a.jpg"))
    assert ex["when"] == dt.datetime(2024, 6, 21, 15, 30, tzinfo=dt.timezone.utc)
    assert ex["latitude_deg"] == pytest.approx(-(33 + 52 / 60 + 30 / 3600))
    assert ex["longitude_deg"] == pytest.approx(-70.25)
    assert ex["altitude_m"] == pytest.approx(512.5)
    assert ex["focal_mm"] == pytest.approx(24.0)
    tp = resolve_time_place(exif=ex)
    assert tp["time_source"] == "exif" and tp["place_source"] == "exif"
    tp2 = resolve_time_place(when="2024-06-21T12:00:00+00:00", lat=1.0, lon=2.0, exif=ex)
    assert tp2["time_source"] == "option" and tp2["place_source"] == "option" and tp2["altitude_m"] == 0.0


def test_exif_time_without_offset_is_not_used(tmp_path):
    ex = read_exif(_jpeg_with_exif(tmp_path / "b.jpg", offset=None, gps=False))
    assert "when" not in ex
    with pytest.raises(InputError, match="has no OffsetTimeOriginal"):
        resolve_time_place(lat=1, lon=2, exif=ex)


def test_missing_place_and_half_place():
    with pytest.raises(InputError, match="place is unknown"):
        resolve_time_place(when="2024-06-21T12:00:00Z")
    with pytest.raises(InputError, match="both --lat and --lon"):
        resolve_time_place(when="2024-06-21T12:00:00Z", lat=3.0)


def test_file_without_exif(tmp_path):
    p = tmp_path / "x.bin"
    p.write_bytes(b"not an image")
    assert read_exif(p) == {}
