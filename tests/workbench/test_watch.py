"""``--watch``: brackets appearing in a folder are processed and shown, the region is kept."""

from __future__ import annotations

import json
import time
import warnings

import pytest

from polarsky.cli.main import main
from polarsky.errors import PolarskyWarning

from .conftest import load_tool, write_bracket


def _wait(cond, timeout_s=30.0):
    deadline = time.monotonic() + timeout_s
    while not cond():
        if time.monotonic() > deadline:
            raise TimeoutError
        time.sleep(0.05)


def test_a_bracket_is_shown_once_complete_and_again_when_it_grows(tmp_path):
    from polarsky.options.settings import Settings
    from polarsky.workbench.session import Session
    from polarsky.workbench.watch import Watcher

    folder = tmp_path / "card"
    folder.mkdir()
    session = Session(out_dir=tmp_path / "out", watch=folder)
    w = Watcher(session, folder, Settings(), settle_s=0.2)
    try:
        w.start_entries()
        assert session.entries == []
        frames = write_bracket(folder, stem="quay", h=30, w=40)
        for f in frames[2:]:
            f.unlink()  # two frames so far: a bracket still being shot
        assert w.scan_once() == [] and (time.sleep(0.3) or w.scan_once() == [])
        write_bracket(tmp_path / "more", stem="quay", h=30, w=40)
        for f in sorted((tmp_path / "more").iterdir())[2:]:
            f.rename(folder / f.name)
        assert w.scan_once() == []  # just changed: wait until the files settle
        time.sleep(0.3)
        shown = w.scan_once()
        assert [e.name for e in shown] == ["card__quay"] and shown[0].status == "ready"
        assert shown[0].view.facts["analyzer_angles_deg"] == [0.0, 45.0, 90.0, 135.0]
        assert session.current == shown[0].id
        assert w.scan_once() == []  # nothing new
        # a fifth frame arrives: the bracket is processed again, as a new version
        write_bracket(tmp_path / "extra", stem="quay", h=30, w=40)
        (tmp_path / "extra" / "quay_045deg.png").rename(folder / "quay_022deg.png")
        w.scan_once()
        time.sleep(0.3)
        again = w.scan_once()
        assert again == shown and again[0].version == 2
        assert len(again[0].view.facts["analyzer_angles_deg"]) == 5
        assert sorted(p.name for p in folder.iterdir()) == sorted(f"quay_{a:03d}deg.png" for a in (0, 22, 45, 90, 135))
        assert not (tmp_path / "out").exists()  # watching writes nothing
    finally:
        session.close()


tool = load_tool()


@pytest.mark.browser
@pytest.mark.skipif(tool.chromium_path() is None,
                    reason="headless Chromium (Debian package 'chromium') is not installed")
def test_the_page_follows_new_brackets_and_keeps_the_region(tmp_path, capsys):
    from polarsky.workbench import prepare_workbench

    folder = tmp_path / "tethered"
    folder.mkdir()
    wb, watcher = prepare_workbench([str(folder)], tmp_path / "out", watch=True,
                                    echo=lambda *a, **k: None, watch_interval_s=0.25, watch_settle_s=0.5)
    wb.start()
    watcher.start()
    region = "10,40,120,85"

    def advise(frames):
        capsys.readouterr()
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", PolarskyWarning)
            assert main(["advise", *map(str, frames), "--region", region, "--json"]) == 0
        return json.loads(capsys.readouterr().out)["best_angle_deg"]

    try:
        with tool.Page(width=1300, height=850) as page:
            page.goto(wb.url)
            page.wait_for("document.getElementById('status').textContent.includes('waiting for a complete bracket')")
            first = write_bracket(folder, stem="shot1", seed=1)
            page.wait_for("document.body.dataset.state === 'ready' && document.body.dataset.tiles === 'complete'")
            tool.mark_box(page, [int(v) for v in region.split(",")], "region")
            page.wait_for("document.body.dataset.advice === 'ready'")
            assert float(page.eval("document.body.dataset.bestAngle")) == advise(first)
            entry = page.eval("document.body.dataset.entry")
            # the filter is turned and the next bracket arrives: the page follows, the region stays
            second = write_bracket(folder, stem="shot2", seed=1, turn_deg=35.0)
            expected = advise(second)
            assert expected != float(page.eval("document.body.dataset.bestAngle"))
            page.wait_for(f"document.body.dataset.entry !== '{entry}' && document.body.dataset.advice === 'ready'"
                          f" && document.body.dataset.bestAngle === '{expected}'")
            assert page.eval("document.getElementById('region-text').textContent") == region
            assert "2 brackets" in page.eval("document.getElementById('status').textContent")
            assert page.console_errors() == []
            assert page.outside_requests(wb.base) == []
    finally:
        watcher.stop()
        wb.stop()
