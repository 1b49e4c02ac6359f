"""report.html in a real headless Chromium (Debian package ``chromium``).

The report is built from brackets processed in-process (the per-bracket task is a plain
function), so no cluster is needed here.  The screenshot is written to the test's tmp
folder and its path printed (``pytest -s`` shows it); ``tools/report_screenshot.py`` does
the same for any report.
"""

from __future__ import annotations

import importlib.util
from pathlib import Path

import pytest

from polarsky.batch.discover import discover_brackets
from polarsky.batch.report import write_report
from polarsky.batch.task import process_bracket
from polarsky.options.settings import Settings
from polarsky.synthetic.tree import write_bracket

pytestmark = pytest.mark.browser

_TOOL = Path(__file__).resolve().parents[2] / "tools" / "report_screenshot.py"
_spec = importlib.util.spec_from_file_location("report_screenshot", _TOOL)
shot = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(shot)

if shot.chromium_path() is None:  # pragma: no cover - .ci/run installs it
    pytest.skip("headless Chromium (Debian package 'chromium') is not installed", allow_module_level=True)


@pytest.fixture(scope="module")
def report(tmp_path_factory):
    base = tmp_path_factory.mktemp("report")
    root = base / "in"
    write_bracket(root / "harbour", "quay", height=48, width=64, seed=1)
    write_bracket(root / "harbour", "slip", height=48, width=64, seed=4)
    write_bracket(root / "roof", "skylight", angles_deg=(0, 90), seed=2)  # fails: too few angles
    out = base / "out"
    out.mkdir()
    with_advice = Settings.from_options({"region": [4, 4, 40, 30]})
    fast = Settings.from_options({"pictures": False})
    rows = []
    for b in discover_brackets(root):
        settings = with_advice if b.name.endswith("quay") else fast
        rows.append(process_bracket({"bracket": b, "out_dir": str(out), "settings": settings, "sky": False,
                                     "run_id": "t"}))
    path = write_report(out / "report.html", rows, out_dir=out, title="polarsky batch: test")
    return path, rows


def test_report_loads_without_errors_and_shows_every_row(report, tmp_path):
    path, rows = report
    assert [r["status"] for r in rows] == ["done", "done", "failed"]
    with shot.Chromium(width=1300) as c:
        c.open(path)
        names = c.eval("Array.from(document.querySelectorAll('#brackets tbody tr')).map(r => r.dataset.name)")
        assert sorted(names) == sorted(r["name"] for r in rows)
        assert c.console_errors() == []
        # no network: only the page itself and embedded pictures
        assert all(u.startswith(("file://", "data:")) for u in c.requests()), c.requests()
        broken = c.eval("Array.from(document.images).filter(i => !(i.complete && i.naturalWidth > 0)).length")
        alts = c.eval("Array.from(document.images).map(i => i.alt)")
        assert broken == 0
        assert {"harbour__quay first frame", "harbour__quay DoLP map", "harbour__quay AoLP map",
                "harbour__slip first frame"} <= set(alts)
        failures = c.eval("document.getElementById('failures').nextElementSibling.textContent")
        assert "roof__skylight" in failures and "at least 3 frames at distinct analyzer angles" in failures
        png = c.screenshot(tmp_path / "report.png")
        print(f"report screenshot: {png}")
        assert png.stat().st_size > 10_000


def test_columns_sort_on_click(report):
    path, rows = report
    with shot.Chromium() as c:
        c.open(path)
        heads = c.eval("Array.from(document.querySelectorAll('#brackets th')).map(h => h.textContent)")
        col = heads.index("bracket")
        order = "Array.from(document.querySelectorAll('#brackets tbody tr')).map(r => r.dataset.name)"
        c.eval(f"document.querySelectorAll('#brackets th')[{col}].click()")
        asc = c.eval(order)
        c.eval(f"document.querySelectorAll('#brackets th')[{col}].click()")
        desc = c.eval(order)
        assert asc == sorted(asc) and desc == asc[::-1]
        t = heads.index("time (s)")
        c.eval(f"document.querySelectorAll('#brackets th')[{t}].click()")
        times = c.eval(f"Array.from(document.querySelectorAll('#brackets tbody tr')).map(r => "
                       f"parseFloat(r.cells[{t}].dataset.sort))")
        assert times == sorted(times)
        assert c.console_errors() == []
