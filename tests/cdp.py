"""A small driver for headless Chromium (Debian's ``chromium`` package) over the DevTools protocol.

Used by the handbook's browser test: it opens pages from disk, clicks links,
records console errors, uncaught exceptions, failed loads and every request
the page makes, and takes screenshots. The protocol messages used are the
documented ``Page``, ``Runtime``, ``Log`` and ``Network`` domains.
"""

from __future__ import annotations

import base64
import json
import shutil
import subprocess
import time
import urllib.request
from pathlib import Path
from typing import Any

FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
         "--disable-component-update", "--disable-sync", "--no-first-run", "--no-default-browser-check",
         "--hide-scrollbars", "--window-size=1280,1600"]


def find_chromium() -> str | None:
    for name in ("chromium", "chromium-browser"):
        path = shutil.which(name)
        if path:
            return path
    return None


def chromium_or_skip() -> str:
    """Chromium's path; else the test is skipped, or fails when ``CI=true`` (where it must run)."""
    import os

    import pytest

    exe = find_chromium()
    if exe is None:
        if os.environ.get("CI") == "true":
            pytest.fail("CI=true but no Chromium found: install Debian's chromium package (.ci/run does)")
        pytest.skip("no Chromium found: install Debian's chromium package to run the browser test")
    return exe


class Browser:
    def __init__(self, executable: str, profile: Path, timeout: float = 60.0) -> None:
        import websocket  # websocket-client

        self.timeout = timeout
        profile.mkdir(parents=True, exist_ok=True)
        self.proc = subprocess.Popen([executable, *FLAGS, f"--user-data-dir={profile}", "--remote-debugging-port=0",
                                      "about:blank"], stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        port_file = profile / "DevToolsActivePort"
        deadline = time.monotonic() + timeout
        while not (port_file.is_file() and port_file.read_text().strip()):
            if self.proc.poll() is not None or time.monotonic() > deadline:
                self.close()
                raise RuntimeError("chromium did not start its DevTools endpoint")
            time.sleep(0.1)
        port = int(port_file.read_text().split()[0])
        with urllib.request.urlopen(f"http://127.0.0.1:{port}/json/list", timeout=timeout) as resp:
            targets = json.load(resp)
        page = next(t for t in targets if t.get("type") == "page")
        self.ws = websocket.create_connection(page["webSocketDebuggerUrl"], timeout=timeout, suppress_origin=True)
        self.next_id = 0
        self.events: list[dict[str, Any]] = []
        for domain in ("Page", "Runtime", "Log", "Network"):
            self.call(f"{domain}.enable")

    def call(self, method: str, **params: Any) -> dict[str, Any]:
        self.next_id += 1
        ident = self.next_id
        self.ws.send(json.dumps({"id": ident, "method": method, "params": params}))
        while True:
            msg = json.loads(self.ws.recv())
            if msg.get("id") == ident:
                if "error" in msg:
                    raise RuntimeError(f"{method}: {msg['error']}")
                return dict(msg.get("result", {}))
            if "method" in msg:
                self.events.append(msg)

    def wait_for(self, method: str) -> dict[str, Any]:
        deadline = time.monotonic() + self.timeout
        while time.monotonic() < deadline:
            msg = json.loads(self.ws.recv())
            if "method" in msg:
                self.events.append(msg)
                if msg["method"] == method:
                    return dict(msg)
        raise TimeoutError(method)

    def goto(self, url: str) -> None:
        self.call("Page.navigate", url=url)
        self.wait_for("Page.loadEventFired")

    def evaluate(self, expression: str) -> Any:
        found = self.call("Runtime.evaluate", expression=expression, returnByValue=True)
        if "exceptionDetails" in found:
            raise RuntimeError(str(found["exceptionDetails"]))
        return found.get("result", {}).get("value")

    def click(self, selector: str) -> str:
        """Click the first element matching ``selector``; wait for the next page; return its URL."""
        href = self.evaluate(f"(function(){{var a=document.querySelector({json.dumps(selector)});"
                             "if(!a){return null;} a.click(); return a.href;}())")
        if not href:
            raise LookupError(f"no element matches {selector}")
        self.wait_for("Page.loadEventFired")
        return str(self.evaluate("location.href"))

    def screenshot(self, path: Path) -> Path:
        data = self.call("Page.captureScreenshot", format="png", captureBeyondViewport=True)["data"]
        path.write_bytes(base64.b64decode(data))
        return path

    # what the pages did
    def requests(self) -> list[str]:
        return [e["params"]["request"]["url"] for e in self.events if e["method"] == "Network.requestWillBeSent"]

    def problems(self) -> list[str]:
        out = []
        for e in self.events:
            p = e.get("params", {})
            if e["method"] == "Runtime.exceptionThrown":
                out.append("exception: " + str(p.get("exceptionDetails", {}).get("text")))
            elif e["method"] == "Runtime.consoleAPICalled" and p.get("type") in ("error", "assert"):
                out.append("console: " + json.dumps(p.get("args")))
            elif e["method"] == "Log.entryAdded" and p.get("entry", {}).get("level") == "error":
                out.append("log: " + str(p["entry"].get("text")) + " " + str(p["entry"].get("url", "")))
            elif e["method"] == "Network.loadingFailed":
                out.append("failed load: " + str(p.get("errorText")))
        return out

    def close(self) -> None:
        try:
            if getattr(self, "ws", None) is not None:
                try:
                    self.call("Browser.close")
                except Exception:  # the browser may already be gone
                    pass
                self.ws.close()
        finally:
            try:
                self.proc.wait(timeout=10)
            except subprocess.TimeoutExpired:
                self.proc.kill()
                self.proc.wait()
