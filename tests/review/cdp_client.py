"""A small Chrome DevTools protocol client over websocket-client, for headless Chromium.

Used by the browser test and by ``benchmarks/review_bench.py`` (page load, screenshot).
"""

from __future__ import annotations

import base64
import json
import os
import shutil
import subprocess
import tempfile
import time
import urllib.request


def chromium_path() -> str | None:
    for name in ("chromium", "chromium-browser"):
        p = shutil.which(name)
        if p:
            return p
    return "/usr/bin/chromium" if os.path.exists("/usr/bin/chromium") else None


def _read(path: str) -> str:
    try:
        with open(path, encoding="utf-8") as fh:
            return fh.read().strip()
    except OSError:
        return ""


class Browser:
    """Headless Chromium with one page, driven through the DevTools protocol."""

    def __init__(self, url: str, *, width: int = 1400, height: int = 860, timeout_s: float = 60):
        import websocket

        self.tmp = tempfile.TemporaryDirectory(prefix="sectio-chromium-")
        self.proc = subprocess.Popen(
            [chromium_path(), "--headless=new", "--no-sandbox", "--disable-gpu",
             "--no-first-run", "--no-default-browser-check", "--disable-extensions",
             "--remote-debugging-address=127.0.0.1", "--remote-debugging-port=0",
             f"--user-data-dir={self.tmp.name}", f"--window-size={width},{height}",
             "about:blank"],
            stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        port_file = os.path.join(self.tmp.name, "DevToolsActivePort")
        t0 = time.monotonic()
        while not _read(port_file):
            if time.monotonic() - t0 > timeout_s or self.proc.poll() is not None:
                self.close()
                raise RuntimeError("chromium did not start")
            time.sleep(0.1)
        port = int(_read(port_file).split()[0])
        pages = []
        while not pages:
            with urllib.request.urlopen(f"http://127.0.0.1:{port}/json/list") as r:
                pages = [p for p in json.load(r) if p.get("type") == "page"]
            time.sleep(0.05)
        self.ws = websocket.create_connection(pages[0]["webSocketDebuggerUrl"],
                                              timeout=timeout_s, suppress_origin=True)
        self._id = 0
        self.call("Page.enable")
        self.call("Runtime.enable")
        self.navigate(url)

    def call(self, method: str, **params):
        self._id += 1
        self.ws.send(json.dumps({"id": self._id, "method": method, "params": params}))
        while True:
            msg = json.loads(self.ws.recv())
            if msg.get("id") == self._id:
                if "error" in msg:
                    raise RuntimeError(f"{method}: {msg['error']}")
                return msg.get("result", {})

    def navigate(self, url: str) -> None:
        self.call("Page.navigate", url=url)

    def js(self, expr: str):
        r = self.call("Runtime.evaluate", expression=expr, returnByValue=True, awaitPromise=True)
        if "exceptionDetails" in r:
            raise RuntimeError(f"{expr}: {r['exceptionDetails']}")
        return r["result"].get("value")

    def wait_for(self, expr: str, *, timeout_s: float = 60.0):
        t0 = time.monotonic()
        while time.monotonic() - t0 < timeout_s:
            try:
                v = self.js(expr)
            except RuntimeError:
                v = None
            if v:
                return v
            time.sleep(0.05)
        raise TimeoutError(f"timed out waiting for {expr}")

    def click(self, x: float, y: float, *, count: int = 1) -> None:
        for kind in ("mousePressed", "mouseReleased"):
            self.call("Input.dispatchMouseEvent", type=kind, x=x, y=y, button="left",
                      clickCount=count)

    def drag(self, pts) -> None:
        (x0, y0), rest = pts[0], pts[1:]
        self.call("Input.dispatchMouseEvent", type="mouseMoved", x=x0, y=y0)
        self.call("Input.dispatchMouseEvent", type="mousePressed", x=x0, y=y0, button="left",
                  clickCount=1)
        for x, y in rest:
            self.call("Input.dispatchMouseEvent", type="mouseMoved", x=x, y=y, button="left")
        x, y = pts[-1]
        self.call("Input.dispatchMouseEvent", type="mouseReleased", x=x, y=y, button="left",
                  clickCount=1)

    def screenshot(self, path) -> None:
        data = self.call("Page.captureScreenshot", format="png")["data"]
        with open(path, "wb") as fh:
            fh.write(base64.b64decode(data))

    def close(self) -> None:
        try:
            self.ws.close()
        except Exception:  # noqa: BLE001
            pass
        if self.proc.poll() is None:
            self.proc.terminate()
            try:
                self.proc.wait(10)
            except subprocess.TimeoutExpired:
                self.proc.kill()
        self.tmp.cleanup()
