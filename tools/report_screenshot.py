"""Open a batch ``report.html`` in headless Chromium and save a screenshot.

Usage (from the repository root)::

    python tools/report_screenshot.py OUT/report.html report.png [--width 1400]

It prints the console errors and the network requests the page made (there should be
none besides the file itself and embedded ``data:`` pictures).  The small DevTools-protocol
driver here (:class:`Chromium`) is also what ``tests/batch/test_report_browser.py`` uses.
Needs ``/usr/bin/chromium`` (Debian package ``chromium``) and ``websocket-client``.
"""

from __future__ import annotations

import base64
import json
import shutil
import subprocess
import sys
import tempfile
import time
import urllib.request
from pathlib import Path

FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync",
         "--disable-dev-shm-usage", "--hide-scrollbars"]


def chromium_path() -> str | None:
    for name in ("chromium", "chromium-browser", "google-chrome"):
        p = shutil.which(name)
        if p:
            return p
    return None


class Chromium:
    """A headless Chromium driven over its DevTools protocol (one page)."""

    def __init__(self, *, width: int = 1400, height: int = 900, timeout_s: float = 30.0):
        import websocket  # websocket-client

        exe = chromium_path()
        if exe is None:
            raise RuntimeError("chromium not found; install the Debian package 'chromium'")
        self._profile = tempfile.mkdtemp(prefix="polarsky-chromium-")
        self.proc = subprocess.Popen(
            [exe, *FLAGS, f"--user-data-dir={self._profile}", "--remote-debugging-port=0",
             "--remote-debugging-address=127.0.0.1", f"--window-size={width},{height}", "about:blank"],
            stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        port_file = Path(self._profile) / "DevToolsActivePort"
        deadline = time.monotonic() + timeout_s
        while not (port_file.is_file() and port_file.read_text().strip()):
            if time.monotonic() > deadline or self.proc.poll() is not None:
                self.close()
                raise RuntimeError("chromium did not start its DevTools endpoint")
            time.sleep(0.05)
        port = int(port_file.read_text().split()[0])
        with urllib.request.urlopen(f"http://127.0.0.1:{port}/json/list", timeout=timeout_s) as r:
            pages = [t for t in json.load(r) if t.get("type") == "page"]
        self.ws = websocket.create_connection(pages[0]["webSocketDebuggerUrl"], timeout=timeout_s,
                                              suppress_origin=True)
        self._id = 0
        self.events: list[dict] = []
        for domain in ("Page", "Runtime", "Log", "Network"):
            self.send(f"{domain}.enable")
        self.send("Emulation.setDeviceMetricsOverride", width=width, height=height, deviceScaleFactor=1,
                  mobile=False)

    def send(self, method: str, **params):
        self._id += 1
        my_id = self._id
        self.ws.send(json.dumps({"id": my_id, "method": method, "params": params}))
        while True:
            msg = json.loads(self.ws.recv())
            if msg.get("id") == my_id:
                if "error" in msg:
                    raise RuntimeError(f"{method}: {msg['error']}")
                return msg.get("result", {})
            self.events.append(msg)

    def wait_event(self, method: str, timeout_s: float = 30.0):
        for e in self.events:
            if e.get("method") == method:
                return e
        deadline = time.monotonic() + timeout_s
        while time.monotonic() < deadline:
            msg = json.loads(self.ws.recv())
            self.events.append(msg)
            if msg.get("method") == method:
                return msg
        raise TimeoutError(method)

    def open(self, path) -> None:
        self.events.clear()
        self.send("Page.navigate", url=Path(path).resolve().as_uri())
        self.wait_event("Page.loadEventFired")
        self.eval("new Promise(r => setTimeout(r, 100))")  # let late console messages arrive

    def eval(self, expression: str):
        r = self.send("Runtime.evaluate", expression=expression, returnByValue=True, awaitPromise=True)
        if "exceptionDetails" in r:
            raise RuntimeError(f"script error: {r['exceptionDetails']}")
        return r["result"].get("value")

    def console_errors(self) -> list[str]:
        out = []
        for e in self.events:
            m, p = e.get("method"), e.get("params", {})
            if m == "Runtime.exceptionThrown":
                out.append(p["exceptionDetails"].get("text", "exception"))
            elif m == "Runtime.consoleAPICalled" and p.get("type") in ("error", "assert"):
                out.append(" ".join(str(a.get("value", a.get("description", ""))) for a in p.get("args", [])))
            elif m == "Log.entryAdded" and p["entry"].get("level") == "error":
                out.append(p["entry"].get("text", ""))
        return out

    def requests(self) -> list[str]:
        return [e["params"]["request"]["url"] for e in self.events if e.get("method") == "Network.requestWillBeSent"]

    def screenshot(self, path, *, full_page: bool = True) -> Path:
        params = {"format": "png"}
        if full_page:
            m = self.send("Page.getLayoutMetrics")["cssContentSize"]
            params.update(captureBeyondViewport=True,
                          clip={"x": 0, "y": 0, "width": m["width"], "height": m["height"], "scale": 1})
        data = self.send("Page.captureScreenshot", **params)["data"]
        path = Path(path)
        path.write_bytes(base64.b64decode(data))
        return path

    def close(self) -> None:
        try:
            if getattr(self, "ws", None) is not None:
                self.ws.close()
        finally:
            if self.proc.poll() is None:
                self.proc.terminate()
                try:
                    self.proc.wait(10)
                except subprocess.TimeoutExpired:
                    self.proc.kill()
                    self.proc.wait(10)
            shutil.rmtree(self._profile, ignore_errors=True)

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()


def main(argv=None) -> int:
    import argparse

    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("report")
    ap.add_argument("png")
    ap.add_argument("--width", type=int, default=1400)
    a = ap.parse_args(argv)
    with Chromium(width=a.width) as c:
        c.open(a.report)
        rows = c.eval("document.querySelectorAll('#brackets tbody tr').length")
        c.screenshot(a.png)
        errors, reqs = c.console_errors(), c.requests()
    print(f"rows: {rows}")
    print(f"console errors: {errors or 'none'}")
    print(f"requests: {[u[:60] for u in reqs]}")
    print(f"screenshot: {a.png}")
    return 1 if errors else 0


if __name__ == "__main__":
    sys.exit(main())
