"""Start a workbench on PATH..., drive it in headless Chromium, and save screenshots.

Usage (from the repository root)::

    python tools/workbench_screenshot.py /tmp/demo-out --out shots/ [--region 20,150,460,310]
        [--protect 170,200,310,280] [--width 1500 --height 950] [--set align=true ...]

Writes ``01-frame.png`` (first view), ``02-advice.png`` (region dragged, advice shown),
``03-dolp.png``, ``04-combined.png``, ``05-filter.png`` (virtual filter at the recommended
angle) and, when the result has a sky comparison, ``06-sky-residual.png``; prints the
console errors and any request that did not go to the workbench itself (there should be
none).  :class:`Page` (a DevTools-protocol driver with mouse input) is also what
``tests/workbench`` uses.  Needs ``/usr/bin/chromium`` (Debian package ``chromium``) and
``websocket-client``.
"""

from __future__ import annotations

import importlib.util
import json
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
_spec = importlib.util.spec_from_file_location("report_screenshot", ROOT / "tools" / "report_screenshot.py")
_rs = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(_rs)
chromium_path = _rs.chromium_path


class Page(_rs.Chromium):
    """Headless Chromium on one page, with mouse input and waiting helpers."""

    def goto(self, url: str, *, timeout_s: float = 30.0) -> None:
        self.events.clear()
        self.send("Page.navigate", url=url)
        self.wait_event("Page.loadEventFired", timeout_s)

    def wait_for(self, expression: str, *, timeout_s: float = 30.0, interval_s: float = 0.05):
        """Evaluate ``expression`` until it is truthy; return its value."""
        deadline = time.monotonic() + timeout_s
        while True:
            v = self.eval(expression)
            if v:
                return v
            if time.monotonic() > deadline:
                raise TimeoutError(f"waited {timeout_s} s for {expression}")
            time.sleep(interval_s)

    def mouse(self, kind: str, x: float, y: float, *, button: str = "left", buttons: int = 0) -> None:
        self.send("Input.dispatchMouseEvent", type=kind, x=x, y=y, button=button, buttons=buttons, clickCount=1,
                  pointerType="mouse")

    def hover(self, x: float, y: float) -> None:
        self.mouse("mouseMoved", x, y, button="none")

    def drag(self, start, end, *, steps: int = 8) -> None:
        (x0, y0), (x1, y1) = start, end
        self.mouse("mouseMoved", x0, y0, button="none")
        self.mouse("mousePressed", x0, y0, buttons=1)
        for k in range(1, steps + 1):
            t = k / steps
            self.mouse("mouseMoved", x0 + (x1 - x0) * t, y0 + (y1 - y0) * t, buttons=1)
        self.mouse("mouseReleased", x1, y1, buttons=0)

    def click(self, selector: str) -> None:
        self.eval(f"document.querySelector({json.dumps(selector)}).click()")

    def screen_of_pixel(self, x: float, y: float):
        """Page coordinates of the centre of image pixel (x, y) in the current view."""
        js = ("(() => { const r = document.getElementById('marks').getBoundingClientRect();"
              f" const v = window.polarskyView(); return [r.left + v.ox + ({x} + 0.5) * v.z,"
              f" r.top + v.oy + ({y} + 0.5) * v.z]; }})()")
        return self.eval(js)

    def outside_requests(self, base: str) -> list[str]:
        return [u for u in self.requests() if not (u.startswith(base + "/") or u == base or u.startswith("data:")
                                                    or u.startswith("blob:") or u == "about:blank")]


def mark_box(page: Page, box, mode: str = "region") -> None:
    """Drag the box ``x0,y0,x1,y1`` (pixels, x1/y1 exclusive) in ``mode`` (region|protect)."""
    x0, y0, x1, y1 = box
    page.click(f'button[data-mode="{mode}"]')
    page.drag(page.screen_of_pixel(x0, y0), page.screen_of_pixel(x1 - 1, y1 - 1))


def main(argv=None) -> int:
    import argparse

    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("paths", nargs="+")
    ap.add_argument("--out", default="workbench-shots")
    ap.add_argument("--region", default=None, help="box to mark, x0,y0,x1,y1 (default: lower third)")
    ap.add_argument("--protect", default=None)
    ap.add_argument("--width", type=int, default=1500)
    ap.add_argument("--height", type=int, default=950)
    ap.add_argument("--set", action="append", default=[], metavar="NAME=VALUE",
                    help="a workbench setting by name, e.g. align=true or angles=0,45,90,135 (repeatable)")
    a = ap.parse_args(argv)
    sys.path.insert(0, str(ROOT))
    from polarsky.workbench import prepare_workbench

    out = Path(a.out)
    out.mkdir(parents=True, exist_ok=True)
    options = dict(item.split("=", 1) for item in a.set)
    wb, _ = prepare_workbench(a.paths, out / "saved", echo=lambda *x, **k: None, **options)
    wb.start()
    try:
        with Page(width=a.width, height=a.height) as page:
            t0 = time.perf_counter()
            page.goto(wb.url)
            page.wait_for("document.body.dataset.tiles === 'complete'")
            print(f"first view in {time.perf_counter() - t0:.2f} s")
            page.screenshot(out / "01-frame.png", full_page=False)
            w, h = page.eval("[window.polarskyView().width, window.polarskyView().height]")
            region = [int(v) for v in a.region.split(",")] if a.region else [0, 2 * h // 3, w, h]
            mark_box(page, region, "region")
            if a.protect:
                mark_box(page, [int(v) for v in a.protect.split(",")], "protect")
            page.wait_for("document.body.dataset.advice === 'ready'")
            page.click('button[data-mode="move"]')
            page.hover(*page.screen_of_pixel((region[0] + region[2]) // 2, (region[1] + region[3]) // 2))
            page.wait_for("document.body.dataset.readout")
            time.sleep(0.3)
            page.screenshot(out / "02-advice.png", full_page=False)
            shots = [("dolp", "03-dolp.png"), ("combined", "04-combined.png")]
            for layer, name in shots:
                page.click(f'input[name="layer"][value="{layer}"]')
                page.wait_for("document.body.dataset.tiles === 'complete'")
                time.sleep(0.2)
                page.screenshot(out / name, full_page=False)
            page.click("#show-best")
            page.wait_for("document.body.dataset.filterAngle")
            time.sleep(0.3)
            page.screenshot(out / "05-filter.png", full_page=False)
            if page.eval("!!document.querySelector('input[name=\"layer\"][value=\"aolp_residual\"]')"):
                page.click('input[name="layer"][value="aolp_residual"]')
                page.wait_for("document.body.dataset.tiles === 'complete'")
                time.sleep(0.2)
                page.screenshot(out / "06-sky-residual.png", full_page=False)
            errors, outside = page.console_errors(), page.outside_requests(wb.base)
    finally:
        wb.stop()
    print(f"console errors: {errors or 'none'}")
    print(f"requests outside the workbench: {outside or 'none'}")
    print(f"screenshots in {out}")
    return 1 if errors or outside else 0


if __name__ == "__main__":
    sys.exit(main())
