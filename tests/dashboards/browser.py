"""A small headless-Chromium driver over the DevTools protocol (no browser download, no mocks).

Starts Debian's ``/usr/bin/chromium`` with a fresh profile and the network switched off
(offline emulation plus blocked http/https/ws URLs), opens pages from disk and reports what
a person would notice: console errors, uncaught exceptions, requests that left the machine,
whether every plotly div drew an SVG with data, timings, and screenshots.

Used by ``tests/dashboards/test_browser.py`` and ``bench/dashboard.py``.
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
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from websockets.sync.client import connect

__all__ = ["BrowserMissingError", "Chromium", "PageReport", "find_chromium"]

FLAGS = ("--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync",
         "--disable-extensions", "--hide-scrollbars", "--mute-audio",
         "--proxy-server=127.0.0.1:9", "--proxy-bypass-list=<-loopback>")

# Runs in the page: what plotly drew into every graph div.
_PLOTS_JS = """JSON.stringify({
  ready: document.readyState,
  plotly: typeof window.Plotly,
  plots: Array.from(document.querySelectorAll('.plotly-graph-div')).map(d => {
    const r = d.getBoundingClientRect();
    return {id: d.id, svgs: d.querySelectorAll('svg.main-svg').length,
            // a heatmap draws one <image> in its g.hm layer, not paths in a g.trace
            traces: d.querySelectorAll('svg.main-svg g.trace, svg.main-svg g.hm').length,
            marks: d.querySelectorAll('svg.main-svg g.trace path, svg.main-svg g.trace text, '
                                      + 'svg.main-svg g.hm image').length,
            x: r.left + window.scrollX, y: r.top + window.scrollY, width: r.width, height: r.height};
  })
})"""


class BrowserMissingError(RuntimeError):
    """Chromium is not installed where the tests look for it."""


def find_chromium() -> str:
    """Path of the Chromium binary ($KERMA_CHROMIUM, then `chromium` on PATH, /usr/bin/chromium)."""
    for candidate in (os.environ.get("KERMA_CHROMIUM"), shutil.which("chromium"),
                      "/usr/bin/chromium"):
        if candidate and Path(candidate).exists():
            return candidate
    raise BrowserMissingError("headless Chromium not found: install the Debian package `chromium` "
                              "(apt-get install -y chromium; .ci/run does) or set KERMA_CHROMIUM")


@dataclass
class PageReport:
    """What happened when one page was opened."""

    url: str
    load_ms: float = 0.0
    render_ms: float = 0.0
    console_errors: list[str] = field(default_factory=list)
    exceptions: list[str] = field(default_factory=list)
    external_requests: list[str] = field(default_factory=list)
    failed_requests: list[str] = field(default_factory=list)
    plots: list[dict[str, Any]] = field(default_factory=list)
    plotly: str = ""
    transferred_bytes: int = 0


class Chromium:
    """``with Chromium() as browser: report = browser.open(path)``."""

    def __init__(self, *, width: int = 1280, height: int = 900, timeout_s: float = 60.0) -> None:
        self.width, self.height, self.timeout_s = width, height, timeout_s
        self._profile: str | None = None
        self._process: subprocess.Popen[bytes] | None = None
        self._ws: Any = None
        self._next_id = 0
        self._events: list[dict[str, Any]] = []

    # -- lifecycle ------------------------------------------------------------------------
    def __enter__(self) -> Chromium:
        binary = find_chromium()
        self._profile = tempfile.mkdtemp(prefix="kerma-chromium-")
        self._process = subprocess.Popen(
            [binary, *FLAGS, f"--user-data-dir={self._profile}", "--remote-debugging-port=0",
             f"--window-size={self.width},{self.height}", "about:blank"],
            stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        port_file = Path(self._profile) / "DevToolsActivePort"
        deadline = time.monotonic() + self.timeout_s
        while not (port_file.exists() and port_file.read_text().strip()):
            if self._process.poll() is not None or time.monotonic() > deadline:
                self.__exit__(None, None, None)
                raise BrowserMissingError(f"{binary} did not start a DevTools endpoint")
            time.sleep(0.05)
        port = port_file.read_text().split()[0]
        with urllib.request.urlopen(f"http://127.0.0.1:{port}/json/list", timeout=10) as answer:
            targets = json.load(answer)
        page = next(t for t in targets if t.get("type") == "page")
        self._ws = connect(page["webSocketDebuggerUrl"], max_size=None, open_timeout=10)
        for domain in ("Page", "Runtime", "Log", "Network"):
            self.call(f"{domain}.enable")
        self.call("Network.emulateNetworkConditions", offline=True, latency=0,
                  downloadThroughput=-1, uploadThroughput=-1)
        self.call("Network.setBlockedURLs", urls=["http://*", "https://*", "ws://*", "wss://*"])
        self.call("Network.setCacheDisabled", cacheDisabled=True)
        self.call("Emulation.setDeviceMetricsOverride", width=self.width, height=self.height,
                  deviceScaleFactor=1, mobile=False)
        return self

    def __exit__(self, *exc: object) -> None:
        if self._ws is not None:
            self._ws.close()
            self._ws = None
        if self._process is not None:
            self._process.terminate()
            try:
                self._process.wait(timeout=10)
            except subprocess.TimeoutExpired:
                self._process.kill()
                self._process.wait()
            self._process = None
        if self._profile:
            shutil.rmtree(self._profile, ignore_errors=True)
            self._profile = None

    # -- protocol ---------------------------------------------------------------------------
    def call(self, method: str, **params: Any) -> dict[str, Any]:
        """Send one DevTools command and return its result; events seen meanwhile are kept."""
        self._next_id += 1
        ident = self._next_id
        self._ws.send(json.dumps({"id": ident, "method": method, "params": params}))
        deadline = time.monotonic() + self.timeout_s
        while True:
            message = json.loads(self._ws.recv(timeout=max(0.1, deadline - time.monotonic())))
            if message.get("id") == ident:
                if "error" in message:
                    raise RuntimeError(f"DevTools {method}: {message['error']}")
                return message.get("result", {})
            self._events.append(message)

    def _wait_event(self, name: str) -> dict[str, Any]:
        for i, event in enumerate(self._events):
            if event.get("method") == name:
                return self._events.pop(i)
        deadline = time.monotonic() + self.timeout_s
        while time.monotonic() < deadline:
            message = json.loads(self._ws.recv(timeout=max(0.1, deadline - time.monotonic())))
            if message.get("method") == name:
                return message
            self._events.append(message)
        raise TimeoutError(f"no {name} within {self.timeout_s} s")

    def evaluate(self, expression: str) -> Any:
        result = self.call("Runtime.evaluate", expression=expression, returnByValue=True)
        if "exceptionDetails" in result:
            raise RuntimeError(f"page script failed: {result['exceptionDetails']}")
        return result["result"].get("value")

    # -- pages ------------------------------------------------------------------------------
    def open(self, path: Path) -> PageReport:
        """Open a file from disk, wait until every plot div has drawn, report what happened."""
        url = Path(path).resolve().as_uri()
        report = PageReport(url)
        self._events.clear()
        started = time.perf_counter()
        self.call("Page.navigate", url=url)
        self._wait_event("Page.loadEventFired")
        report.load_ms = (time.perf_counter() - started) * 1000.0
        deadline = time.monotonic() + self.timeout_s
        while True:
            state = json.loads(self.evaluate(_PLOTS_JS))
            done = all(p["svgs"] > 0 and p["traces"] > 0 for p in state["plots"])
            if done or time.monotonic() > deadline:
                break
            time.sleep(0.05)
        report.render_ms = (time.perf_counter() - started) * 1000.0
        report.plots, report.plotly = state["plots"], state["plotly"]
        self.call("Runtime.evaluate", expression="1", returnByValue=True)  # flush pending events
        for event in self._events:
            method, params = event.get("method"), event.get("params", {})
            if method == "Runtime.consoleAPICalled" and params.get("type") in ("error", "assert"):
                report.console_errors.append(" ".join(str(a.get("value", a.get("description", "")))
                                                      for a in params.get("args", [])))
            elif method == "Runtime.exceptionThrown":
                details = params.get("exceptionDetails", {})
                report.exceptions.append(str(details.get("exception", {}).get("description")
                                             or details.get("text")))
            elif method == "Log.entryAdded" and params.get("entry", {}).get("level") == "error":
                report.console_errors.append(params["entry"].get("text", ""))
            elif method == "Network.requestWillBeSent":
                requested = params.get("request", {}).get("url", "")
                if not requested.startswith(("file:", "data:", "blob:", "about:")):
                    report.external_requests.append(requested)
            elif method == "Network.loadingFailed":
                report.failed_requests.append(f"{params.get('errorText')} ({params.get('requestId')})")
            elif method == "Network.loadingFinished":
                report.transferred_bytes += int(params.get("encodedDataLength", 0))
        return report

    def screenshot_element(self, element_id: str) -> bytes:
        """PNG of one element, scrolled into the viewport first and captured there (at most the
        viewport's size). A capture beyond the viewport lays the page out at its whole height for
        the shot, and plotly's responsive figures could then be redrawing, empty, as the shot was
        taken (the data-quality page's first figure came out with 4 colours once in ~10 runs of
        the suite)."""
        script = """(() => {
          const d = document.getElementById(%s);
          d.scrollIntoView({block: 'start', inline: 'start'});
          const r = d.getBoundingClientRect();
          return JSON.stringify({drawn: d.querySelectorAll('svg.main-svg g.trace, svg.main-svg g.hm').length,
                                 x: r.left + window.scrollX, y: r.top + window.scrollY,
                                 width: Math.min(r.width, window.innerWidth - Math.max(r.left, 0)),
                                 height: Math.min(r.height, window.innerHeight - Math.max(r.top, 0))});
        })()""" % json.dumps(element_id)
        deadline = time.monotonic() + self.timeout_s
        while True:   # drawn where it now is (a figure coming into view may draw or redraw)
            box = json.loads(self.evaluate(script))
            if box["drawn"] > 0 or time.monotonic() > deadline:
                break
            time.sleep(0.05)
        clip = {k: box[k] for k in ("x", "y", "width", "height")}
        return base64.b64decode(self.call("Page.captureScreenshot", format="png",
                                          clip={**clip, "scale": 1})["data"])

    def screenshot(self, *, clip: dict[str, float] | None = None, full_page: bool = False) -> bytes:
        """PNG of the viewport, of a clip rectangle (page coordinates), or of the whole page."""
        params: dict[str, Any] = {"format": "png"}
        if full_page:
            size = self.call("Page.getLayoutMetrics")["cssContentSize"]
            clip = {"x": 0, "y": 0, "width": size["width"], "height": size["height"]}
        if clip is not None:
            params["clip"] = {**clip, "scale": 1}
            params["captureBeyondViewport"] = True
        return base64.b64decode(self.call("Page.captureScreenshot", **params)["data"])
