"""The advice pictures: written whole, the data where the template says, drawn without matplotlib.

Most of this is not physics.  The outside references are the PNG decoders of OpenCV and PIL
(general-purpose libraries) that read what :func:`encode_png` writes, and the palette's colours
(docs/glossary.md).
"""

from __future__ import annotations

import os
import subprocess
import sys
import textwrap

import numpy as np
import pytest

from polarsky.palette import COLOURS
from polarsky.write.pictures import advice as adv
from polarsky.write.pictures.canvas import compose, encode_png
from polarsky.write.pictures.marks import colour_rgb, data_px


@pytest.fixture(autouse=True)
def _own_cache(tmp_path, monkeypatch):
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path / "cache"))


def _preview(h=60, w=80, channels=1):
    """A preview as the preview sink gives it: invented Stokes maps (DoLP 0.5, AoLP 30 deg)."""
    yy, xx = np.mgrid[0:h, 0:w].astype(np.float32)
    s0 = np.repeat((0.3 + 0.2 * xx / w)[None], channels, axis=0)
    s1, s2 = 0.5 * s0 * np.cos(np.radians(60)), 0.5 * s0 * np.sin(np.radians(60))
    valid = np.ones((channels, h, w), bool)
    valid[:, :3, :3] = False
    return {"S0": s0, "S1": s1.astype(np.float32), "S2": s2.astype(np.float32), "valid": valid,
            "frame0": (0.5 * (s0 + s1)).astype(np.float32)}


def _masks(h=60, w=80):
    region = np.zeros((h, w), bool)
    region[30:50, 40:70] = True
    protect = np.zeros((h, w), bool)
    protect[5:20, 10:30] = True
    return {"region": region, "protect": protect}


def _decode(path):
    import cv2

    return cv2.imread(str(path), cv2.IMREAD_COLOR)[..., ::-1]


def test_encode_png_round_trips_through_two_decoders():  # the pictures' PNG writer
    # outside references: OpenCV's and PIL's PNG decoders (W3C PNG 2nd ed. / ISO/IEC 15948:2004)
    import io

    import cv2
    from PIL import Image

    rng = np.random.default_rng(0)
    for shape in [(1, 1, 3), (7, 5, 3), (40, 33, 4)]:
        img = rng.integers(0, 256, shape, dtype=np.uint8)
        data = encode_png(img)
        assert np.array_equal(np.asarray(Image.open(io.BytesIO(data))), img)
        back = cv2.imdecode(np.frombuffer(data, np.uint8), cv2.IMREAD_UNCHANGED)
        order = [2, 1, 0] if shape[2] == 3 else [2, 1, 0, 3]
        assert np.array_equal(back[..., order], img)


@pytest.mark.parametrize("channels", [1, 3])
def test_pictures_written_with_their_sizes(tmp_path, channels):
    prev, masks = _preview(channels=channels), _masks()
    result = {"best_angle_deg": 120.0, "reduction_stops": 0.58}
    paths = adv.advice_pictures(prev, masks, result, tmp_path, step=1)
    assert [p.name for p in paths] == ["advice_axis.png", "advice_preview.png", "advice_curve.png"]
    # the figure sizes at 110 dpi, as matplotlib made them: 8.5 in wide, 11 in, 7 x 4 in
    assert _decode(paths[0]).shape[1] == round(8.5 * 110)
    assert _decode(paths[1]).shape[1] == round(11.0 * 110)
    assert _decode(paths[2]).shape[:2] == (round(4.0 * 110), round(7.0 * 110))


def test_preview_data_boxes_hold_the_composed_images(tmp_path):
    prev, masks = _preview(), _masks()
    valid = prev["valid"].all(axis=0)
    s = np.stack([prev["S0"], prev["S1"], prev["S2"]])
    top = adv._white_point(prev["S0"], valid)
    pic = adv.preview_picture(s, valid, {"region": masks["region"]}, 120.0, 0.58, top=top)
    tpl = adv.template("advice_preview", {"shape": [60, 80], "step": 1, "title": "filter at 0.0 deg (predicted)",
                                          "suptitle": "Same brightness scale in both panels"}, adv._draw_preview)
    at_best = adv.intensity_at(s, 120.0).astype(np.float32)
    want = compose(tpl, adv.display_rgb(0.5 * s[0], valid, top), adv.display_rgb(at_best, valid, top))
    for axes, (x0, y0, x1, y1) in enumerate(tpl.boxes):
        # the region sits in the right half of the data; compare the left half and the top rows
        # of each box, away from the outline, the label and the frame drawn over the box's edge
        xr = x0 + int(0.45 * (x1 - x0))
        yb = y0 + int(0.45 * (y1 - y0))
        assert np.array_equal(pic[y0 + 2:y1 - 2, x0 + 2:xr], want[y0 + 2:y1 - 2, x0 + 2:xr])
        assert np.array_equal(pic[y0 + 2:yb, x0 + 2:x1 - 2], want[y0 + 2:yb, x0 + 2:x1 - 2])


@pytest.mark.parametrize("key", ["region", "protect"])
def test_outline_pixels_carry_the_region_colour(key):
    prev, masks = _preview(), _masks()
    valid = prev["valid"].all(axis=0)
    top = adv._white_point(prev["S0"], valid)
    pic = adv.axis_picture(prev["frame0"], valid, masks, 30.0, top=top)  # the axis line crosses no outline mid-edge
    tpl = adv.template("advice_axis", {"shape": [60, 80], "step": 1, "regions": ["region", "protect"],
                                       "axis_label": "set the filter axis here: 000.0 deg"}, adv._draw_axis)
    rows, cols = np.nonzero(masks[key])
    # the middle of the right edge of the outline (the edge between pixels at x = x1 - 0.5)
    x, y = data_px(tpl, cols.max() + 0.5, 0.5 * (rows.min() + rows.max()))
    colour = np.array(colour_rgb(COLOURS[key]))
    assert np.abs(pic[int(y), int(x)].astype(int) - colour).max() <= 2  # the line's core: the colour itself


def test_curve_axes_fixed_and_curves_in_the_data_box():
    sums = {"region": np.array([1.0, 0.5, 0.0]), "protect": np.array([1.0, 0.0, 0.0])}
    pic = adv.curve_picture(sums, 90.0)
    pic2 = adv.curve_picture({"region": np.array([1.0, 0.0, 0.9]), "protect": np.array([1.0, 0.0, 0.0])}, 135.0)
    tpl = adv.template("advice_curve", {"curves": ["region", "protect"], "recommended": "recommended 00.0 deg",
                                        "loc": "upper right"}, adv._draw_curve)
    x0, y0, x1, y1 = tpl.box
    # outside the data box the two pictures are the same template (titles, ticks, labels)
    assert np.array_equal(pic[:y0 - 2], pic2[:y0 - 2]) and np.array_equal(pic[y1 + 2:], pic2[y1 + 2:])
    # the ideal analyzer of CONVENTIONS.md, I = 1/2 (S0 + S1 cos 2theta + S2 sin 2theta) (Malus's
    # law in Stokes form): S1/S0 = 0.5 passes 0.5 (1 + 0.5 cos 2theta) of S0
    orange = np.array(colour_rgb(COLOURS["region"]))
    for angle, frac in ((20.0, 0.69151), (150.0, 0.625)):
        x, y = data_px(tpl, angle, frac)
        assert np.abs(pic[int(y), int(x)].astype(int) - orange).max() <= 2


def test_no_matplotlib_with_a_warm_cache(tmp_path):
    from tests.synth import render_frames, smooth_scene, write_pngs

    angles = [0, 45, 90, 135]
    paths = write_pngs(tmp_path / "in", render_frames(smooth_scene(40, 56), angles), angles)
    env = {**os.environ, "XDG_CACHE_HOME": str(tmp_path / "cache")}

    def run(out):
        code = textwrap.dedent(f"""
            import sys
            from polarsky.tasks.advise import run_advise
            run_advise({[str(p) for p in paths]!r}, out_dir={str(tmp_path / out)!r}, region="30,10,50,30",
                       protect="2,2,20,20")
            print("matplotlib" in sys.modules)
        """)
        r = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, env=env, cwd=tmp_path)
        assert r.returncode == 0, r.stderr
        return r.stdout.strip()

    assert run("out") == "True"  # a cold cache: matplotlib draws the templates
    assert run("out2") == "False"
    names = sorted(p.name for p in (tmp_path / "out2").iterdir() if not p.name.startswith("."))
    assert names == ["advice.json", "advice_axis.png", "advice_curve.png", "advice_preview.png"]
