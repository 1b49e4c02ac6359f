"""Portrait and flipped frames: read as displayed, analyzer angles turned with the image.

The frames are rendered here with known Stokes maps on the *displayed* picture, then stored
the way a camera stores them (sensor layout + Orientation tag: EXIF written by Pillow,
OpenCV's JPEG encoder, tifffile TIFF and DNG tags).  The analyzer angles are given as a filter
ring on the camera reads them (on the stored layout).  The angle convention is binding
(CONVENTIONS.md: counter-clockwise as seen on the displayed image), so the AoLP map must equal
the displayed truth.  The display transforms are checked against Pillow's
``ImageOps.exif_transpose`` (a general-purpose reference implementation of TIFF 6.0 tag 274).
"""

from __future__ import annotations

import io

import numpy as np
import pytest

from polarsky.errors import InputError, PolarskyWarning
from polarsky.read.stokes_file import decode_attrs
from polarsky.read.orientation import ANGLE_MAP, angles_to_display, to_display
from polarsky.tasks.stokes import stokes_from_files
from tests.camera_files import stored_from_displayed, write_dng, write_jpeg, write_png_exif, write_tiff
from tests.synth import render_frames, smooth_scene

ANGLES_DISPLAYED = np.array([10.0, 55.0, 100.0, 145.0])


def _aolp_error(got, truth):
    return np.abs((got - truth + 90) % 180 - 90)


def _truth(h=24, w=36):
    s = smooth_scene(h, w)
    return s, np.degrees(0.5 * np.arctan2(s[2, 0], s[1, 0])) % 180


@pytest.mark.parametrize("orientation", range(1, 9))
def test_display_transform_matches_pillow_exif_transpose(orientation):
    # Pillow's exif_transpose implements TIFF 6.0 / Exif Orientation; ours must agree for all 8.
    from PIL import Image, ImageOps

    a = (np.arange(20, dtype=np.uint8) * 11).reshape(4, 5)
    ex = Image.Exif()
    ex[0x0112] = orientation
    buf = io.BytesIO()
    Image.fromarray(a).save(buf, "PNG", exif=ex)
    buf.seek(0)
    want = np.asarray(ImageOps.exif_transpose(Image.open(buf)))
    np.testing.assert_array_equal(to_display(a[None], orientation)[0], want)


@pytest.mark.parametrize("orientation", range(1, 9))
def test_angle_map_turns_a_drawn_line_like_the_pixels(orientation):
    # A line drawn at angle a (counter-clockwise as displayed, y down) on the stored frame
    # appears on the display at ANGLE_MAP's angle: measured from the displayed pixels.
    n = 41
    c = n // 2
    for a in (0.0, 30.0, 75.0, 120.0):
        img = np.zeros((n, n))
        t = np.radians(a)
        for r in np.linspace(-15, 15, 121):
            img[int(round(c - r * np.sin(t))), int(round(c + r * np.cos(t)))] = 1
        d = to_display(img[None], orientation)[0]
        ys, xs = np.nonzero(d)
        x, y = xs - c, c - ys  # y up for the angle
        cov = np.cov(np.stack([x, y]))
        measured = np.degrees(0.5 * np.arctan2(2 * cov[0, 1], cov[0, 0] - cov[1, 1])) % 180
        want = angles_to_display([a], orientation)[0] % 180
        assert _aolp_error(measured, want) < 2.5


@pytest.mark.parametrize("orientation", [3, 5, 6, 8])
def test_portrait_tiff_gives_aolp_of_the_displayed_image(tmp_path, orientation):
    s, aolp_true = _truth()
    frames = render_frames(s, ANGLES_DISPLAYED)                  # (N, 1, H, W) as displayed
    sign, turn = ANGLE_MAP[orientation]
    ring = sign * (ANGLES_DISPLAYED - turn)                       # what the ring on the camera reads
    paths = []
    for k, f in enumerate(frames):
        stored = stored_from_displayed(np.round(np.clip(f, 0, 1) * 65535).astype(np.uint16), orientation)
        paths.append(write_tiff(tmp_path / f"p{k}.tif", stored, orientation=orientation))
    with pytest.warns(PolarskyWarning, match=f"orientation {orientation}"):
        ds = stokes_from_files(paths, angles=",".join(f"{a:g}" for a in ring))
    assert ds.attrs["orientation"] == orientation
    assert ds["aolp"].shape[1:] == aolp_true.shape
    assert np.nanmax(_aolp_error(ds["aolp"].values[0], aolp_true)) < 0.05


def test_phone_jpeg_portrait_with_exif_orientation_6(tmp_path):
    # a phone stores the portrait frame landscape with Orientation 6 in the EXIF of a JPEG
    s, aolp_true = _truth(32, 48)
    frames = render_frames(s, ANGLES_DISPLAYED)
    ring = ANGLES_DISPLAYED + 90.0                                 # orientation 6 turns by -90
    paths = []
    from polarsky.core.transfer import linear_to_srgb

    for k, f in enumerate(frames):
        enc = np.round(linear_to_srgb(np.clip(f, 0, 1)) * 255).astype(np.uint8)
        paths.append(write_jpeg(tmp_path / f"IMG_{k}.jpg", stored_from_displayed(enc, 6), quality=98, orientation=6,
                                exposure_s=1 / 250, iso=100, f_number=2.0))
    with pytest.warns(PolarskyWarning):
        ds = stokes_from_files(paths, angles=",".join(f"{a:g}" for a in ring))
    err = _aolp_error(ds["aolp"].values[0], aolp_true)
    assert ds["aolp"].shape[1:] == (32, 48)
    assert np.nanmedian(err) < 1.0  # 8-bit JPEG quantization; a wrong sign would be ~30 deg off


def test_png_exif_chunk_orientation_8_is_honoured(tmp_path):
    s, aolp_true = _truth()
    frames = render_frames(s, ANGLES_DISPLAYED)
    ring = ANGLES_DISPLAYED - 90.0
    paths = [write_png_exif(tmp_path / f"q{k}.png",
                            stored_from_displayed(np.round(np.clip(f, 0, 1) * 65535).astype(np.uint16), 8),
                            orientation=8) for k, f in enumerate(frames)]
    with pytest.warns(PolarskyWarning, match="orientation 8"):
        ds = stokes_from_files(paths, angles=",".join(f"{a:g}" for a in ring))
    assert np.nanmax(_aolp_error(ds["aolp"].values[0], aolp_true)) < 0.05


def test_dng_orientation_through_libraw_flip(tmp_path):
    from polarsky.read.frames import read_frame

    cfa = np.zeros((24, 32), np.uint16)
    cfa[:, :16] = 30000
    fr = read_frame(write_dng(tmp_path / "r.dng", cfa, orientation=6))
    assert fr.orientation == 6 and fr.displayed == 6
    assert fr.data.shape[1:] == (32, 24)
    # turned 90 deg clockwise: the stored left half is the displayed top half
    assert fr.data[1, 4:12].mean() > 10 * fr.data[1, -12:-4].mean()


def test_camera_pointing_up_flips_tags_within_a_bracket(tmp_path):
    # Same sensor layout in every frame, tags 1,1,6,6: registered in sensor layout, shown as the
    # first frame, and the warning names the frames whose tag differs.
    s, aolp_true = _truth()
    frames = render_frames(s, ANGLES_DISPLAYED)
    paths = [write_tiff(tmp_path / f"u{k}.tif", np.round(np.clip(f, 0, 1) * 65535).astype(np.uint16),
                        orientation=(1 if k < 2 else 6)) for k, f in enumerate(frames)]
    with pytest.warns(PolarskyWarning, match=r"u2\.tif, u3\.tif differ from u0\.tif's 1\); all frames are shown "
                                             r"as u0\.tif \(orientation 1 \(as stored\)\)"):
        ds = stokes_from_files(paths, angles=",".join(f"{a:g}" for a in ANGLES_DISPLAYED))
    assert ds.attrs["orientation"] == 1
    assert decode_attrs(ds.attrs)["frame_orientations"] == [1, 1, 6, 6]
    assert np.nanmax(_aolp_error(ds["aolp"].values[0], aolp_true)) < 0.05


def test_orientation_option_overrides_and_angles_on_the_display(tmp_path):
    # --orientation 6 turns untagged frames; --angle-frame displayed keeps the angles as given.
    s, aolp_true = _truth()
    frames = render_frames(s, ANGLES_DISPLAYED)
    paths = [write_tiff(tmp_path / f"v{k}.tif",
                        stored_from_displayed(np.round(np.clip(f, 0, 1) * 65535).astype(np.uint16), 6))
             for k, f in enumerate(frames)]
    ds = stokes_from_files(paths, angles=",".join(f"{a:g}" for a in ANGLES_DISPLAYED), orientation="6",
                           angle_frame="displayed")
    assert np.nanmax(_aolp_error(ds["aolp"].values[0], aolp_true)) < 0.05


def test_bad_orientation_value_is_one_line_error():
    from polarsky.options.settings import Settings

    with pytest.raises(InputError, match="--orientation '9' must be auto or an orientation 1..8"):
        Settings.from_options({"orientation": "9"})


def test_mosaic_frame_with_an_orientation_tag_says_its_maps_stay_in_sensor_layout(tmp_path):
    from polarsky.read.mosaic_frames import read_mosaic_stack

    p = write_tiff(tmp_path / "m.tif", np.full((1, 8, 8), 20000, np.uint16), orientation=6)
    with pytest.warns(PolarskyWarning, match="m.tif says it is shown with orientation 6, but mosaic frames"):
        stack = read_mosaic_stack([p])
    assert stack.values.shape == (8, 8)
