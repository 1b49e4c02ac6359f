"""report.html contents and the thumbnails (without a browser; see test_report_browser.py)."""

from __future__ import annotations

import numpy as np
import pytest
from PIL import Image

from polarsky.batch.report import axis_endpoints, make_thumbnails, write_report
from polarsky.batch.task import SUMMARY_COLUMNS
from polarsky.palette import COLOURS
from polarsky.synthetic.tree import write_bracket


def _row(name, status="done", **kw):
    r = {c: "" for c in SUMMARY_COLUMNS}
    r.update(name=name, status=status, frames=4, **kw)
    return r


def test_pictures_linked_beside_the_report_when_not_embedded(tmp_path):
    folder = tmp_path / "a"
    folder.mkdir()
    Image.new("RGB", (8, 8)).save(folder / "thumb_dolp.png")
    html = write_report(tmp_path / "report.html", [_row("a", mean_dolp=0.25)], out_dir=tmp_path, title="t",
                        embed_images=False).read_text()
    assert 'src="a/thumb_dolp.png"' in html and "data:image" not in html
    embedded = write_report(tmp_path / "r2.html", [_row("a")], out_dir=tmp_path, title="t").read_text()
    assert 'src="data:image/png;base64,' in embedded


def test_text_is_escaped_and_nothing_external_is_loaded(tmp_path):
    rows = [_row("b", status="failed", error='<script>alert("x")</script> & more')]
    html = write_report(tmp_path / "report.html", rows, out_dir=tmp_path, title="<t>").read_text()
    assert "<script>alert" not in html and "&lt;script&gt;alert" in html
    assert "http://" not in html and "https://" not in html and "<link" not in html
    assert html.count("<script>") == 1  # the inline sorting script only


def test_columns_for_advice_and_sky_only_when_present(tmp_path):
    plain = write_report(tmp_path / "p.html", [_row("a", mean_dolp=0.3)], out_dir=tmp_path, title="t").read_text()
    assert "best angle" not in plain and "sky DoLP" not in plain
    rich = write_report(tmp_path / "r.html", [_row("a", best_angle_deg=12.5, reduction_stops=1.2,
                                                   rms_dolp_residual=0.01)], out_dir=tmp_path,
                        title="t").read_text()
    assert "best angle" in rich and "sky DoLP" in rich and "sky residuals" in rich


@pytest.mark.parametrize("angle,expect", [(0.0, ((0.0, 5.0), (10.0, 5.0))), (45.0, ((0.0, 10.0), (10.0, 0.0))),
                                          (135.0, ((10.0, 10.0), (0.0, 0.0)))])
def test_axis_line_follows_the_image_angle_convention(angle, expect):
    # CONVENTIONS.md: angles from +x counter-clockwise as displayed (toward row 0)
    got = axis_endpoints(angle, 11, 11)
    np.testing.assert_allclose(np.array(got), np.array(expect), atol=1e-9)


def test_frame_thumbnail_with_axis_is_small_and_marked(tmp_path):
    frames = write_bracket(tmp_path / "in", "x", height=30, width=40)
    out = tmp_path / "out"
    out.mkdir()
    made = make_thumbnails(out, [str(f) for f in frames], px=120, best_angle_deg=0.0)
    assert made == ["thumb_frame.png"]
    with Image.open(out / "thumb_frame.png") as im:
        a = np.asarray(im.convert("RGB"))
    assert max(a.shape[:2]) == 120
    mid = a[a.shape[0] // 2].astype(int)  # a horizontal axis crosses the middle row
    # in the recommended-axis colour of polarsky/palette.py (the same in every picture)
    axis = np.array([int(COLOURS["recommended_axis"][i:i + 2], 16) for i in (1, 3, 5)])
    assert (np.abs(mid - axis).max(axis=1) < 40).mean() > 0.9


def test_auto_embedding_stops_at_the_limit():
    from polarsky.batch.runner import EMBED_LIMIT, _embed

    assert _embed("auto", EMBED_LIMIT) and not _embed("auto", EMBED_LIMIT + 1)
    assert _embed(True, 10 ** 6) and not _embed(False, 1)
