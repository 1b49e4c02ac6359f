"""The page in a real browser: headless Chromium (Debian package ``chromium``) driven over
its DevTools protocol by tools/workbench_screenshot.py.

A colour bracket (three channels) is shown; the page's numbers are checked against
``polarsky advise --json`` and the ``stokes.nc`` of ``polarsky stokes`` for the same
frames, and its per-pixel preview behind a virtual filter against Malus's law.
"""

from __future__ import annotations

import json
import time
import urllib.request
import warnings

import numpy as np
import pytest

from polarsky.cli.main import main
from polarsky.errors import PolarskyWarning

from .conftest import advise_json, load_tool, write_bracket

pytestmark = pytest.mark.browser
tool = load_tool()
if tool.chromium_path() is None:  # pragma: no cover - .ci/run installs it
    pytest.skip("headless Chromium (Debian package 'chromium') is not installed", allow_module_level=True)


@pytest.fixture(scope="module")
def colour(tmp_path_factory):
    from polarsky.read.stokes_file import open_stokes
    from polarsky.workbench import prepare_workbench

    base = tmp_path_factory.mktemp("wb-colour")
    frames = write_bracket(base / "in", channels=3, seed=2)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", PolarskyWarning)
        # float32 as computed: the page's full-resolution values are compared with the file's
        assert main(["stokes", *map(str, frames), "--out", str(base / "stokes"), "--precision", "full"]) == 0
    wb, _ = prepare_workbench([str(f) for f in frames], base / "out", echo=lambda *a, **k: None)
    wb.start()
    yield wb, frames, open_stokes(base / "stokes" / "stokes.nc")
    wb.stop()


@pytest.fixture(scope="module")
def page(colour):
    wb = colour[0]
    with tool.Page(width=1300, height=850) as p:
        p.goto(wb.url)
        p.wait_for("document.body.dataset.tiles === 'complete'")
        yield p
        assert p.console_errors() == []
        assert p.outside_requests(wb.base) == []


def advise(frames, region, protect=None, capsys=None):
    return json.loads(advise_json(capsys, frames, region, protect))


def test_first_view_loads_only_from_the_workbench(page, colour):
    wb = colour[0]
    assert page.eval("document.body.dataset.state") == "ready"
    assert page.eval("document.getElementById('status').textContent").startswith("scene_000deg.png")
    # every image the first view asked for arrives (some, like the colour key, may still be in
    # flight when the tiles are complete) and none is broken
    page.wait_for("Array.from(document.images).every(i => !i.src || i.complete)", timeout_s=10)
    assert page.eval("Array.from(document.images).filter(i => i.src && !(i.complete && i.naturalWidth)).length") == 0
    assert page.console_errors() == []
    reqs = page.requests()
    assert reqs and all(u.startswith(wb.base + "/") or u.startswith("data:") for u in reqs), reqs
    assert all("token=" in u for u in reqs if u.startswith(wb.base + "/api/tile"))


def test_dragging_a_region_shows_the_angle_advise_prints(page, colour, capsys):
    wb, frames, _ = colour
    tool.mark_box(page, (10, 40, 120, 85), "region")
    page.wait_for("document.body.dataset.advice === 'ready'")
    region = page.eval("document.getElementById('region-text').textContent")
    assert region == "10,40,120,85"  # the drag lands on the pixels under the pointer
    ref = advise(frames, region, capsys=capsys)
    assert float(page.eval("document.body.dataset.bestAngle")) == ref["best_angle_deg"]
    assert page.eval("document.getElementById('best-angle').textContent") == f"{ref['best_angle_deg']:.1f}"
    table = page.eval("document.getElementById('advice-table').textContent")
    assert f"{ref['reduction_stops_ideal']:.2f} stops" in table
    # and with a protected region
    tool.mark_box(page, (60, 5, 110, 35), "protect")
    page.wait_for("document.body.dataset.advice === 'ready' && document.body.dataset.protect === '60,5,110,35'")
    page.wait_for("document.body.dataset.advice === 'ready'")
    ref = advise(frames, region, "60,5,110,35", capsys=capsys)
    page.wait_for(f"document.body.dataset.bestAngle === '{ref['best_angle_deg']}'", timeout_s=10)
    assert f"{ref['contrast_gain']:.2f}" in page.eval("document.getElementById('advice-table').textContent")
    # the command shown is the one that printed ref
    cmd = page.eval("document.getElementById('command').textContent")
    assert "--region 10,40,120,85 --protect 60,5,110,35 --json" in cmd
    page.click('button[data-mode="move"]')


def test_readout_under_the_pointer_is_the_netcdf_value(page, colour):
    _, _, ds = colour
    for x, y in [(37, 61), (120, 20), (22, 12)]:
        page.hover(*page.screen_of_pixel(x, y))
        page.wait_for(f"document.body.dataset.readout === '{x},{y}'")
        rows = page.eval("Array.from(document.querySelectorAll('#values tr')).filter(r => r.dataset.channel)"
                         ".map(r => Object.fromEntries(Array.from(r.cells).filter(c => c.className)"
                         ".map(c => [c.className, [c.textContent, c.dataset.value || null]])))")
        channels = page.eval("Array.from(document.querySelectorAll('#values tr')).map(r => r.dataset.channel)")
        assert channels == ["R", "G", "B"]
        for k, row in enumerate(rows):
            if not ds["valid"].values[k, y, x]:
                assert "not valid" in row["invalid"][0]
            for cls, var, label, digits in [("S0", "S0", "S0", 4), ("dolp", "dolp", "DoLP", 3),
                                            ("dolp_unbiased", "dolp_unbiased", "debiased", 3),
                                            ("aolp", "aolp", "AoLP", 1)]:
                ref = ds[var].values[k, y, x]
                text, raw = row[cls]
                if not np.isfinite(ref):
                    assert raw is None and "—" in text
                    continue
                assert np.float32(float(raw)) == ref  # the full-resolution value itself
                assert text.startswith(f"{label} {ref:.{digits}f}")
            for cls, var, digits in [("aolp", "sigma_aolp", 1), ("dolp", "sigma_dolp", 3)]:
                s = float(ds[var].values[k, y, x])
                if np.isfinite(s):  # shown to the decimals of the value, or two significant digits when smaller
                    shown = float(row[cls][0].split("± ")[1].split()[0])
                    step = 10 ** -digits if s >= 10 ** -digits else 10 ** (np.floor(np.log10(s)) - 1)
                    assert abs(shown - s) <= 0.5 * step * (1 + 1e-9), (row[cls][0], s)


def _srgb8(v):
    """IEC 61966-2-1 encoding of linear values in [0, 1] to 8 bits."""
    v = np.clip(v, 0, 1)
    return np.round(255 * np.where(v <= 0.0031308, 12.92 * v, 1.055 * v ** (1 / 2.4) - 0.055))


def test_virtual_filter_preview_follows_malus(page, colour):
    """Malus's law in Stokes form, I(theta) = 1/2 (S0 + S1 cos 2theta + S2 sin 2theta)
    (Collett 2005, Field Guide to Polarization, p. 12; CONVENTIONS.md), drawn with the
    exposure of the unfiltered frame (2 I) and the sRGB transfer (IEC 61966-2-1)."""
    wb, _, ds = colour
    with urllib.request.urlopen(f"{wb.base}/api/entry?entry=0&token={wb.token}") as r:
        top = json.loads(r.read())["meta"]["top"]
    for angle in (30.0, 112.5):
        page.eval("(() => { const s = document.getElementById('filter-angle'); s.value = String(%r);"
                  " s.dispatchEvent(new Event('input')); })()" % angle)
        page.wait_for(f"document.body.dataset.filterAngle === '{angle:.1f}'")
        time.sleep(0.1)
        for x, y in [(37, 61), (100, 30)]:
            sx, sy = page.screen_of_pixel(x, y)
            rgb = page.eval("(() => { const c = document.getElementById('image'), r = c.getBoundingClientRect();"
                            f" return Array.from(c.getContext('2d').getImageData(Math.floor({sx} - r.left),"
                            f" Math.floor({sy} - r.top), 1, 1).data.slice(0, 3)); }})()")
            t = np.radians(2 * angle)
            s0, s1, s2 = (ds[n].values[:, y, x].astype(np.float64) for n in ("S0", "S1", "S2"))
            expected = _srgb8((s0 + s1 * np.cos(t) + s2 * np.sin(t)) / top)
            assert np.abs(np.array(rgb) - expected).max() <= 2, (angle, x, y, rgb, expected)
    page.click('input[name="layer"][value="frame"]')


def test_every_layer_draws_with_its_key(page):
    layers = page.eval("Array.from(document.querySelectorAll('input[name=\"layer\"]')).map(r => r.value)")
    assert {"frame", "dolp", "dolp_unbiased", "aolp", "combined", "residual", "sigma_dolp", "sigma_aolp",
            "filter"} <= set(layers)
    for layer in layers:
        page.click(f'input[name="layer"][value="{layer}"]')
        if layer == "filter":
            page.wait_for("document.body.dataset.filterAngle")
            continue
        page.wait_for(f"document.body.dataset.layer === '{layer}' && document.body.dataset.tiles === 'complete'")
        page.wait_for("(() => { const k = document.getElementById('key-img');"
                      " return k.complete && k.naturalWidth > 0; })()")
    page.click('input[name="layer"][value="frame"]')
    assert page.console_errors() == []


def test_zoom_and_pan_keep_the_pointer_on_its_pixel(page):
    view = "window.polarskyView()"
    page.click('button[data-mode="move"]')
    z0 = page.eval(f"{view}.z")
    page.click("#zoom-in")
    page.click("#zoom-in")
    assert page.eval(f"{view}.z") == pytest.approx(z0 * 2.25)
    page.click("#zoom-fit")
    sx, sy = page.screen_of_pixel(70, 45)
    page.send("Input.dispatchMouseEvent", type="mouseWheel", x=sx, y=sy, deltaX=0, deltaY=-400)
    page.wait_for(f"{view}.z > {z0 * 1.5}")
    nx, ny = page.screen_of_pixel(70, 45)  # the wheel zooms around the pointer
    assert abs(nx - sx) < 1 and abs(ny - sy) < 1
    ox, oy = page.eval(f"[{view}.ox, {view}.oy]")
    page.drag((sx, sy), (sx - 100, sy - 40))
    ox2, oy2 = page.eval(f"[{view}.ox, {view}.oy]")
    assert (ox2 - ox, oy2 - oy) == pytest.approx((-100, -40), abs=1)
    page.hover(*page.screen_of_pixel(101, 17))
    page.wait_for("document.body.dataset.readout === '101,17'")
    page.wait_for("document.body.dataset.tiles === 'complete'")
    assert page.eval("document.getElementById('where').textContent") == "x 101  y 17"
    page.click("#zoom-fit")


def test_copy_and_save_buttons(page, colour):
    wb = colour[0]
    page.wait_for("document.body.dataset.advice === 'ready'")
    page.click("#copy")
    assert page.wait_for("document.body.dataset.copied") in ("yes", "selected")
    page.click("#save")
    folder = page.wait_for("document.body.dataset.saved")
    saved = sorted(p.name for p in wb.session.out_dir.joinpath("scene_000deg").iterdir())
    assert folder.endswith(saved[-1])
    assert {"advice.json", "region.png", "protect.png"} <= {p.name for p in (wb.session.out_dir / "scene_000deg" /
                                                                               saved[-1]).iterdir()}
