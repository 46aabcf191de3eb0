"""Headless Chromium driven through its DevTools protocol over a pipe (no port, no extra package).

Chromium reads commands on fd 3 and writes replies and events on fd 4, each a JSON message ended
by a NUL byte.  Started with the flags Debian's chromium needs on a closed network, and a fresh
profile folder.
"""
from __future__ import annotations

import base64
import json
import os
import shutil
import subprocess
import tempfile
import time

FLAGS = ("--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
         "--disable-component-update", "--disable-sync", "--no-first-run", "--disable-quic",
         "--remote-debugging-pipe")


def chromium_path() -> str | None:
    for name in ("chromium", "chromium-browser", "google-chrome"):
        found = shutil.which(name)
        if found:
            return found
    return None


class Browser:
    """One browser process; ``page()`` opens a tab and returns its session id."""

    def __init__(self, executable: str) -> None:
        self.profile = tempfile.mkdtemp(prefix="pricefold-chromium-")
        to_browser_read, self._to_browser = os.pipe()
        self._from_browser, from_browser_write = os.pipe()

        def wire():  # the browser expects the pipe on fds 3 and 4
            os.dup2(to_browser_read, 100)
            os.dup2(from_browser_write, 101)
            os.dup2(100, 3)
            os.dup2(101, 4)

        self.process = subprocess.Popen([executable, *FLAGS, f"--user-data-dir={self.profile}", "about:blank"],
                                        stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, close_fds=False,
                                        preexec_fn=wire)
        os.close(to_browser_read)
        os.close(from_browser_write)
        self._buffer = b""
        self._next = 0
        self.events: list[dict] = []

    def send(self, method: str, params: dict | None = None, session: str | None = None, timeout: float = 30.0):
        self._next += 1
        message = {"id": self._next, "method": method, "params": params or {}}
        if session:
            message["sessionId"] = session
        os.write(self._to_browser, json.dumps(message).encode() + b"\0")
        deadline = time.monotonic() + timeout
        while True:
            reply = self._read(deadline)
            if reply.get("id") == self._next:
                if "error" in reply:
                    raise RuntimeError(f"{method}: {reply['error']}")
                return reply.get("result", {})
            self.events.append(reply)

    def _read(self, deadline: float) -> dict:
        while b"\0" not in self._buffer:
            if time.monotonic() > deadline:
                raise TimeoutError("the browser did not answer in time")
            chunk = os.read(self._from_browser, 1 << 16)
            if not chunk:
                raise RuntimeError("the browser closed its pipe")
            self._buffer += chunk
        message, self._buffer = self._buffer.split(b"\0", 1)
        return json.loads(message)

    def wait_for(self, method: str, session: str, timeout: float = 30.0) -> dict:
        """The first event ``method`` of ``session`` not yet seen (events already read count)."""
        deadline = time.monotonic() + timeout
        while True:
            for i, event in enumerate(self.events):
                if event.get("method") == method and event.get("sessionId") == session:
                    return self.events.pop(i)
            self.events.append(self._read(deadline))

    def page(self, width: int, height: int, mobile: bool = False, scripts: bool = True) -> str:
        target = self.send("Target.createTarget", {"url": "about:blank"})["targetId"]
        session = self.send("Target.attachToTarget", {"targetId": target, "flatten": True})["sessionId"]
        for domain in ("Page", "Network", "Runtime", "Log"):
            self.send(f"{domain}.enable", session=session)
        self.send("Emulation.setDeviceMetricsOverride", {"width": width, "height": height, "deviceScaleFactor": 1,
                                                         "mobile": mobile}, session=session)
        if not scripts:
            self.send("Emulation.setScriptExecutionDisabled", {"value": True}, session=session)
        return session

    def open(self, session: str, url: str) -> None:
        self.send("Page.navigate", {"url": url}, session=session)
        self.wait_for("Page.loadEventFired", session)

    def evaluate(self, session: str, expression: str):
        result = self.send("Runtime.evaluate", {"expression": expression, "returnByValue": True}, session=session)
        if "exceptionDetails" in result:
            raise RuntimeError(result["exceptionDetails"])
        return result["result"].get("value")

    def screenshot(self, session: str, path, full_page: bool = False) -> None:
        params = {"format": "png"}
        if full_page:
            params["captureBeyondViewport"] = True
            size = self.send("Page.getLayoutMetrics", session=session)["cssContentSize"]
            params["clip"] = {"x": 0, "y": 0, "width": size["width"], "height": min(size["height"], 12000), "scale": 1}
        data = self.send("Page.captureScreenshot", params, session=session)["data"]
        with open(path, "wb") as handle:
            handle.write(base64.b64decode(data))

    def session_events(self, session: str, prefix: str) -> list[dict]:
        return [e for e in self.events if e.get("sessionId") == session and e.get("method", "").startswith(prefix)]

    def close(self) -> None:
        try:
            self.send("Browser.close", timeout=5)
        except (RuntimeError, TimeoutError, OSError):
            pass
        try:
            self.process.wait(10)
        except subprocess.TimeoutExpired:
            self.process.kill()
            self.process.wait()
        for fd in (self._to_browser, self._from_browser):
            try:
                os.close(fd)
            except OSError:
                pass
        shutil.rmtree(self.profile, ignore_errors=True)
