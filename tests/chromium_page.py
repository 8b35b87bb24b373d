"""Load a local page in headless Chromium and report what happened: the requests it made, console errors,
what it rendered, and a screenshot.

Chromium is driven through its DevTools protocol over a pipe (``--remote-debugging-pipe``: JSON messages
separated by NUL bytes on file descriptors 3 and 4), with the standard library only. Chosen over selenium
(needs chromium-driver of the same version and a Python package) and over ``--dump-dom`` (which shows
neither the requests made nor the console errors): the protocol reports every request
(``Network.requestWillBeSent``), every console message and uncaught error, and can evaluate the rendered
page and take a screenshot.
"""

from __future__ import annotations

import base64
import json
import os
import shutil
import subprocess
import tempfile
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

# The flags this machine needs (sandbox-less container, no GPU, nothing fetched by the browser itself).
FLAGS = [
    "--headless",
    "--no-sandbox",
    "--disable-gpu",
    "--disable-quic",
    "--no-first-run",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
    "--remote-debugging-pipe",
]


def find_chromium() -> str | None:
    for name in ("chromium", "chromium-browser", "google-chrome"):
        path = shutil.which(name)
        if path:
            return path
    return None


@dataclass
class PageVisit:
    """What loading a page did."""

    requests: list[str] = field(default_factory=list)  # every URL the page asked for
    console_errors: list[str] = field(default_factory=list)  # console.error, uncaught exceptions, error logs
    facts: dict[str, Any] = field(default_factory=dict)  # the values of the evaluated expression
    screenshot: Path | None = None

    @property
    def network_requests(self) -> list[str]:
        """Requests that would leave the machine (anything but the file itself and data: URIs)."""
        return [u for u in self.requests if not u.startswith(("file:", "data:", "about:"))]


class _Pipe:
    def __init__(self, write_fd: int, read_fd: int) -> None:
        self.write_fd, self.read_fd = write_fd, read_fd
        self.buffer = b""
        self.next_id = 0
        self.events: list[dict[str, Any]] = []

    def send(self, method: str, params: dict[str, Any] | None = None, session: str | None = None) -> int:
        self.next_id += 1
        message: dict[str, Any] = {"id": self.next_id, "method": method, "params": params or {}}
        if session:
            message["sessionId"] = session
        os.write(self.write_fd, json.dumps(message).encode() + b"\0")
        return self.next_id

    def _read_one(self, deadline: float) -> dict[str, Any]:
        while b"\0" not in self.buffer:
            if time.monotonic() > deadline:
                raise TimeoutError("chromium did not answer in time")
            chunk = os.read(self.read_fd, 1 << 16)
            if not chunk:
                raise RuntimeError("chromium closed the DevTools pipe")
            self.buffer += chunk
        raw, self.buffer = self.buffer.split(b"\0", 1)
        return json.loads(raw)

    def call(self, method: str, params: dict[str, Any] | None = None, session: str | None = None) -> dict:
        wanted = self.send(method, params, session)
        deadline = time.monotonic() + 60
        while True:
            message = self._read_one(deadline)
            if message.get("id") == wanted:
                if "error" in message:
                    raise RuntimeError(f"{method}: {message['error']}")
                return message.get("result", {})
            self.events.append(message)

    def wait_for(self, method: str, timeout: float = 60) -> None:
        deadline = time.monotonic() + timeout
        while not any(e.get("method") == method for e in self.events):
            self.events.append(self._read_one(deadline))


def _collect(events: list[dict[str, Any]], visit: PageVisit) -> None:
    for event in events:
        method, params = event.get("method"), event.get("params", {})
        if method == "Network.requestWillBeSent":
            visit.requests.append(params["request"]["url"])
        elif method == "Runtime.consoleAPICalled" and params.get("type") in ("error", "assert"):
            visit.console_errors.append(" ".join(str(a.get("value", a.get("description"))) for a in params["args"]))
        elif method == "Runtime.exceptionThrown":
            visit.console_errors.append(params["exceptionDetails"].get("text", "exception"))
        elif method == "Log.entryAdded" and params["entry"].get("level") == "error":
            visit.console_errors.append(params["entry"].get("text", ""))


def visit_page(page: Path, expression: str, screenshot: Path, width: int = 1200, height: int = 900) -> PageVisit:
    """Open ``page`` in a fresh headless Chromium (new empty profile), wait for its load event, evaluate
    ``expression`` (JavaScript returning a JSON-able value) and save a full-page screenshot."""
    binary = find_chromium()
    assert binary, "chromium is not installed"
    to_browser_r, to_browser_w = os.pipe()
    from_browser_r, from_browser_w = os.pipe()

    def _child_fds() -> None:  # Chromium reads commands on fd 3 and writes answers on fd 4
        os.dup2(to_browser_r, 3)
        os.dup2(from_browser_w, 4)

    with tempfile.TemporaryDirectory(prefix="airhealth-chromium-") as profile:
        process = subprocess.Popen(
            [binary, *FLAGS, f"--user-data-dir={profile}", f"--window-size={width},{height}", "about:blank"],
            stdin=subprocess.DEVNULL,
            stdout=subprocess.DEVNULL,
            stderr=subprocess.DEVNULL,
            pass_fds=(3, 4),
            preexec_fn=_child_fds,  # a test helper: no threads are running
        )
        os.close(to_browser_r)
        os.close(from_browser_w)
        pipe = _Pipe(to_browser_w, from_browser_r)
        try:
            return _drive(pipe, page, expression, screenshot, width)
        finally:
            try:
                pipe.send("Browser.close")
            except OSError:
                pass
            try:
                process.wait(timeout=20)
            except subprocess.TimeoutExpired:
                process.kill()
                process.wait()
            os.close(to_browser_w)
            os.close(from_browser_r)


def _drive(pipe: _Pipe, page: Path, expression: str, screenshot: Path, width: int) -> PageVisit:
    target = pipe.call("Target.createTarget", {"url": "about:blank"})["targetId"]
    session = pipe.call("Target.attachToTarget", {"targetId": target, "flatten": True})["sessionId"]
    for domain in ("Network", "Runtime", "Log", "Page"):
        pipe.call(f"{domain}.enable", session=session)
    pipe.events.clear()  # only what the report page does
    pipe.call("Page.navigate", {"url": page.resolve().as_uri()}, session=session)
    pipe.wait_for("Page.loadEventFired")
    result = pipe.call(
        "Runtime.evaluate", {"expression": expression, "returnByValue": True, "awaitPromise": True}, session=session
    )
    visit = PageVisit(facts=result["result"].get("value") or {})
    metrics = pipe.call("Page.getLayoutMetrics", session=session)["cssContentSize"]
    shot = pipe.call(
        "Page.captureScreenshot",
        {
            "format": "png",
            "captureBeyondViewport": True,
            "clip": {"x": 0, "y": 0, "width": width, "height": min(metrics["height"], 16000), "scale": 0.5},
        },
        session=session,
    )
    screenshot.write_bytes(base64.b64decode(shot["data"]))
    visit.screenshot = screenshot
    _collect(pipe.events, visit)
    return visit
